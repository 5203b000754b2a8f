"""What the alarm-plan editor's buttons do beyond editing bands: ISO 20816 defaults,
levels learnt from the first runs, plan files, copying to other points, and Apply
(store and re-evaluate in a job, then show what changed).

:class:`PlanActions` is mixed into :class:`app.plan_editor.PlanEditor` and uses its
state (``point``, ``bands``, ``origin``, ``note``, ``problems``, ``table``,
``buttons``) and its ``plan()``, ``checked_plan()``, ``_set_plan()``, ``_edited()``,
``_show_problem()`` and ``_error()``.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFileDialog

from engine.alarms.iso import GENERIC_NOTE, OVERALL_BAND, default_plan
from engine.alarms.plan import AlarmPlan, read_plan_file, write_plan_file
from engine.errors import EngineError, InputError

from .setup_dialogs import BaselineDialog, ChangeSummaryDialog, CopyPlanDialog, run_job
from .setup_jobs import ChangeSummary, apply_plan, learn_baseline

PLAN_FILES = "Alarm plans (*.json *.toml);;All files (*)"


class PlanActions:
    """ISO defaults, baseline, plan files, copy and Apply of the plan editor."""

    def iso_defaults(self) -> bool:
        """Set the overall velocity band to the ISO 20816-3 default of the machine's
        group and foundation (other bands are kept)."""
        if self.point is None:
            return False
        arc = self.ctx.archive()
        info = arc.point(self.point)
        props = arc.plant.machine(info.site, info.machine).props
        try:
            iso = default_plan(props.get("iso_group"), props.get("foundation"))
        except InputError as exc:
            self._error("No ISO defaults for this machine", str(exc),
                        "Set the machine's ISO 20816-3 group and foundation in the Machine "
                        "model tab.")
            return False
        band = iso.bands[0]
        at = [i for i, b in enumerate(self.bands) if b.measure == "overall"
              or b.name == OVERALL_BAND]
        if at:
            self.bands[at[0]] = band
        else:
            self.bands.insert(0, band)
        self.problems = {}
        self.origin = iso.origin if len(self.bands) == 1 else f"{iso.origin} + other bands"
        self.note = GENERIC_NOTE
        self.table.set_bands(self.bands)
        self._edited(by_hand=False)
        return True

    def ask_baseline(self) -> None:
        if self.point is None:
            return
        rows = self.ctx.archive().value_rows(self.point)
        dlg = BaselineDialog(int(rows["run_id"].size) if rows else 0, self.window())
        if dlg.exec():
            self.learn_baseline(dlg.options())

    def learn_baseline(self, options: dict):
        """Learn every band's levels from the first runs (a job); see
        :func:`app.setup_jobs.learn_baseline` for ``options``."""
        try:
            template = self.plan()
        except InputError as exc:
            self._error("The levels were not learnt", str(exc))
            return None
        path, point = self.ctx.archive_path, self.point
        self.job, _ = run_job(
            self.ctx, self, lambda progress, cancel: learn_baseline(
                path, point, template, progress=progress, cancel=cancel, **options),
            title="Learn levels", text=f"Measuring the first runs of {point}…",
            on_done=self._learnt, failed_what="The levels were not learnt")
        self._hold(self.job)
        return self.job

    def _learnt(self, plan: AlarmPlan) -> None:
        self.bands = list(plan.bands)
        self.origin, self.note = plan.origin, plan.note
        self.problems = {}
        self.table.set_bands(self.bands)
        self._edited(by_hand=False)
        self.message.emit(f"Levels learnt: {plan.origin}. Apply to store them.")

    def import_plan(self, path: str | Path | None = None) -> bool:
        """Take the bands of a plan file (not stored until Apply)."""
        if path is None:
            path, _ = QFileDialog.getOpenFileName(self, "Import an alarm plan",
                                                  str(self.ctx.archive_path.parent), PLAN_FILES)
            if not path:
                return False
        try:
            plan = read_plan_file(path)
        except EngineError as exc:
            self._error("The plan file was not read", str(exc))
            return False
        self.problems = {}
        self._set_plan(plan)
        self._edited(by_hand=False)
        return True

    def export_plan(self, path: str | Path | None = None) -> bool:
        """Write the plan as edited to a file (JSON, or TOML for ``.toml``)."""
        try:
            plan = self.checked_plan()
        except InputError as exc:
            self._error("The plan was not exported", str(exc))
            return False
        if path is None:
            path, _ = QFileDialog.getSaveFileName(self, "Export the alarm plan",
                                                  str(self.ctx.archive_path.parent /
                                                      f"{plan.name}.json"), PLAN_FILES)
            if not path:
                return False
        try:
            write_plan_file(plan, path)
        except EngineError as exc:
            self._error("The plan was not exported", str(exc))
            return False
        self.message.emit(f"Plan written to {path}")
        return True

    def ask_copy(self) -> None:
        if self.point is None:
            return
        dlg = CopyPlanDialog([p.path for p in self.ctx.archive().points()], self.point,
                             self.window())
        if dlg.exec() and dlg.checked():
            self.apply(dlg.checked())

    def apply(self, others: list[str] | None = None):
        """Store the plan for this point (and ``others``) and evaluate their histories
        again in a job; the summary of what changed is shown when it ends.  A plan that
        does not validate is shown as an error and nothing is stored."""
        if self.point is None:
            return None
        try:
            plan = self.checked_plan()
        except InputError as exc:
            self._show_problem()
            self._error("The alarm plan was not applied", str(exc),
                        "Correct the marked cell; nothing was stored.")
            return None
        points = [self.point] + [p for p in (others or []) if p != self.point]
        path = self.ctx.archive_path
        self.job, _ = run_job(
            self.ctx, self, lambda progress, cancel: apply_plan(
                path, points, plan, progress=progress, cancel=cancel),
            title="Apply alarm plan",
            text=f"Storing the plan and evaluating the history of {len(points)} point"
                 f"{'s' if len(points) != 1 else ''}…",
            on_done=self._applied, failed_what="The alarm plan was not applied",
            on_cancelled=lambda: self.message.emit("Re-evaluation stopped; the plan is "
                                                   "stored, apply it again to finish."))
        self._hold(self.job)
        return self.job

    def _hold(self, job) -> None:
        """Keep the buttons that start work disabled while ``job`` runs (one writer at a
        time; a second click would only wait for the lock)."""
        keys = ("apply", "copy", "baseline")
        for k in keys:
            self.buttons[k].setEnabled(False)

        def release(*_args) -> None:
            for k in keys[1:]:
                self.buttons[k].setEnabled(True)
            self._show_problem()                 # Apply again only for a valid plan

        for sig in (job.finished, job.failed, job.cancelled):
            sig.connect(release)
        if job.done:                             # it ended before we were listening
            release()

    def _applied(self, summary: ChangeSummary) -> None:
        self.dirty = False
        moved = "; ".join(f"{p}: {b or 'not evaluated'} → {n or 'not evaluated'}"
                          for p, (b, n) in summary.changed_points.items())
        self.changes.setText(f"Last apply: {summary.title}; {summary.evaluated} runs "
                             f"evaluated, {len(summary.runs)} changed state"
                             + (f"; {moved}" if moved else "; no point changed state") + ".")
        self.ctx.reload()
        dlg = ChangeSummaryDialog(summary, self.ctx.palette, self.window())
        dlg.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dlg.open()
        self.last_summary = dlg
        self.applied.emit(summary)
