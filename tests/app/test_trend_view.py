"""The trend view on the demo archive: F-201's fan drive-end trend (one point per survey,
the plan's alert and danger lines, the forecast), clicking a run's point, the waterfall
in Hz and in orders, and P-102's pump drive-end spectrum against its baseline."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import math  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from PySide6.QtCore import Qt  # noqa: E402

from app.trend_data import display_unit, load_trends, value_choices  # noqa: E402
from app.trend_panel import csv_name  # noqa: E402
from app.trend_view import TrendView  # noqa: E402
from app.waterfall_panel import to_db  # noqa: E402
from engine.alarms.baseline import MIN_BASELINE_RUNS  # noqa: E402
from engine.pipeline import plan_in_force  # noqa: E402
from engine.trends import read_trend_csv  # noqa: E402

FAN_DE = "Demo Works/F-201/fan DE H"
MIXER_DE = "Demo Works/M-501/mixer DE H"
P102_DE = "Demo Works/P-102/pump DE H"
OVERALL = "overall_velocity_mm_s"
SURVEYS = 16         # engine.demo_plant: about sixteen weekly surveys, one run per point each


@pytest.fixture
def view(qtbot, app_context):
    v = TrendView(app_context, None)
    qtbot.addWidget(v)
    v.resize(1300, 850)
    v.show()
    qtbot.waitExposed(v)
    yield v
    app_context.jobs.stop_all()


def show(qtbot, view, point, run_id=None, panel=None):
    """Show ``point`` and wait until ``panel`` (default the trend tab) has drawn it."""
    panel = panel or view.trend
    view.tabs.setCurrentWidget(panel)
    with qtbot.waitSignal(panel.shown, timeout=30000) as blocker:
        view.show_point(point, run_id)
    return blocker.args[0]


# -- the trend tab ----------------------------------------------------------------------
def test_fan_overall_velocity_trend(qtbot, view, app_context):
    ts = show(qtbot, view, FAN_DE)
    assert [td.value for td in ts.trends] == [OVERALL]       # the default value
    assert len(view.trend.plots) == 1
    plot = view.trend.plots[0]
    spots = plot.scatter.points()
    assert len(spots) == SURVEYS                               # one point per survey
    arc = app_context.archive()
    runs = arc.runs(FAN_DE)
    assert [s.data() for s in spots] == [r.run_id for r in runs]
    # Each spot sits at its run's date (s since 1970 UTC) and stored overall value.
    rows = arc.value_rows(FAN_DE)
    assert [s.pos().x() for s in spots] == pytest.approx([r.taken_s for r in runs])
    assert [s.pos().y() for s in spots] == pytest.approx(list(rows[OVERALL]))
    # The plan in force is the ISO default for F-201 (group 2, flexible foundation):
    # alert at the zone B/C boundary 4.5 mm/s, danger at C/D 7.1 mm/s (ISO 20816-3).
    band = plan_in_force(arc, FAN_DE).band("overall velocity")
    assert (band.alert, band.danger) == (4.5, 7.1)
    assert plot.alert_line.value() == pytest.approx(band.alert)
    assert plot.danger_line.value() == pytest.approx(band.danger)
    # Forecast: the fan's 1× grows, so the overall level rises and a curve is drawn.
    x, y = plot.forecast_curve.getData()
    assert x is not None and x.size > 0 and np.isfinite(y).all()
    assert x[-1] > runs[-1].taken_s                            # extrapolated beyond the data
    lx, ly = plot.low_curve.getData()
    hx, hy = plot.high_curve.getData()
    assert (ly <= y + 1e-9).all() and (hy >= y - 1e-9).all()   # the interval holds the curve
    f = ts.trends[0].forecast
    assert f.status == "forecast" and f.model in ("linear", "exponential")
    text = view.trend.readout.text()
    assert f.model in text and "alert" in text and "danger" in text
    # The expected alert date lies where the curve reaches the alert level (the fit is
    # monotonic, so interpolating the curve's inverse gives the crossing).
    t_cross = float(np.interp(band.alert, y, x))
    assert abs(t_cross - f.alert_date_s) < 2 * float(np.diff(x).max())


def test_reads_off_the_gui_thread(qtbot, view):
    view.tabs.setCurrentWidget(view.trend)
    with qtbot.waitSignal(view.trend.shown, timeout=30000):
        view.show_point(FAN_DE, None)
        # Nothing was read on the GUI thread: the call returned with a job running.
        assert view.trend.result is None and view.trend.job is not None
    assert view.trend.job.done


def test_us_units_and_hidden_tabs(qtbot, view, app_context):
    show(qtbot, view, FAN_DE)
    assert view.waterfall.result is None and view.compare.result is None   # not shown yet
    app_context.set_units("US")
    plot = view.trend.plots[0]
    inch_mm = 25.4          # 1 in = 25.4 mm exactly (NIST SP 811)
    assert plot.alert_line.value() == pytest.approx(4.5 / inch_mm)
    td = view.trend.result.trends[0]
    assert plot.scatter.points()[-1].pos().y() == pytest.approx(td.values[-1] / inch_mm)
    assert plot.widget.getPlotItem().getAxis("left").labelText == "in/s RMS"


def test_points_coloured_and_worded_by_state(qtbot, view, app_context):
    ts = show(qtbot, view, P102_DE)
    td = ts.trends[0]
    pal = app_context.palette
    plot = view.trend.plots[0]
    spots = plot.scatter.points()
    # Demo truth (engine.demo_archive): P-102 pump DE H goes alert at week 12, danger at 15.
    assert td.states[11] == "alert" and td.states[-1] == "danger"
    for spot, state in zip(spots, td.states):
        assert spot.brush().color().name() == pal.state(state).name()
    tip = plot._tip(spots[-1].pos().x(), spots[-1].pos().y(), spots[-1].data())
    assert "state: danger" in tip and spots[-1].data() in tip
    assert "danger" in view.trend.legend.text() and "alert" in view.trend.legend.text()


def test_clicking_a_point_selects_its_run(qtbot, view, app_context):
    show(qtbot, view, FAN_DE)
    scatter = view.trend.plots[0].scatter
    spot = scatter.points()[3]
    with qtbot.waitSignal(app_context.run_selected, timeout=2000) as blocker:
        scatter.sigClicked.emit(scatter, [spot], None)
    assert blocker.args == [spot.data()]
    assert app_context.run_id == spot.data() == app_context.archive().runs(FAN_DE)[3].run_id
    ring = view.trend.plots[0].ring.points()
    assert len(ring) == 1 and ring[0].pos() == spot.pos()
    # The window shows the view again with the run chosen: the trends are not read again.
    job, result = view.trend.job, view.trend.result
    view.show_point(FAN_DE, spot.data())
    assert view.trend.job is job and view.trend.result is result


def test_several_values_stack_and_share_dates(qtbot, view):
    show(qtbot, view, FAN_DE)
    with qtbot.waitSignal(view.trend.shown, timeout=30000) as blocker:
        view.trend.set_values([OVERALL, "1x_mm_s", "band:1x"])
    ts = blocker.args[0]
    assert [td.value for td in ts.trends] == [OVERALL, "1x_mm_s", "band:1x"]
    assert len(view.trend.plots) == 3
    first = view.trend.plots[0].widget.getPlotItem().getViewBox()
    for plot in view.trend.plots[1:]:
        assert plot.widget.getPlotItem().getViewBox().linkedView(0) is first
    # The 1× amplitude has no level of its own (module notes of engine.trends); the band
    # "1x" carries the plan's levels.
    assert view.trend.plots[1].alert_line is None
    assert view.trend.plots[2].alert_line is not None
    items = [view.trend.values_list.item(i) for i in range(view.trend.values_list.count())]
    checked = [it.data(Qt.ItemDataRole.UserRole) for it in items
               if it.checkState() == Qt.CheckState.Checked]
    assert checked == [OVERALL, "1x_mm_s", "band:1x"]


def test_csv_export_round_trip(qtbot, view, tmp_path):
    ts = show(qtbot, view, FAN_DE)
    path = tmp_path / csv_name(FAN_DE, OVERALL)
    assert path.name == "F-201_fan-DE-H_overall_velocity_mm_s.csv"
    with qtbot.waitSignal(view.trend.exported, timeout=10000):
        view.trend.export_csv(OVERALL, path)
    back = read_trend_csv(path)
    assert back.values == pytest.approx(ts.trends[0].values, rel=0, abs=0)
    assert back.run_ids == ts.trends[0].run_ids and back.alert == 4.5


def test_value_choices_and_units(app_context):
    arc = app_context.archive()
    choices = {c.name: c for c in value_choices(arc, FAN_DE)}
    assert choices[OVERALL].unit == "mm/s RMS" and choices[OVERALL].count == SURVEYS
    assert choices["band:1x"].unit == "mm/s RMS" and choices["band:overall velocity"].count
    ts = load_trends(arc, FAN_DE, ["not a value"])
    assert [td.value for td in ts.trends] == [OVERALL]          # falls back to the default
    # 1 in = 25.4 mm exactly (NIST SP 811, the international inch of 1959).
    factor, unit = display_unit("mm/s RMS", "US")
    assert factor == pytest.approx(1 / 25.4, rel=1e-15) and unit == "in/s RMS"
    assert display_unit("g 0-peak", "US") == (1.0, "g 0-peak")


# -- the waterfall tab ------------------------------------------------------------------
def test_waterfall_one_row_per_run(qtbot, view, app_context):
    panel = view.waterfall
    panel.set_orders(False)
    w = show(qtbot, view, FAN_DE, panel=panel)
    n = len(app_context.archive().runs(FAN_DE))
    assert len(w.run_ids) == n == SURVEYS
    assert len(panel.cascade_curves) == n
    assert panel.image.image.shape == (n, w.axis.size)
    # Newest in front: the last run is the bottom row and is drawn over the others.
    zs = [c.zValue() for c in panel.cascade_curves]
    assert zs == sorted(zs) and zs[-1] == max(zs)
    x, y = panel.cascade_curves[-1].getData()
    assert y == pytest.approx(w.matrix[-1])                   # offset 0, amplitudes as stored
    # Colour map in dB re the largest line: 20·log10(a / a_max) (definition of the dB of
    # an amplitude ratio, ISO 80000-3 / ISO 1683 convention).
    a = w.matrix
    expected = np.clip(20 * np.log10(np.maximum(a, 1e-300) / np.nanmax(a)), -60, 0)
    assert panel.image.image == pytest.approx(expected)
    panel.set_mode("map")
    assert panel.stack.currentWidget() is panel.map_plot


def test_waterfall_orders_put_every_1x_in_one_bin(qtbot, view):
    """M-501 runs at 1182–1217 rpm from week to week: in Hz its 1× wanders over more
    than one line of 0.625 Hz; in orders every run's 1× falls in the bin of order 1."""
    panel = view.waterfall
    panel.set_orders(False)
    hz = show(qtbot, view, MIXER_DE, panel=panel)
    steady = np.isfinite(hz.rpm)          # the run-up run has no single speed
    shaft_hz = hz.rpm[steady] / 60.0
    near = (hz.axis > 0.5 * shaft_hz.min()) & (hz.axis < 1.5 * shaft_hz.max())
    cols = np.flatnonzero(near)
    peaks_hz = cols[np.argmax(hz.matrix[steady][:, cols], axis=1)]
    # First principles: the 1× of a run is its shaft speed, rpm / 60 Hz.
    assert hz.axis[peaks_hz] == pytest.approx(shaft_hz, abs=hz.axis[1] - hz.axis[0])
    assert len(set(peaks_hz)) > 1
    with qtbot.waitSignal(panel.shown, timeout=30000) as blocker:
        panel.set_orders(True)
    w = blocker.args[0]
    assert w.axis_unit == "order" and len(panel.cascade_curves) == len(w.run_ids)
    assert w.run_ids == [r for r, ok in zip(hz.run_ids, steady) if ok]
    assert [d["run_id"] for d in w.left_out] == [r for r, ok in zip(hz.run_ids, steady)
                                                 if not ok]
    assert "Left out" in panel.header.text()
    near = (w.axis > 0.5) & (w.axis < 1.5)
    cols = np.flatnonzero(near)
    image = panel.image.image
    peaks = cols[np.argmax(image[:, cols], axis=1)]
    assert len(set(peaks)) == 1 and w.axis[peaks[0]] == pytest.approx(1.0)


