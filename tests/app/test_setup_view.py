"""The setup view on a writable copy of the demo archive: the alarm-plan editor (table,
bands drawn on the spectrum, dragging, validation, Apply and what it changed, ISO
defaults, baseline, plan files, copy), the machine-model editor (bearings and their
defect orders, saving, a bad entry) and the point settings."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import math  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from PySide6.QtCore import QEvent, QPoint, QPointF, Qt  # noqa: E402
from PySide6.QtGui import QMouseEvent  # noqa: E402
from PySide6.QtWidgets import QApplication, QMessageBox  # noqa: E402

from app.context import AppContext  # noqa: E402
from app.setup_view import SetupView  # noqa: E402
from engine.archive import open_archive  # noqa: E402
from engine.bearings import defect_orders  # noqa: E402

P102_DE = "Demo Works/P-102/pump DE H"
P101_DE = "Demo Works/P-101/pump DE H"
P101_V = "Demo Works/P-101/pump DE V"


@pytest.fixture
def ctx(qapp, demo_archive_copy, prefs):
    c = AppContext(demo_archive_copy, prefs=prefs)
    yield c
    c.close()


@pytest.fixture
def view(qtbot, ctx):
    v = SetupView(ctx, None)
    qtbot.addWidget(v)
    v.resize(1400, 900)
    v.show()
    yield v
    ctx.jobs.stop_all()


def set_cell(editor, row: int, key: str, text: str) -> None:
    """Type ``text`` into a cell as the user would (the item's text changes)."""
    editor.table.table.item(row, editor.table.keys.index(key)).setText(text)


def plant_bytes(path) -> bytes:
    return (path / "plant.h5").read_bytes()


def error_text(box: QMessageBox) -> str:
    return f"{box.text()}\n{box.informativeText()}"


# -- plan editor -------------------------------------------------------------------------
def test_plan_editor_shows_the_three_bands_on_the_spectrum(view):
    view.show_point(P102_DE, None)
    ed = view.plan
    names = ["overall velocity", "1x", "2x"]
    assert [r["name"] for r in ed.table.rows()] == names
    assert ed.layer.drawn_names() == names
    assert "valid: 3 bands" in ed.validation.text()
    # The stored spectrum of the latest run is drawn (mm/s RMS, up to Fmax 1000 Hz).
    x, y = ed.curve.getData()
    assert x[-1] == pytest.approx(1000.0) and y.max() > 0
    # An order band sits at order × shaft speed: shaft Hz = rpm / 60 (first principles).
    shaft_hz = ed.results.rpm / 60.0
    lo, hi = ed.layer.region(ed.band_index("1x")).getRegion()
    assert (lo, hi) == pytest.approx((0.9 * shaft_hz, 1.1 * shaft_hz))
    # The overall band without edges covers the broadband range 10–1000 Hz (ISO 20816-1).
    assert ed.layer.region(ed.band_index("overall velocity")).getRegion() == \
        pytest.approx((10.0, 1000.0))
    # Alert and danger lines at the plan's levels, drawn across their band only.
    alert = ed.layer.line(ed.band_index("1x"), "alert")
    assert alert.value() == pytest.approx(ed.bands[1].alert)
    assert alert.x_range == pytest.approx((lo, hi))


def test_dragging_the_alert_line_changes_the_table_and_the_plan(view):
    view.show_point(P102_DE, None)
    ed = view.plan
    i = ed.band_index("overall velocity")
    line = ed.layer.line(i, "alert")
    line.setValue(2.0)                           # where a drag leaves the line …
    line.sigPositionChangeFinished.emit(line)    # … and the signal a drag ends with
    assert ed.table.text(i, "alert") == "2"
    assert ed.plan().band("overall velocity").alert == 2.0
    assert ed.dirty and "edited, not applied" in ed.header.text()

    # Dragging the 1× band's region: the table shows the new edges in orders.
    j = ed.band_index("1x")
    shaft_hz = ed.results.rpm / 60.0
    ed.layer.region(j).setRegion((0.8 * shaft_hz, 1.2 * shaft_hz))
    assert (ed.table.text(j, "low"), ed.table.text(j, "high")) == ("0.8", "1.2")
    assert ed.plan().band("1x").basis == "order"

    # And the other way: a table edit moves the drawing.
    set_cell(ed, j, "danger", "6")
    assert ed.layer.line(j, "danger").value() == pytest.approx(6.0)


def mouse_drag(plot, start: QPointF, end: QPointF, steps: int = 12) -> None:
    """Press, move and release the left button on a plot, from ``start`` to ``end``
    (view coordinates: Hz, amplitude), as the user's mouse does."""
    vb = plot.getPlotItem().getViewBox()
    vp = plot.viewport()

    def at(p: QPointF) -> QPoint:
        return plot.mapFromScene(vb.mapViewToScene(p))

    def send(kind, pos: QPoint, button, buttons) -> None:
        QApplication.sendEvent(vp, QMouseEvent(kind, QPointF(pos), QPointF(vp.mapToGlobal(pos)),
                                               button, buttons, Qt.KeyboardModifier.NoModifier))
        QApplication.processEvents()

    a, b = at(start), at(end)
    left = Qt.MouseButton.LeftButton
    send(QEvent.Type.MouseButtonPress, a, left, left)
    for k in range(1, steps + 1):
        p = QPoint(a.x() + (b.x() - a.x()) * k // steps, a.y() + (b.y() - a.y()) * k // steps)
        send(QEvent.Type.MouseMove, p, Qt.MouseButton.NoButton, left)
    send(QEvent.Type.MouseButtonRelease, b, left, Qt.MouseButton.NoButton)


def test_a_mouse_drag_moves_a_level_and_an_edge(qtbot, view):
    view.show_point(P102_DE, None)
    ed = view.plan
    j = ed.band_index("1x")
    assert ed.zoom_to_band(j)
    qtbot.wait(50)
    lo, hi = ed.layer.region(j).getRegion()
    mouse_drag(ed.plot, QPointF(0.5 * (lo + hi), ed.bands[j].alert), QPointF(0.5 * (lo + hi), 1.5))
    # Levels dragged by hand are kept to three significant digits.
    assert ed.plan().band("1x").alert == pytest.approx(1.5, rel=0.02)
    assert ed.table.text(j, "alert") == f"{ed.plan().band('1x').alert:g}"
    mouse_drag(ed.plot, QPointF(lo, 0.3), QPointF(lo - 1.0, 0.3))
    new_lo, _ = ed.layer.region(j).getRegion()
    assert new_lo < lo - 0.5
    # The table shows the edge in orders: Hz / shaft Hz (first principles), 3 decimals.
    assert float(ed.table.text(j, "low")) == pytest.approx(new_lo / (ed.results.rpm / 60.0),
                                                           abs=6e-4)


def test_apply_with_a_lower_alert_changes_the_earlier_runs(qtbot, view, demo_archive_copy):
    view.show_point(P101_DE, None)
    ed = view.plan
    with open_archive(demo_archive_copy) as arc:
        before = arc.value_rows(P101_DE)
    assert set(before["state"]) == {"ok"}
    i = ed.band_index("overall velocity")
    set_cell(ed, i, "alert", "1.0")
    with qtbot.waitSignal(ed.applied, timeout=30000) as blocker:
        ed.apply()
    summary = blocker.args[0]
    assert summary.points[P101_DE] == ("ok", "alert")
    with open_archive(demo_archive_copy) as arc:
        after = arc.value_rows(P101_DE)
        stored = arc.plan(P101_DE)
    assert stored.band("overall velocity").alert == 1.0
    # A value at or above the alert level has crossed it (the plan's definition): every
    # run whose overall velocity is ≥ 1.0 mm/s is now in alert (all 16, about 1.2 mm/s).
    crossed = after["overall_velocity_mm_s"] >= 1.0
    assert crossed.all()
    assert list(after["state"]) == ["alert"] * after["run_id"].size
    assert len(summary.runs) == after["run_id"].size == 16
    assert {(r.before, r.now) for r in summary.runs} == {("ok", "alert")}
    text = ed.last_summary.text()
    assert f"{P101_DE}: ok → alert" in text
    assert ed.last_summary.runs_table.rowCount() == 16
    assert not ed.dirty and ed.table.text(i, "alert") == "1"
    assert "now" in view.header.text() and "alert" in view.header.text()


def test_an_invalid_edit_shows_the_error_and_stores_nothing(view, demo_archive_copy):
    view.show_point(P102_DE, None)
    ed = view.plan
    original = plant_bytes(demo_archive_copy)
    i = ed.band_index("overall velocity")
    set_cell(ed, i, "alert", "5")                # danger is 4.5
    assert "alert 5 must be below danger 4.5" in ed.validation.text()
    assert not ed.buttons["apply"].isEnabled()
    assert ed.apply() is None
    assert isinstance(ed.last_error, QMessageBox)
    assert "alert 5 must be below danger 4.5" in error_text(ed.last_error)
    assert "Traceback" not in error_text(ed.last_error)
    assert plant_bytes(demo_archive_copy) == original

    set_cell(ed, i, "alert", "abc")              # not a number: named by band and field
    assert "band 'overall velocity': alert must be a number, got 'abc'" in \
        ed.validation.text()
    assert ed.apply() is None
    assert plant_bytes(demo_archive_copy) == original


def test_iso_defaults_and_baseline_levels(qtbot, view, demo_archive_copy):
    view.show_point(P102_DE, None)
    ed = view.plan
    i = ed.band_index("overall velocity")
    set_cell(ed, i, "alert", "1.5")
    assert ed.iso_defaults()
    # ISO 20816-3, group 2, rigid: B/C 2.8 mm/s, C/D 4.5 mm/s (from memory of the
    # standard's table; engine.alarms.iso says so too).
    b = ed.plan().band("overall velocity")
    assert (b.alert, b.danger) == (2.8, 4.5)
    assert [x.name for x in ed.bands] == ["overall velocity", "1x", "2x"]

    job = ed.learn_baseline({"runs": 5, "method": "sigma", "k": 3.0, "danger_k": 6.0})
    qtbot.waitUntil(lambda: job.done, timeout=30000)
    qtbot.waitUntil(lambda: ed.origin == "baseline of 5 runs (sigma)", timeout=5000)
    # Reference: mean + 3σ and mean + 6σ (σ with ddof=1) of the first five overall
    # velocities, computed here with numpy.
    with open_archive(demo_archive_copy) as arc:
        rows = arc.value_rows(P102_DE)
    first = rows["overall_velocity_mm_s"][np.argsort(rows["taken_s"])[:5]]
    mean, sigma = float(np.mean(first)), float(np.std(first, ddof=1))
    b = ed.plan().band("overall velocity")
    assert b.alert == pytest.approx(mean + 3 * sigma, rel=1e-9)
    assert b.danger == pytest.approx(mean + 6 * sigma, rel=1e-9)
    assert ed.dirty                               # learnt, not stored until Apply


def test_plan_file_round_trip_and_copy_to_another_point(qtbot, view, demo_archive_copy,
                                                         tmp_path):
    view.show_point(P102_DE, None)
    ed = view.plan
    set_cell(ed, ed.band_index("2x"), "danger", "1.8")
    path = tmp_path / "plan.toml"
    assert ed.export_plan(path)
    exported = ed.plan().bands
    ed.revert()
    assert ed.plan().band("2x").danger != 1.8
    assert ed.import_plan(path)
    assert ed.plan().bands == exported
    assert not ed.import_plan(tmp_path / "missing.json")
    assert "missing.json" in error_text(ed.last_error)

    with qtbot.waitSignal(ed.applied, timeout=30000) as blocker:
        ed.apply([P101_V])
    assert set(blocker.args[0].points) == {P102_DE, P101_V}
    with open_archive(demo_archive_copy) as arc:
        assert arc.plan(P101_V).bands == exported
        assert arc.plan(P102_DE).bands == exported


# -- model editor ------------------------------------------------------------------------
def test_model_editor_shows_the_bearings_and_their_defect_orders(view):
    view.show_point(P102_DE, None)
    shown = {r["label"]: r for r in view.model.defect_orders_shown()}
    assert set(shown) == {"motor DE", "pump DE"}
    # BPFO = n/2 · (1 − d/D · cos α) orders (Harris & Kotzalas, Rolling Bearing
    # Analysis), worked by hand for the demo's bearings: pump DE, 9 × 17.5 mm on 80 mm:
    # 4.5 · (1 − 0.21875) = 3.515625; motor DE, 9 × 15.9 mm on 79.5 mm: 4.5 · 0.8 = 3.6.
    assert float(shown["pump DE"]["bpfo"]) == pytest.approx(3.515625, abs=5e-5)
    assert float(shown["motor DE"]["bpfo"]) == pytest.approx(3.6, abs=5e-5)
    # FTF = (1 − d/D · cos α) / 2 (same source): 0.390625 for the pump DE bearing.
    assert float(shown["pump DE"]["ftf"]) == pytest.approx(0.390625, abs=5e-5)
    model = view.ctx.archive().machine_model("Demo Works", "P-102")
    for b in model.bearings:
        assert shown[b.label]["bpfo"] == f"{defect_orders(b.geometry).bpfo:.4f}"


def test_saving_an_edited_ratio_stores_it(view, demo_archive_copy):
    view.show_point(P102_DE, None)
    m = view.model
    row = [r["name"] for r in m.shafts.rows()].index("pump")
    m.shafts.table.item(row, m.shafts.keys.index("ratio")).setText("0.98")
    assert m.save()
    with open_archive(demo_archive_copy) as arc:
        model = arc.machine_model("Demo Works", "P-102")
        ratios = arc.plant.machine("Demo Works", "P-102").ratios
    assert model.ratio("pump") == 0.98
    assert ratios["pump"] == 0.98
    assert "changed" in view.model_note.text()


def test_a_bad_model_entry_names_the_field_and_stores_nothing(view, demo_archive_copy):
    view.show_point(P102_DE, None)
    m = view.model
    original = plant_bytes(demo_archive_copy)
    row = [r["name"] for r in m.shafts.rows()].index("pump")
    m.shafts.table.item(row, m.shafts.keys.index("ratio")).setText("-1")
    assert not m.save()
    text = error_text(m.last_error)
    assert f"shafts[{row}].ratio must be a positive number" in text
    assert f"Shafts table, row {row + 1}, column Ratio" in text
    assert plant_bytes(demo_archive_copy) == original

    m.revert_button.click()
    b = [r["label"] for r in m.bearings.rows()].index("pump DE")
    m.bearings.table.item(b, m.bearings.keys.index("elements")).setText("two")
    assert m.defect_orders_shown()[b]["bpfo"] == "—"
    assert not m.save()
    assert f"bearings[{b}].geometry.elements must be a whole number, got 'two'" in \
        error_text(m.last_error)
    assert plant_bytes(demo_archive_copy) == original


# -- point settings ----------------------------------------------------------------------
def test_point_settings_store_and_offer_to_analyse_again(view, demo_archive_copy):
    view.show_point(P102_DE, None)
    s = view.settings
    assert s.fmax.text() == "1000" and s.lines.currentText() == "1600"
    # Line spacing Fmax / lines = 1000 / 1600 = 0.625 Hz (first principles).
    assert "0.625 Hz" in s.derived.text()
    s.lines.setCurrentText("800")
    s.location.setText("pump drive end")
    assert s.save()
    with open_archive(demo_archive_copy) as arc:
        props = arc.point(P102_DE).props
    assert props["lines"] == 800 and props["location"] == "pump drive end"
    assert not s.offer.isHidden() and "lines" in s.offer_text.text()
    s.fmax.setText("fast")
    assert not s.save()
    assert "fmax_hz must be a number, got 'fast'" in error_text(s.last_error)
    assert not math.isnan(props["fmax_hz"])


@pytest.mark.slow
def test_analysing_again_uses_the_new_settings(qtbot, view, demo_archive_copy):
    view.show_point(P101_V, None)
    s = view.settings
    s.lines.setCurrentText("800")
    assert s.save()
    with qtbot.waitSignal(s.reprocessed, timeout=120000) as blocker:
        s.reprocess_button.click()
    summary = blocker.args[0]
    assert summary.evaluated == 16 and not summary.problems
    with open_archive(demo_archive_copy) as arc:
        rows = arc.runs(P101_V)
        lines = {arc.results(r.run_id).spectrum.lines for r in rows}
    assert lines == {800}
    assert s.offer.isHidden()


def test_a_geometry_goes_into_the_bearing_list(view, demo_archive_copy):
    view.show_point(P102_DE, None)
    m = view.model
    b = [r["label"] for r in m.bearings.rows()].index("pump DE")
    m.bearings.table.selectRow(b)
    m.bearings.table.item(b, m.bearings.keys.index("geometry")).setText("bearing Z (10 × 16 mm)")
    m.bearings.table.item(b, m.bearings.keys.index("elements")).setText("10")
    m.bearings.table.item(b, m.bearings.keys.index("element_diameter")).setText("16")
    # BPFO = n/2 · (1 − d/D) = 5 · (1 − 16/80) = 4.0 (Harris & Kotzalas), shown at once.
    assert m.defect_orders_shown()[b]["bpfo"] == "4.0000"
    assert m.add_to_bearing_list()
    with open_archive(demo_archive_copy) as arc:
        added = arc.bearing("bearing Z (10 × 16 mm)")
    assert (added.elements, added.element_diameter, added.pitch_diameter) == (10, 16.0, 80.0)
    assert "bearing Z (10 × 16 mm)" in [m.library.itemText(i) for i in range(m.library.count())]
    # The model being edited is kept while the archive is read again.
    assert m.dirty and m.defect_orders_shown()[b]["bpfo"] == "4.0000"
    m.library.setCurrentText("bearing B (9 × 17.5 mm)")
    assert m.use_library_bearing("bearing B (9 × 17.5 mm)")
    assert m.defect_orders_shown()[b]["bpfo"] == "3.5156"


def test_in_the_main_window_the_setup_tab_follows_the_selected_point(qtbot, ctx, monkeypatch):
    import app.main_window as main_window

    monkeypatch.setattr(main_window, "VIEWS",
                        main_window.VIEWS + [("Setup", "app.setup_view", "SetupView")])
    w = main_window.MainWindow(ctx)
    qtbot.addWidget(w)
    w.resize(1400, 900)
    w.show()
    view = w.view("Setup")
    w.tabs.setCurrentIndex([title for title, _ in w.views].index("Setup"))
    assert w.select_point(P101_DE)
    qtbot.waitUntil(lambda: view.point == P101_DE, timeout=5000)
    assert P101_DE in view.header.text() and "ok" in view.header.text()
    assert [r["name"] for r in view.plan.table.rows()] == ["overall velocity", "1x", "2x"]
    menus = [a.text() for a in w.menuBar().actions()]
    assert "&Setup" in menus
    # Ctrl+S on the plan tab with a plan that does not validate: an error, nothing stored.
    set_cell(view.plan, 0, "danger", "0.5")
    before = plant_bytes(ctx.archive_path)
    assert view.store_action.shortcut().toString() == "Ctrl+S"
    view.store_action.trigger()
    assert "alert 2.8 must be below danger 0.5" in error_text(view.plan.last_error)
    assert plant_bytes(ctx.archive_path) == before
    ctx.jobs.stop_all()
