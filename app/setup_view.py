"""The setup view: a point's alarm plan, its settings and its machine's kinematic model,
each on a tab of its own (:mod:`app.plan_editor`, :mod:`app.point_settings`,
:mod:`app.model_editor`).

The view follows the selected point; after anything is stored (here or elsewhere) it
reads the archive again, except that a plan edited and not yet applied is kept.
"""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import QLabel, QTabWidget, QVBoxLayout, QWidget

from .context import AppContext
from .model_editor import ModelEditor
from .plan_editor import PlanEditor
from .point_settings import PointSettings
from .setup_dialogs import ChangeSummaryDialog, run_job
from .setup_jobs import ChangeSummary, reprocess_points


class SetupView(QWidget):
    """Alarm plan, point settings and machine model of the selected point.

    Parameters
    ----------
    ctx : AppContext
    parent : QWidget, optional

    Signals
    -------
    message(str)
        A line for the status bar.
    """

    message = Signal(str)

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.point: str | None = None
        self.run_id: str | None = None
        self.job = None
        self.last_summary: ChangeSummaryDialog | None = None
        self.header = QLabel("Pick a point in the asset tree.", self)
        self.header.setTextFormat(Qt.TextFormat.RichText)
        self.header.setWordWrap(True)
        self.plan = PlanEditor(ctx, self)
        self.settings = PointSettings(ctx, self)
        self.model = ModelEditor(ctx, self)
        self.tabs = QTabWidget(self)
        self.tabs.addTab(self.plan, "Alarm plan")
        self.tabs.addTab(self.settings, "Point settings")
        self.tabs.addTab(self.model, "Machine model")
        self.model_note = QLabel("", self)
        self.model_note.setWordWrap(True)
        self.model_note.setTextFormat(Qt.TextFormat.RichText)
        self.model_note.linkActivated.connect(lambda _l: self.reanalyse_machine())
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.header)
        lay.addWidget(self.tabs, 1)
        lay.addWidget(self.model_note)
        for editor in (self.plan, self.settings, self.model):
            editor.message.connect(self.message)
        self.model.saved.connect(self._model_saved)
        ctx.archive_changed.connect(self._archive_changed)
        self._build_actions()

    # -- actions ------------------------------------------------------------------------
    def _action(self, text: str, tip: str, shortcut: str, slot) -> QAction:
        a = QAction(text, self)
        a.setShortcut(QKeySequence(shortcut))
        a.setShortcutContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        a.setToolTip(f"{tip} ({shortcut})")
        a.setStatusTip(tip)
        a.triggered.connect(lambda _=False: slot())
        self.addAction(a)
        return a

    def _build_actions(self) -> None:
        self.store_action = self._action(
            "Store this tab", "Apply the alarm plan, or save the point settings or the "
            "machine model, whichever tab is shown", "Ctrl+S", self.store_current)
        self.add_band_action = self._action("Add alarm band", "Add a band to the alarm plan",
                                            "Ctrl+Shift+B", self._add_band)
        self.zoom_action = self._action("Zoom to band", "Show the selected alarm band", "Z",
                                        lambda: self.plan.zoom_to_band())
        self.full_action = self._action("Full range", "Show the whole spectrum", "Shift+Z",
                                        self.plan.full_range)

    def menu_actions(self) -> list[QAction]:
        """The actions the main window lists in its menu for this view."""
        return [self.store_action, self.add_band_action, self.zoom_action, self.full_action]

    def store_current(self):
        """Apply the plan, or save the settings or the model (the tab shown)."""
        current = self.tabs.currentWidget()
        if current is self.plan:
            return self.plan.apply()
        if current is self.settings:
            return self.settings.save()
        return self.model.save()

    def _add_band(self) -> None:
        self.tabs.setCurrentWidget(self.plan)
        self.plan.add_band()

    # -- public -------------------------------------------------------------------------
    def show_point(self, point_path: str | None, run_id: str | None) -> None:
        """Show the setup of ``point_path``; the plan is drawn on ``run_id`` (default the
        point's latest analysed run)."""
        if point_path != self.point:
            self.model_note.setText("")
        self.point, self.run_id = point_path, run_id
        self._load()

    def _load(self) -> None:
        point = self.point
        try:
            if point is not None:
                self.ctx.archive().point(point)
        except Exception:  # noqa: BLE001 - the point went away with the archive
            point = self.point = self.run_id = None
        self.header.setText(self._header_text(point))
        self.plan.load(point, self.run_id)
        self.settings.load(point)
        self.model.load(point)

    def _header_text(self, point: str | None) -> str:
        if point is None:
            return "Pick a point in the asset tree."
        arc = self.ctx.archive()
        info = arc.point(point)
        m = arc.plant.machine(info.site, info.machine)
        state = arc.point_states().get(point, {})
        pal = self.ctx.palette
        word = pal.state_word(state.get("state", ""))
        colour = pal.state(state.get("state", "")).name()
        zone = f", ISO 20816 zone {state['zone']}" if state.get("zone") else ""
        name = m.props.get("name") or ""
        return (f"<b>{point}</b> — {name} — now <span style='color:{colour}'>●</span> "
                f"{word}{zone}")

    # -- changes ------------------------------------------------------------------------
    def _archive_changed(self) -> None:
        """Read the archive again; an editor holding edits not stored keeps them."""
        if self.point is None:
            return
        try:
            self.ctx.archive().point(self.point)
        except Exception:  # noqa: BLE001 - the point went away with the archive
            self.show_point(None, None)
            return
        kept = []
        for editor, name, load in ((self.plan, "alarm plan",
                                    lambda: self.plan.load(self.point, self.run_id)),
                                   (self.settings, "point settings",
                                    lambda: self.settings.load(self.point)),
                                   (self.model, "machine model",
                                    lambda: self.model.load(self.point))):
            if editor.dirty:
                kept.append(name)
            else:
                load()
        text = self._header_text(self.point)
        if kept:
            verb = "are" if len(kept) > 1 else "is"
            text += (f" — the archive changed; the {' and '.join(kept)} edited here {verb} "
                     "kept (Revert shows what is stored)")
        self.header.setText(text)

    def _model_saved(self, site: str, tag: str) -> None:
        machine = self.ctx.archive().plant.machine(site, tag)
        runs = sum(len(self.ctx.archive().runs(p.path)) for p in machine.points.values())
        if runs:
            self.model_note.setText(
                f"The model of {site}/{tag} changed; its {runs} runs keep the results of "
                "the old model (orders, bearing lines, order bands) until they are "
                "analysed again. <a href='reanalyse'>Analyse them again</a>")

    def reanalyse_machine(self):
        """Analyse every run of the current point's machine again (a job)."""
        if self.point is None:
            return None
        info = self.ctx.archive().point(self.point)
        machine = self.ctx.archive().plant.machine(info.site, info.machine)
        points = [p.path for p in machine.points.values()]
        path = self.ctx.archive_path
        self.job, _ = run_job(
            self.ctx, self, lambda progress, cancel: reprocess_points(
                path, points, progress=progress, cancel=cancel),
            title="Analyse runs again", text=f"Analysing the runs of {info.machine} again…",
            on_done=self._reanalysed, failed_what="The runs were not analysed again")
        return self.job

    def _reanalysed(self, summary: ChangeSummary) -> None:
        self.model_note.setText("")
        self.ctx.reload()
        dlg = ChangeSummaryDialog(summary, self.ctx.palette, self.window())
        dlg.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dlg.open()
        self.last_summary = dlg
        self.message.emit(summary.title)