def test_to_db_floor():
    m = np.array([[1.0, 0.1, 0.0], [np.nan, 0.01, 1e-9]])
    # 20·log10(0.1) = −20 dB, 20·log10(0.01) = −40 dB (definition of the dB).
    assert to_db(m) == pytest.approx(np.array([[0.0, -20.0, -60.0], [-60.0, -40.0, -60.0]]))


# -- the compare tab --------------------------------------------------------------------
def test_compare_latest_against_baseline(qtbot, view, app_context):
    arc = app_context.archive()
    latest = arc.runs(P102_DE)[-1].run_id
    res = show(qtbot, view, P102_DE, run_id=latest, panel=view.compare)
    comp = res.comparison
    assert comp.run_id == latest and comp.reference == "baseline"
    assert len(comp.reference_runs) == MIN_BASELINE_RUNS
    assert comp.rises and comp.rises[0]["db"] > 0
    table = view.compare.rises_table
    assert table.rowCount() == len(comp.rises)
    assert float(table.item(0, 4).text()) == pytest.approx(comp.rises[0]["db"], abs=0.05)
    assert float(table.item(0, 4).text()) > 0
    # Recompute the top rise from the stored spectra with numpy: the baseline is the
    # power mean of the first runs, dB = 20·log10(run / reference) (definition).
    f0 = comp.rises[0]["frequency_hz"]
    cur = arc.results(latest).spectrum
    i = int(np.argmin(np.abs(cur.frequency_hz - f0)))
    ref_ms = np.mean([arc.results(r).spectrum.mean_square[i] for r in comp.reference_runs])
    db = 20 * np.log10(math.sqrt(cur.mean_square[i]) / math.sqrt(ref_ms))
    assert comp.rises[0]["db"] == pytest.approx(db, abs=1e-6) and db > 0
    x, y = view.compare.db_curve.getData()
    assert y[i] == pytest.approx(db, abs=1e-6)
    # The outer-race defect of P-102's pump DE bearing (engine.demo_plant) shows as BPFO
    # lines: the rises name the bearing's BPFO family.
    assert any("BPFO" in r["source"] for r in comp.rises)
    table.selectRow(0)
    assert [line.value() for line in view.compare.highlight] == [f0, f0]


def test_compare_against_a_chosen_run(qtbot, view, app_context):
    arc = app_context.archive()
    runs = arc.runs(P102_DE)
    show(qtbot, view, P102_DE, run_id=runs[-1].run_id, panel=view.compare)
    with qtbot.waitSignal(view.compare.shown, timeout=30000) as blocker:
        view.compare.set_reference(runs[-1].run_id)
    comp = blocker.args[0].comparison
    # A run against itself: 0 dB on every line, and no rise.
    assert comp.reference == runs[-1].run_id
    assert np.abs(comp.db).max() == pytest.approx(0.0, abs=1e-9) and comp.rises == []
    assert view.compare.ref_combo.currentData() == runs[-1].run_id
