"""The main window: the asset tree and the run list in a dock on the left, the views as
tabs in the middle, menus, keyboard shortcuts and a status bar.

Views are listed in :data:`VIEWS` and imported when the window opens; a view whose
module is not there yet is left out.  Every view is a QWidget subclass built as
``View(ctx, parent)`` with a method ``show_point(point_path, run_id)``.
"""

from __future__ import annotations

import importlib
import importlib.util
import logging

from PySide6.QtCore import QByteArray, Qt, Signal
from PySide6.QtGui import QAction, QActionGroup, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QDockWidget,
    QFileDialog,
    QLabel,
    QMainWindow,
    QMenu,
    QProgressBar,
    QSplitter,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from . import dialogs
from .context import AppContext
from .run_list import RunList
from .tree import AssetTree, point_states_of

log = logging.getLogger("shaftwatch.app")

#: The central tabs: (tab title, module, class).  Each class is built as
#: ``View(ctx, parent)`` and has ``show_point(point_path, run_id)``.
VIEWS: list[tuple[str, str, str]] = [
    ("Run", "app.run_view", "RunView"),
    ("Run-up", "app.runup_view", "RunupView"),
    ("Live", "app.live_view", "LiveView"),
    ("Trend", "app.trend_view", "TrendView"),
    ("Setup", "app.setup_view", "SetupView"),
]


def load_view_class(module: str, name: str) -> type | None:
    """The view class ``name`` of ``module``, or None when that module does not exist
    (any other missing module is an error and is raised)."""
    try:
        mod = importlib.import_module(module)
    except ModuleNotFoundError as exc:
        if exc.name == module:
            return None
        raise
    return getattr(mod, name)


class ViewHost(QWidget):
    """A tab's place for one view of :data:`VIEWS`, built the first time it is needed.

    A view that cannot be built says so in its tab (and in an error dialog); the rest
    of the window goes on working.
    """

    def __init__(self, window: MainWindow, title: str, module: str, name: str):
        super().__init__(window.tabs)
        self.window_ = window
        self.title, self.module, self.name = title, module, name
        self._view: QWidget | None = None
        self._failed = False
        self._layout = QVBoxLayout(self)
        self._layout.setContentsMargins(0, 0, 0, 0)

    def built(self) -> QWidget | None:
        return self._view

    def view(self) -> QWidget | None:
        if self._view is None and not self._failed:
            try:
                cls = load_view_class(self.module, self.name)
                self._view = cls(self.window_.ctx, self)
            except Exception as exc:  # noqa: BLE001 - one view must not stop the window
                self._failed = True
                log.exception("the %s view could not be built", self.title)
                text = QLabel(f"The {self.title} view could not be opened: {exc}", self)
                text.setWordWrap(True)
                self._layout.addWidget(text)
                dialogs.show_error(self.window_, f"The {self.title} view could not be opened",
                                   str(exc), advice="The other views work; the details are "
                                                    "in the log for a report.")
                return None
            self._layout.addWidget(self._view)
            self.window_._view_built(self.title, self._view)
        return self._view


