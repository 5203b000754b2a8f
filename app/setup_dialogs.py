"""Dialogs of the setup view: what a change did to the alarm states (summary), which
points to copy a plan to, how to learn a baseline; and the one way the setup editors
start long work (a job with a progress dialog, errors as dialogs)."""

from __future__ import annotations

from collections.abc import Callable

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFormLayout,
    QHeaderView,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from engine.alarms.baseline import MIN_BASELINE_RUNS

from . import dialogs
from .context import AppContext, Palette
from .jobs import Job
from .setup_jobs import ChangeSummary, state_word


def run_job(ctx: AppContext, parent: QWidget, work: Callable, *, title: str, text: str,
            on_done: Callable[[object], None], failed_what: str,
            on_cancelled: Callable[[], None] | None = None
            ) -> tuple[Job, dialogs.JobProgressDialog]:
    """Run ``work(progress, cancel)`` as a job with a progress dialog (Cancel stops it).

    Errors are shown as a dialog titled ``failed_what`` (never a traceback).
    """
    def failed(message: str, details: str) -> None:
        dialogs.show_error(parent.window(), failed_what, message,
                           advice=dialogs.advice_for(message), details=details)

    job = ctx.jobs.run(work, title=title, on_done=on_done, on_error=failed,
                       on_cancelled=on_cancelled)
    progress = dialogs.JobProgressDialog(job, text, parent.window())
    progress.show()
    return job, progress


class ChangeSummaryDialog(QDialog):
    """What an apply or a re-analysis changed: each point's state before and now, and
    the runs whose state changed."""

    def __init__(self, summary: ChangeSummary, palette: Palette, parent: QWidget | None = None):
        super().__init__(parent)
        self.summary = summary
        self.setObjectName("setup-change-summary")
        self.setWindowTitle("Shaftwatch — what changed")
        head = QLabel(f"<b>{summary.title}</b><br>{summary.evaluated} runs evaluated, "
                      f"{len(summary.runs)} changed state"
                      + (f", {len(summary.problems)} could not be analysed"
                         if summary.problems else "") + ".", self)
        head.setWordWrap(True)
        self.points_table = QTableWidget(len(summary.points), 3, self)
        self.points_table.setHorizontalHeaderLabels(["Point", "Before", "Now"])
        for i, (p, (before, now)) in enumerate(summary.points.items()):
            self._row(self.points_table, i, [p, state_word(before), state_word(now)], palette,
                      (None, before, now))
        self.runs_table = QTableWidget(len(summary.runs), 5, self)
        self.runs_table.setHorizontalHeaderLabels(["Point", "Taken (UTC)", "Run", "Before",
                                                   "Now"])
        for i, r in enumerate(summary.runs):
            self._row(self.runs_table, i, [r.point, r.taken_text, r.run_id[:8],
                                           state_word(r.before), state_word(r.now)], palette,
                      (None, None, None, r.before, r.now))
        for t in (self.points_table, self.runs_table):
            t.verticalHeader().setVisible(False)
            t.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
            t.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
            t.horizontalHeader().setStretchLastSection(True)
        lay = QVBoxLayout(self)
        lay.addWidget(head)
        lay.addWidget(QLabel("Points (state of the latest run):", self))
        lay.addWidget(self.points_table, 1)
        lay.addWidget(QLabel("Runs whose state changed:" if summary.runs
                             else "No run changed state.", self))
        lay.addWidget(self.runs_table, 2)
        if summary.problems:
            probs = QLabel("\n".join(f"{p.get('point', '')} run {str(p.get('run_id', ''))[:8]}: "
                                     f"{p.get('reason', '')}" for p in summary.problems), self)
            probs.setWordWrap(True)
            lay.addWidget(probs)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close, self)
        buttons.rejected.connect(self.reject)
        lay.addWidget(buttons)
        self.resize(680, 480)

    @staticmethod
    def _row(table: QTableWidget, i: int, texts: list[str], palette: Palette,
             states: tuple) -> None:
        for j, t in enumerate(texts):
            item = QTableWidgetItem(t)
            if states[j] is not None:
                item.setForeground(palette.state(states[j]))
            table.setItem(i, j, item)

    def text(self) -> str:
        return self.summary.text()


