"""The main window over the demo archive: the asset tree with states, selection, the run
list, keyboard shortcuts, themes and units, and the error dialog."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import re  # noqa: E402

import pytest  # noqa: E402
from PySide6.QtCore import QSize, Qt  # noqa: E402
from PySide6.QtWidgets import QApplication, QMessageBox  # noqa: E402

from app import dialogs  # noqa: E402
from app.context import AppContext  # noqa: E402
from app.main_window import VIEWS, MainWindow, load_view_class  # noqa: E402
from app.tree import KIND_ROLE, PATH_ROLE  # noqa: E402
from engine.demo_plant import PLANT  # noqa: E402

P102_DE = "Demo Works/P-102/pump DE H"

MACHINES = [m.tag for m in PLANT.machines]


def top_items(tree):
    return [tree.topLevelItem(i) for i in range(tree.topLevelItemCount())]


def children(item):
    return [item.child(i) for i in range(item.childCount())]


def wait_shown(qtbot, view, point, run_id=None):
    """Wait until the run view has drawn ``point`` (and ``run_id`` when given)."""
    qtbot.waitUntil(lambda: view.analysis is not None and view.analysis.point == point
                    and (run_id is None or view.analysis.run_id == run_id), timeout=30000)


def test_tree_lists_sites_machines_and_points(main_window):
    tree = main_window.tree.tree
    sites = top_items(tree)
    assert [s.text(0) for s in sites] == ["Demo Works"]
    machines = children(sites[0])
    assert sorted(m.text(0).split()[0] for m in machines) == sorted(MACHINES)
    for m in machines:
        points = children(m)
        assert len(points) == 3          # PRODUCT.md demo plant: three points per machine
        assert all(p.data(0, KIND_ROLE) == "point" for p in points)


def test_tree_shows_state_and_zone_by_word_and_colour(main_window, app_context):
    states = app_context.archive().point_states()
    tree = main_window.tree
    pal = app_context.palette
    for item in tree._point_items():
        st = states[item.data(0, PATH_ROLE)]
        assert item.text(1) == pal.state_word(st["state"])
        assert item.text(2) == st["zone"]
        assert not item.icon(1).isNull()
    # A machine row shows its worst point's state (danger > alert > ok).
    p102 = next(m for m in children(top_items(tree.tree)[0]) if m.text(0).startswith("P-102"))
    worst = max((states[p.data(0, PATH_ROLE)]["state"] for p in children(p102)),
                key=lambda s: {"danger": 3, "alert": 2, "ok": 1}.get(s, 0))
    assert p102.text(1) == pal.state_word(worst)


def test_worst_first_and_filter(main_window, app_context):
    tree = main_window.tree
    states = app_context.archive().point_states()
    tree.worst_first.setChecked(True)
    first = tree.points()[0]
    rank = {"danger": 5, "alert": 4, "bad data": 3, "ok": 2, "no data": 1, "": 0}
    assert rank[states[first]["state"]] == max(rank[s["state"]] for s in states.values())
    tree.filter.setText("P-102")
    assert len(tree.points()) == 3 and all(p.startswith("Demo Works/P-102/") for p in tree.points())
    tree.filter.setText("pump DE V")
    assert sorted(tree.points()) == ["Demo Works/P-101/pump DE V", "Demo Works/P-102/pump DE V"]
    tree.filter.clear()
    assert len(tree.points()) == 3 * len(MACHINES)


def test_selecting_a_point_shows_its_latest_run(qtbot, main_window, app_context):
    rows = app_context.archive().runs(P102_DE)
    assert main_window.select_point(P102_DE)
    view = main_window.view("Run")
    wait_shown(qtbot, view, P102_DE, rows[-1].run_id)
    assert main_window.runs.current_run() == rows[-1].run_id
    assert main_window.runs.run_ids() == [r.run_id for r in reversed(rows)]
    assert app_context.point == P102_DE and app_context.run_id == rows[-1].run_id
    # The run list shows the speed and overall velocity of each run (catalogue values).
    first = main_window.runs.table.topLevelItem(0)
    assert first.text(1) == f"{rows[-1].rpm:.0f}"
    assert first.text(2) == f"{rows[-1].velocity_rms_mm_s:.2f}"
    # Picking an older run in the list shows that run.
    main_window.runs.select_run(rows[0].run_id)
    wait_shown(qtbot, view, P102_DE, rows[0].run_id)


def test_point_and_run_shortcuts(qtbot, main_window):
    tree = main_window.tree
    order = tree.points()
    main_window.select_point(order[0])
    qtbot.keyClick(main_window, Qt.Key.Key_Down, Qt.KeyboardModifier.AltModifier)
    assert tree.current_point() == order[1]
    qtbot.keyClick(main_window, Qt.Key.Key_Down, Qt.KeyboardModifier.AltModifier)
    assert tree.current_point() == order[2]
    qtbot.keyClick(main_window, Qt.Key.Key_Up, Qt.KeyboardModifier.AltModifier)
    assert tree.current_point() == order[1]
    runs = main_window.runs
    ids = runs.run_ids()                                 # newest first
    assert runs.current_run() == ids[0]
    qtbot.keyClick(main_window, Qt.Key.Key_Left, Qt.KeyboardModifier.AltModifier)
    assert runs.current_run() == ids[1]                  # earlier run
    qtbot.keyClick(main_window, Qt.Key.Key_Right, Qt.KeyboardModifier.AltModifier)
    assert runs.current_run() == ids[0]                  # later run
    view = main_window.view("Run")
    wait_shown(qtbot, view, order[1], ids[0])


def test_shortcuts_dialog_and_about_box(qtbot, main_window):
    dlg = main_window.show_shortcuts()
    qtbot.addWidget(dlg)
    rows = dict(dlg.rows())
    assert rows["Alt+Down"] == "Next point" and rows["Alt+Up"] == "Previous point"
    assert rows["Alt+Right"] == "Later run" and rows["Alt+Left"] == "Earlier run"
    assert rows["M"] == "Markers" and rows["Z"] == "Zoom to band"
    text = dialogs.about_text()
    assert "it does not prove a machine safe" in text        # PRODUCT.md cautions
    assert "lock-out/tag-out" in text and "qualified, licensed personnel" in text
    import engine

    assert engine.__version__ in text


def test_view_registry_skips_missing_modules():
    assert VIEWS[0] == ("Run", "app.run_view", "RunView")
    assert ("Run-up", "app.runup_view", "RunupView") in VIEWS
    assert ("Live", "app.live_view", "LiveView") in VIEWS
    assert load_view_class("app.no_such_view_module", "View") is None
    with pytest.raises(AttributeError):
        load_view_class("app.run_view", "NoSuchClass")


def test_theme_and_units(qtbot, main_window, app_context):
    view = main_window.view("Run")
    main_window.select_point(P102_DE)
    wait_shown(qtbot, view, P102_DE)
    main_window.theme_actions["dark"].trigger()
    dark_bg = app_context.palette.ui("background")
    assert app_context.prefs.theme == "dark"
    assert view.spec_plot.backgroundBrush().color() == dark_bg
    assert QApplication.instance().palette().base().color() == dark_bg
    main_window.unit_actions["US"].trigger()
    assert app_context.prefs.units == "US"
    qtbot.waitUntil(lambda: view.analysis is not None and view.analysis.spectrum.unit == "in/s",
                    timeout=30000)
    item = next(i for i in main_window.tree._point_items() if i.data(0, PATH_ROLE) == P102_DE)
    mm_s = app_context.archive().point_states()[P102_DE]["overall_mm_s"]
    assert item.text(3) == f"{mm_s / 25.4:.3f} in/s"      # 1 in = 25.4 mm exactly
    assert main_window.runs.table.headerItem().text(2) == "Overall in/s"


def test_layout_is_remembered(qtbot, demo_archive_path, prefs):
    app_context = AppContext(demo_archive_path, prefs=prefs)
    w = MainWindow(app_context)
    qtbot.addWidget(w)
    w.show()
    qtbot.waitExposed(w)
    size = w.minimumSizeHint() + QSize(123, 45)
    w.resize(size)
    qtbot.waitUntil(lambda: w.size() == size)
    w.tree.worst_first.setChecked(True)
    w.dock.hide()
    w.close()                                    # saves the layout
    again = MainWindow(AppContext(app_context.archive_path, prefs=prefs))
    qtbot.addWidget(again)
    again.show()
    qtbot.waitExposed(again)
    # The offscreen screen is small: Qt fits a restored width to it, the height stays.
    assert again.size().height() == size.height()
    assert again.dock.isHidden()
    assert again.tree.worst_first.isChecked()
    again.ctx.close()


def test_unreadable_run_file_shows_an_error_dialog(qtbot, qapp, damaged_archive, prefs):
    path, point, run_id, run_file = damaged_archive
    ctx = AppContext(path, prefs=prefs)
    w = MainWindow(ctx)
    qtbot.addWidget(w)
    w.show()
    view = w.view("Run")
    with qtbot.waitSignal(view.failed, timeout=30000) as blocker:
        w.select_point(point)
    assert str(run_file) in blocker.args[0]

    def error_box():
        boxes = [b for b in qapp.topLevelWidgets() if isinstance(b, QMessageBox)
                 and b.objectName() == dialogs.ERROR_DIALOG_NAME and b.isVisible()]
        return boxes[-1] if boxes else None

    qtbot.waitUntil(lambda: error_box() is not None, timeout=5000)
    box = error_box()
    text = box.text() + "\n" + box.informativeText()
    assert "could not be shown" in text
    assert str(run_file) in text                      # which file
    assert "What to do:" in text and "shaftwatch check" in text
    assert "Traceback" not in text and not re.search(r'File ".*", line \d+', text)
    assert view.analysis is None and "could not be shown" in view.header.text()
    box.close()
    ctx.close()


def test_start_opens_the_last_archive_else_the_demo(qtbot, qapp, demo_archive_path, prefs,
                                                    tmp_path, monkeypatch):
    from app import main as app_main

    shown = []
    monkeypatch.setattr(app_main.Shaftwatch, "build_demo", lambda self, target:
                        shown.append(("build", target)))
    controller = app_main.Shaftwatch(qapp, prefs)
    prefs.set("archive/last", str(demo_archive_path))
    controller.start(None)                                  # the last archive exists
    assert controller.window is not None
    assert controller.window.ctx.archive_path == demo_archive_path
    qtbot.addWidget(controller.window)
    controller.window.close()
    controller.window = None
    prefs.set("archive/last", str(tmp_path / "gone.shaftwatch"))
    monkeypatch.setattr(app_main, "demo_archive_location", lambda: tmp_path / "demo.shaftwatch")
    controller.start(None)                                  # neither: build the demo
    assert shown == [("build", tmp_path / "demo.shaftwatch")]
    assert controller.window is None


def test_demo_build_cancelled_leaves_nothing(tmp_path):
    from app.jobs import Cancelled
    from app.main import build_demo

    target = tmp_path / "demo-works.shaftwatch"
    steps = []
    with pytest.raises(Cancelled):
        build_demo(target, lambda d, t, text: steps.append(d), lambda: len(steps) >= 3)
    assert steps == [1, 2, 3]
    assert not target.exists() and list(tmp_path.iterdir()) == []


def test_error_details_go_to_the_log_not_the_dialog(qtbot, tmp_path):
    import logging

    from app.logsetup import LOGGER_NAME, log_path, setup_logging

    path = setup_logging(tmp_path)
    try:
        assert log_path() == path
        box = dialogs.show_error(None, "Reading failed", "/data/x.h5: cannot be opened as HDF5",
                                 advice=dialogs.advice_for("cannot be opened as HDF5"),
                                 details='Traceback (most recent call last):\n  File "x.py"')
        qtbot.addWidget(box)
        text = box.informativeText()
        assert "/data/x.h5" in text and str(path) in text and "Traceback" not in text
        for h in logging.getLogger(LOGGER_NAME).handlers:
            h.flush()
        logged = path.read_text(encoding="utf-8")
        assert "Reading failed: /data/x.h5" in logged and "Traceback" in logged
    finally:
        logger = logging.getLogger(LOGGER_NAME)
        for h in list(logger.handlers):
            if getattr(h, "baseFilename", "") == str(path):
                logger.removeHandler(h)
                h.close()


def test_the_qt_bindings_keep_their_references(qapp):
    # PySide6 6.12.0 on Python 3.11 dropped a reference to None on every C++ call that
    # returns nothing, until Python aborted ("none_dealloc"); pyproject.toml excludes
    # that release.  This catches a binding with the fault before a user meets it.
    import sys

    from PySide6.QtWidgets import QLabel

    label = QLabel()
    before = sys.getrefcount(None)
    for i in range(20000):
        label.setText(str(i))
    assert sys.getrefcount(None) >= before - 100, "this PySide6 release loses references"


def test_a_run_picked_in_another_view_opens_in_the_run_view(main_window, app_context, qtbot):
    point = "Demo Works/F-201/fan DE H"
    assert main_window.select_point(point)
    first = app_context.archive().runs(point)[0].run_id
    for i in range(main_window.tabs.count()):
        if main_window.tabs.tabText(i).replace("&", "") == "Trend":
            main_window.tabs.setCurrentIndex(i)
    app_context.select_run(first)            # what a click on a trend point does
    assert main_window.tabs.tabText(main_window.tabs.currentIndex()).replace("&", "") == "Run"
    assert main_window.runs.current_run() == first
    assert app_context.run_id == first