class MainWindow(QMainWindow):
    """The window over one archive.

    Parameters
    ----------
    ctx : AppContext

    Signals
    -------
    open_requested(str)
        The user chose another archive folder (the application opens it in a new
        window and closes this one).
    """

    open_requested = Signal(str)

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.setObjectName("shaftwatch-main")
        self.tree = AssetTree(ctx.palette, self)
        self.runs = RunList(ctx.palette, self)
        left = QSplitter(Qt.Orientation.Vertical, self)
        left.addWidget(self.tree)
        left.addWidget(self.runs)
        left.setSizes([520, 260])
        left.setMinimumWidth(380)
        self.dock = QDockWidget("Assets", self)
        self.dock.setObjectName("assets-dock")
        self.dock.setWidget(left)
        self.dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                              | QDockWidget.DockWidgetFeature.DockWidgetClosable
                              | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
        self.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, self.dock)
        self.tabs = QTabWidget(self)
        self.tabs.setDocumentMode(True)
        self.setCentralWidget(self.tabs)
        self.views: list[tuple[str, QWidget]] = []
        self._shown: dict[int, tuple] = {}
        self._build_status()
        self._build_views()
        self._build_menus()
        if self.views:
            self.views[0][1].view()          # the first tab is shown at once
        self.tree.point_chosen.connect(self._point_chosen)
        self.runs.run_chosen.connect(self._run_chosen)
        ctx.run_selected.connect(self._run_selected_elsewhere)
        self.tabs.currentChanged.connect(lambda _: self._show_current())
        ctx.archive_changed.connect(self.reload)
        ctx.prefs_changed.connect(self._prefs_changed)
        ctx.jobs.busy.connect(self._busy)
        self._restore()
        self.reload()

    # -- building -----------------------------------------------------------------------
    def _build_views(self) -> None:
        """A tab for every view whose module exists; each view is built when its tab is
        first shown (the window opens sooner)."""
        for title, module, name in VIEWS:
            if importlib.util.find_spec(module) is None:
                continue
            host = ViewHost(self, title, module, name)
            self.views.append((title, host))
            self.tabs.addTab(host, title)

    def view(self, title: str) -> QWidget | None:
        """The view of the tab ``title``, built when needed (None when not there)."""
        for t, host in self.views:
            if t == title:
                return host.view()
        return None

    def _view_built(self, title: str, view: QWidget) -> None:
        if isinstance(getattr(type(view), "message", None), Signal):
            view.message.connect(lambda text: self.statusBar().showMessage(text, 5000))
        if hasattr(view, "menu_actions"):
            menu = QMenu(f"&{title}", self)
            for a in view.menu_actions():
                menu.addAction(a)
            self.menuBar().insertMenu(self.help_menu.menuAction(), menu)

    def _build_status(self) -> None:
        bar = self.statusBar()
        self.path_label = QLabel(self)
        self.path_label.setToolTip("The open archive")
        self.runs_label = QLabel(self)
        self.runs_label.setToolTip("Runs stored in the archive")
        self.busy_bar = QProgressBar(self)
        self.busy_bar.setRange(0, 0)
        self.busy_bar.setMaximumWidth(120)
        self.busy_bar.setToolTip("Working in the background")
        self.busy_bar.setVisible(False)
        bar.addWidget(self.path_label, 1)
        bar.addPermanentWidget(self.runs_label)
        bar.addPermanentWidget(self.busy_bar)

    def _act(self, menu, text: str, slot, *, shortcut=None, tip: str = "",
             checkable: bool = False) -> QAction:
        a = QAction(text, self)
        if shortcut is not None:
            a.setShortcut(QKeySequence(shortcut))
        a.setStatusTip(tip)
        a.setToolTip(tip or text)
        a.setCheckable(checkable)
        if checkable:
            a.toggled.connect(slot)
        else:
            a.triggered.connect(lambda _=False: slot())
        menu.addAction(a)
        self.addAction(a)
        return a

    def _build_menus(self) -> None:
        mb = self.menuBar()
        m = mb.addMenu("&File")
        self._act(m, "&Open archive…", self.choose_archive, shortcut=QKeySequence.StandardKey.Open,
                  tip="Open another plant archive folder")
        self.import_action = self._act(m, "&Import…", self.import_recordings,
                                       shortcut="Ctrl+I",
                                       tip="Import a folder of recordings into the archive")
        self._act(m, "&Export report…", self.export_report, shortcut="Ctrl+E",
                  tip="Write a PDF report of a machine or a survey")
        self._act(m, "&Reload archive", self.ctx.reload, shortcut="F5",
                  tip="Read the archive again (after another program wrote to it)")
        m.addSeparator()
        self._act(m, "&Quit", self.close, shortcut=QKeySequence.StandardKey.Quit,
                  tip="Close Shaftwatch")

        m = mb.addMenu("&Go")
        self._act(m, "&Next point", lambda: self.step_point(1), shortcut="Alt+Down",
                  tip="Select the next point of the asset tree")
        self._act(m, "&Previous point", lambda: self.step_point(-1), shortcut="Alt+Up",
                  tip="Select the previous point of the asset tree")
        self._act(m, "&Later run", lambda: self.step_run(1), shortcut="Alt+Right",
                  tip="Show the next run of this point in time")
        self._act(m, "&Earlier run", lambda: self.step_run(-1), shortcut="Alt+Left",
                  tip="Show the previous run of this point in time")
        self._act(m, "&Find point", self._focus_filter, shortcut=QKeySequence.StandardKey.Find,
                  tip="Type in the filter box of the asset tree")
        for i, (title, _) in enumerate(self.views[:9]):
            self._act(m, f"{title} view", lambda i=i: self.tabs.setCurrentIndex(i),
                      shortcut=f"Ctrl+{i + 1}", tip=f"Show the {title} tab")

        m = mb.addMenu("&View")
        theme = m.addMenu("&Theme")
        group = QActionGroup(self)
        self.theme_actions = {}
        for key, label in (("light", "&Light"), ("dark", "&Dark")):
            a = QAction(label, self, checkable=True)
            a.setChecked(self.ctx.prefs.theme == key)
            a.triggered.connect(lambda _=False, k=key: self.ctx.set_theme(k))
            group.addAction(a)
            theme.addAction(a)
            self.theme_actions[key] = a
        units = m.addMenu("&Units")
        group = QActionGroup(self)
        self.unit_actions = {}
        for key, label in (("SI", "&SI (mm/s, µm)"), ("US", "&US (in/s, mil)")):
            a = QAction(label, self, checkable=True)
            a.setChecked(self.ctx.prefs.units == key)
            a.triggered.connect(lambda _=False, k=key: self.ctx.set_units(k))
            group.addAction(a)
            units.addAction(a)
            self.unit_actions[key] = a
        m.addSeparator()
        panel = self.dock.toggleViewAction()
        panel.setText("&Asset panel")
        panel.setShortcut(QKeySequence("Ctrl+T"))
        m.addAction(panel)
        self.addAction(panel)
        worst = self._act(m, "&Worst first", self.tree.worst_first.setChecked, checkable=True,
                          shortcut="Ctrl+Shift+W", tip="Order the asset tree by state, danger first")
        self.tree.worst_first.toggled.connect(worst.setChecked)
        self._act(m, "&Full screen", self._toggle_full_screen, shortcut="F11",
                  tip="Use the whole screen")
        m = mb.addMenu("&Help")
        self.help_menu = m
        self._act(m, "&Keyboard shortcuts", self.show_shortcuts,
                  shortcut=QKeySequence.StandardKey.HelpContents, tip="List the keyboard shortcuts")
        self._act(m, "&About Shaftwatch", lambda: dialogs.show_about(self),
                  tip="Version and cautions")

    def all_actions(self) -> list[QAction]:
        """Every action of the window and of its views (for the shortcuts list)."""
        out = list(self.actions())
        for _, host in self.views:
            if host.built() is not None:
                out += host.built().actions()
        return out

    # -- archive ------------------------------------------------------------------------
    def reload(self) -> None:
        """Read the asset tree and the states again and show them."""
        arc = self.ctx.archive()
        try:
            states = point_states_of(arc)
        except Exception as exc:  # noqa: BLE001 - shown plainly, details logged
            states = {}
            dialogs.show_error(self, "The point states could not be read", str(exc),
                               advice=dialogs.advice_for(str(exc)), details=repr(exc))
        self.tree.load(arc.tree(), states, units=self.ctx.prefs.units)
        n_runs = len(arc.runs())
        self.path_label.setText(str(self.ctx.archive_path))
        self.runs_label.setText(f"{n_runs} runs, {len(arc.points())} points")
        self.setWindowTitle(f"Shaftwatch — {arc.plant_name} ({self.ctx.archive_path.name})")
        if self.ctx.point:
            self._fill_runs(self.ctx.point, keep=self.ctx.run_id)

    def choose_archive(self) -> None:
        start = str(self.ctx.archive_path.parent)
        path = QFileDialog.getExistingDirectory(self, "Open a Shaftwatch archive", start)
        if path:
            self.open_requested.emit(path)

    def import_recordings(self) -> None:
        module = importlib.import_module("app.import_dialog")
        dlg = module.ImportDialog(self.ctx, self)   # it reloads the archive after importing
        dlg.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dlg.open()

    def export_report(self) -> None:
        module = importlib.import_module("app.report_dialog")
        dlg = module.ReportDialog(self.ctx, self)
        dlg.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dlg.open()

    # -- selection ----------------------------------------------------------------------
    def select_point(self, path: str) -> bool:
        """Make ``path`` the current point (as if clicked in the tree)."""
        return self.tree.select_point(path)

    def step_point(self, step: int) -> None:
        self.tree.step_point(step)

    def step_run(self, step: int) -> None:
        self.runs.step_run(step)

    def _fill_runs(self, point: str, keep: str | None = None) -> str | None:
        rows = self.ctx.archive().runs(point)
        ids = {r.run_id for r in rows}
        current = keep if keep in ids else (rows[-1].run_id if rows else None)
        self.runs.set_runs(rows, units=self.ctx.prefs.units, current=current)
        return current

    def _point_chosen(self, path: str) -> None:
        self.ctx.select_point(path)
        run = self._fill_runs(path)
        self.ctx.select_run(run)
        self._show_current()

    def _run_chosen(self, run_id: str) -> None:
        self.ctx.select_run(run_id)
        self._show_current()

    def _run_selected_elsewhere(self, run_id: str) -> None:
        """A view picked a run (a click on a trend point): show it in the Run view."""
        if self.runs.current_run() == run_id or not self.runs.select_run(run_id, emit=False):
            return
        for i in range(self.tabs.count()):
            if self.tabs.tabText(i).replace("&", "") == "Run":
                self.tabs.setCurrentIndex(i)
        self._show_current()

    def _show_current(self) -> None:
        host = self.tabs.currentWidget()
        view = host.view() if isinstance(host, ViewHost) else None
        if view is None:
            return
        wanted = (self.ctx.point, self.ctx.run_id)
        if self._shown.get(id(view)) == wanted:
            return
        self._shown[id(view)] = wanted
        try:
            view.show_point(*wanted)
        except Exception as exc:  # noqa: BLE001 - a view's failure must not close the app
            log.exception("showing %s in %s failed", wanted, type(view).__name__)
            dialogs.show_error(self, "The view could not show the point", str(exc),
                               advice=dialogs.advice_for(str(exc)))

    def _focus_filter(self) -> None:
        self.dock.show()
        self.tree.filter.setFocus()
        self.tree.filter.selectAll()

    # -- preferences --------------------------------------------------------------------
    def _prefs_changed(self) -> None:
        from PySide6.QtWidgets import QApplication

        from .theme import apply_theme

        app = QApplication.instance()
        if app is not None:
            apply_theme(app, self.ctx.palette)
        self.tree.palette = self.ctx.palette
        self.runs.palette = self.ctx.palette
        self.theme_actions[self.ctx.palette.theme].setChecked(True)
        self.unit_actions[self.ctx.prefs.units].setChecked(True)
        self.tree.set_units(self.ctx.prefs.units)
        if self.ctx.point:
            self._fill_runs(self.ctx.point, keep=self.ctx.run_id)

    def _busy(self, on: bool) -> None:
        self.busy_bar.setVisible(on)

    def _toggle_full_screen(self) -> None:
        self.showNormal() if self.isFullScreen() else self.showFullScreen()

    def show_shortcuts(self) -> dialogs.ShortcutsDialog:
        dlg = dialogs.ShortcutsDialog(self.all_actions(), self)
        dlg.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dlg.open()
        return dlg

    # -- geometry -----------------------------------------------------------------------
    def _restore(self) -> None:
        geo = self.ctx.prefs.get("window/geometry")
        state = self.ctx.prefs.get("window/state")
        if isinstance(geo, QByteArray) and not geo.isEmpty():
            self.restoreGeometry(geo)
        else:
            self.resize(1500, 920)
        if isinstance(state, QByteArray) and not state.isEmpty():
            self.restoreState(state)
        else:
            self.resizeDocks([self.dock], [420], Qt.Orientation.Horizontal)
        self.tree.worst_first.setChecked(self.ctx.prefs.get("view/worst_first", False, bool))

    def save_layout(self) -> None:
        self.ctx.prefs.set("window/geometry", self.saveGeometry())
        self.ctx.prefs.set("window/state", self.saveState())
        self.ctx.prefs.set("view/worst_first", self.tree.worst_first.isChecked())

    def closeEvent(self, event: QCloseEvent) -> None:
        self.save_layout()
        self.ctx.close()
        super().closeEvent(event)