class CopyPlanDialog(QDialog):
    """Pick the points to copy a plan to (a checkable list of the archive's points)."""

    def __init__(self, points: list[str], current: str, parent: QWidget | None = None):
        super().__init__(parent)
        self.setWindowTitle("Shaftwatch — copy the alarm plan")
        self.list = QListWidget(self)
        for p in points:
            if p == current:
                continue
            item = QListWidgetItem(p)
            item.setFlags(item.flags() | Qt.ItemFlag.ItemIsUserCheckable)
            item.setCheckState(Qt.CheckState.Unchecked)
            self.list.addItem(item)
        note = QLabel(f"The plan of <b>{current}</b> as edited is stored for the points you "
                      "tick (and for this point), and their histories are evaluated again. "
                      "Each point checks the plan against its own Fmax.", self)
        note.setWordWrap(True)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel, self)
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Copy and apply")
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        lay = QVBoxLayout(self)
        lay.addWidget(note)
        lay.addWidget(self.list, 1)
        lay.addWidget(buttons)
        self.resize(460, 420)

    def set_checked(self, points: list[str]) -> None:
        for i in range(self.list.count()):
            item = self.list.item(i)
            item.setCheckState(Qt.CheckState.Checked if item.text() in points
                               else Qt.CheckState.Unchecked)

    def checked(self) -> list[str]:
        return [self.list.item(i).text() for i in range(self.list.count())
                if self.list.item(i).checkState() == Qt.CheckState.Checked]


class BaselineDialog(QDialog):
    """How to learn levels from the first runs: how many, sigma or ratio, factors."""

    def __init__(self, available: int, parent: QWidget | None = None):
        super().__init__(parent)
        self.setWindowTitle("Shaftwatch — learn levels from the first runs")
        self.runs = QSpinBox(self)
        self.runs.setRange(MIN_BASELINE_RUNS, max(MIN_BASELINE_RUNS, available))
        self.runs.setValue(min(max(MIN_BASELINE_RUNS, available), max(MIN_BASELINE_RUNS, 5)))
        self.runs.setToolTip(f"The first runs taken, of good quality (at least "
                             f"{MIN_BASELINE_RUNS}); the machine must have been healthy then")
        self.method = QComboBox(self)
        self.method.addItem("mean + k·σ (sigma)", "sigma")
        self.method.addItem("multiple of the mean (ratio)", "ratio")
        self.alert = QDoubleSpinBox(self)
        self.danger = QDoubleSpinBox(self)
        for box in (self.alert, self.danger):
            box.setDecimals(2)
            box.setRange(0.01, 100.0)
        self.method.currentIndexChanged.connect(self._method_changed)
        self._method_changed()
        form = QFormLayout()
        form.addRow("Runs", self.runs)
        form.addRow("Method", self.method)
        self.alert_label, self.danger_label = QLabel("Alert", self), QLabel("Danger", self)
        form.addRow(self.alert_label, self.alert)
        form.addRow(self.danger_label, self.danger)
        note = QLabel(f"{available} analysed runs. Levels learnt from the machine's own "
                      "past accept whatever it did then; they do not replace the "
                      "manufacturer's limits or the site's standards.", self)
        note.setWordWrap(True)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel, self)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        lay = QVBoxLayout(self)
        lay.addLayout(form)
        lay.addWidget(note)
        lay.addWidget(buttons)

    def _method_changed(self) -> None:
        # Defaults of engine.alarms.baseline: k = 3 and 6 σ, or 2.5× and 5× the mean.
        if self.method.currentData() == "sigma":
            self.alert.setValue(3.0)
            self.danger.setValue(6.0)
            self.alert.setSuffix(" σ")
            self.danger.setSuffix(" σ")
        else:
            self.alert.setValue(2.5)
            self.danger.setValue(5.0)
            self.alert.setSuffix(" × mean")
            self.danger.setSuffix(" × mean")

    def options(self) -> dict:
        """Keyword arguments of :func:`app.setup_jobs.learn_baseline`."""
        if self.method.currentData() == "sigma":
            factors = {"k": self.alert.value(), "danger_k": self.danger.value()}
        else:
            factors = {"alert_ratio": self.alert.value(), "danger_ratio": self.danger.value()}
        return {"runs": self.runs.value(), "method": self.method.currentData(), **factors}
