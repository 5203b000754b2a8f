"""Export a report for the maintenance planner: the machine report of the selected
point's machine (or any machine), or the report of a survey (the newest, or one chosen
by date), as PDF or HTML (:mod:`engine.report`).

The machines and surveys are read, and the report assembled and rendered, in jobs
(``AppContext.jobs``) with progress and a Stop button; the engine writes the file
atomically, so a stopped or failed report leaves no file and never spoils an older one.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from PySide6.QtCore import Qt, QUrl, Signal
from PySide6.QtGui import QDesktopServices
from PySide6.QtWidgets import (
    QButtonGroup,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QGridLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QRadioButton,
    QVBoxLayout,
    QWidget,
)

from engine.errors import InputError
from engine.report import ReportCancelled, render
from engine.report.assemble import machine_report, surveys, survey_report
from engine.report.data import iso_date

from . import dialogs
from .context import AppContext
from .jobs import Cancelled

#: Formats offered: (label, suffix).
FORMATS = (("PDF", ".pdf"), ("HTML", ".html"))
#: Share of the progress bar given to assembling the report (the rest is rendering).
ASSEMBLE_SHARE = 0.3
#: Steps of the progress bar.
PROGRESS_STEPS = 1000
SUCCESS_BOX_NAME = "shaftwatch-report-written"


@dataclass(frozen=True)
class MachineChoice:
    """A machine of the archive: its site, tag and name."""

    site: str
    tag: str
    name: str

    def text(self) -> str:
        return f"{self.tag} — {self.name}" if self.name else self.tag


@dataclass(frozen=True)
class SurveyChoice:
    """A survey: the date given to :func:`~engine.report.assemble.survey_report`
    (``""`` for the newest survey, so that it stays the newest when the archive grows),
    the ISO date of its newest run, its label and number of runs."""

    date: str
    end_date: str
    label: str
    runs: int


def load_choices(arc) -> tuple[list[MachineChoice], list[SurveyChoice]]:
    """The archive's machines (plant order) and surveys (newest first; the newest with
    date ``""`` so that it stays the newest when the archive grows)."""
    machines = [MachineChoice(s.name, tag, str(m.props.get("name", "") or ""))
                for s in arc.plant.sites.values() for tag, m in s.machines.items()]
    found = surveys(arc)
    out = [SurveyChoice("" if i == 0 else iso_date(s.end_s), iso_date(s.end_s), s.label,
                        s.runs) for i, s in enumerate(found)]
    return machines, out


def default_name(scope: str, suffix: str, today: str | None = None) -> str:
    """File name of a report written today (UTC): ``P-102_report_2026-12-02.pdf``,
    ``survey-2026-11-16_report_2026-12-02.html``."""
    today = today or datetime.now(UTC).date().isoformat()
    safe = "".join(c if c.isalnum() or c in "-_." else "-" for c in scope).strip("-")
    return f"{safe}_report_{today}{suffix}"


def with_suffix(path: str, suffix: str) -> str:
    """``path`` ending in ``suffix``: a known report suffix is replaced, none added."""
    p = Path(path)
    if p.suffix.lower() in (s for _, s in FORMATS):
        return str(p.with_suffix(suffix))
    return str(p) + suffix if path else ""


class ReportDialog(QDialog):
    """Choose what to report and where, then write it.

    Parameters
    ----------
    ctx : AppContext
        The machine of ``ctx.point`` is preselected.
    parent : QWidget, optional

    Signals
    -------
    loaded()
        The machines and surveys are listed.
    report_written(str)
        The path of the report written.
    report_failed(str)
        The message shown in the error dialog.
    report_cancelled()
        The user stopped the report; no file was written.
    """

    loaded = Signal()
    report_written = Signal(str)
    report_failed = Signal(str)
    report_cancelled = Signal()

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.setWindowTitle("Shaftwatch — export a report")
        self.setObjectName("shaftwatch-report")
        self.job = None
        self.load_job = None
        self.success_box: QMessageBox | None = None
        self.error_box: QMessageBox | None = None
        self._path_edited = False
        self._running_text = ""
        self._build()
        self._load()

    # -- layout -----------------------------------------------------------------------
    def _build(self) -> None:
        self.machine_radio = QRadioButton("&Machine report", self)
        self.machine_radio.setToolTip("Status, trends, forecasts, spectra and findings of "
                                      "every point of one machine, as they stand now")
        self.survey_radio = QRadioButton("&Survey report", self)
        self.survey_radio.setToolTip("Every machine as one survey found it")
        self.machine_combo = QComboBox(self)
        self.survey_combo = QComboBox(self)
        self._scope = QButtonGroup(self)
        self._scope.addButton(self.machine_radio)
        self._scope.addButton(self.survey_radio)
        self.machine_radio.setChecked(True)
        self.format_buttons: dict[str, QRadioButton] = {}
        self._format = QButtonGroup(self)
        fmt_row = QHBoxLayout()
        for label, suffix in FORMATS:
            b = QRadioButton(label, self)
            self._format.addButton(b)
            self.format_buttons[suffix] = b
            fmt_row.addWidget(b)
        fmt_row.addStretch(1)
        saved = self.ctx.prefs.get("report/format", ".pdf", str)
        self.format_buttons.get(saved, self.format_buttons[".pdf"]).setChecked(True)
        self.path_edit = QLineEdit(self)
        self.path_edit.setMinimumWidth(420)
        self.path_edit.setToolTip("The file to write (.pdf or .html)")
        self.path_edit.textEdited.connect(self._path_typed)
        self.browse_button = QPushButton("Choose…", self)
        self.browse_button.clicked.connect(self.choose_path)

        what = QGroupBox("What", self)
        grid = QGridLayout(what)
        grid.addWidget(self.machine_radio, 0, 0)
        grid.addWidget(self.machine_combo, 0, 1)
        grid.addWidget(self.survey_radio, 1, 0)
        grid.addWidget(self.survey_combo, 1, 1)
        grid.setColumnStretch(1, 1)
        where = QGroupBox("Where", self)
        wl = QGridLayout(where)
        wl.addWidget(QLabel("Format", where), 0, 0)
        wl.addLayout(fmt_row, 0, 1, 1, 2)
        wl.addWidget(QLabel("File", where), 1, 0)
        wl.addWidget(self.path_edit, 1, 1)
        wl.addWidget(self.browse_button, 1, 2)

        self.progress = QProgressBar(self)
        self.progress.setRange(0, PROGRESS_STEPS)
        self.progress.setValue(0)
        self.progress.setVisible(False)
        self.status = QLabel("Reading the machines and surveys…", self)
        self.status.setWordWrap(True)
        self.buttons = QDialogButtonBox(self)
        self.export_button = self.buttons.addButton("&Export",
                                                    QDialogButtonBox.ButtonRole.AcceptRole)
        self.stop_button = self.buttons.addButton("&Stop", QDialogButtonBox.ButtonRole.ActionRole)
        self.close_button = self.buttons.addButton(QDialogButtonBox.StandardButton.Close)
        self.export_button.setDefault(True)
        self.export_button.setEnabled(False)
        self.stop_button.setEnabled(False)
        self.export_button.clicked.connect(self.export)
        self.stop_button.clicked.connect(self.cancel)
        self.close_button.clicked.connect(self.reject)

        lay = QVBoxLayout(self)
        lay.addWidget(what)
        lay.addWidget(where)
        lay.addWidget(self.progress)
        lay.addWidget(self.status)
        lay.addWidget(self.buttons)
        for sig in (self.machine_radio.toggled, self.machine_combo.currentIndexChanged,
                    self.survey_combo.currentIndexChanged, self._format.buttonToggled):
            sig.connect(self._choice_changed)

    # -- choices ----------------------------------------------------------------------
    def _load(self) -> None:
        arc = self.ctx.archive()

        def work(progress, cancel):
            return load_choices(arc)

        self.load_job = self.ctx.jobs.run(work, title="List machines and surveys",
                                          on_done=self._loaded, on_error=self._load_failed)

    def _loaded(self, choices) -> None:
        machines, found = choices
        point = self.ctx.point or ""
        site, _, rest = point.partition("/")
        tag = rest.partition("/")[0]
        for w in (self.machine_combo, self.survey_combo):
            w.blockSignals(True)
        self.machine_combo.clear()
        for m in machines:
            self.machine_combo.addItem(m.text(), m)
            if (m.site, m.tag) == (site, tag):
                self.machine_combo.setCurrentIndex(self.machine_combo.count() - 1)
        self.survey_combo.clear()
        for i, s in enumerate(found):
            newest = " (newest)" if i == 0 else ""
            self.survey_combo.addItem(f"{s.label}{newest} — {s.runs} runs", s)
        for w in (self.machine_combo, self.survey_combo):
            w.blockSignals(False)
        self.machine_radio.setEnabled(bool(machines))
        self.survey_radio.setEnabled(bool(found))
        if not machines and found:
            self.survey_radio.setChecked(True)
        self.export_button.setEnabled(bool(machines or found))
        self.status.setText("" if machines or found else "The archive holds no machines yet.")
        self._choice_changed()
        self.loaded.emit()

    def _load_failed(self, message: str, details: str) -> None:
        self.status.setText("The machines and surveys could not be read.")
        self.error_box = dialogs.show_error(self, "The archive could not be read", message,
                                            advice=dialogs.advice_for(message), details=details)
        self.report_failed.emit(message)

    @property
    def suffix(self) -> str:
        for suffix, b in self.format_buttons.items():
            if b.isChecked():
                return suffix
        return ".pdf"

    def set_format(self, suffix: str) -> None:
        """Choose ``".pdf"`` or ``".html"``."""
        self.format_buttons[suffix].setChecked(True)

    def choose_machine(self, tag: str) -> None:
        """Report the machine ``tag``."""
        for i in range(self.machine_combo.count()):
            if self.machine_combo.itemData(i).tag == tag:
                self.machine_combo.setCurrentIndex(i)
                self.machine_radio.setChecked(True)
                return
        raise InputError(f"report: no machine {tag!r} in the list")

    def choose_survey(self, date: str | None = None) -> None:
        """Report the newest survey, or the survey whose newest run was on ``date``."""
        for i in range(self.survey_combo.count()):
            s = self.survey_combo.itemData(i)
            if (i == 0 and date is None) or s.end_date == date:
                self.survey_combo.setCurrentIndex(i)
                self.survey_radio.setChecked(True)
                return
        raise InputError(f"report: no survey on {date!r} in the list")

    def scope_name(self) -> str:
        """``P-102`` or ``survey-2026-11-16``: the first part of the file name."""
        if self.machine_radio.isChecked():
            m = self.machine_combo.currentData()
            return m.tag if m is not None else "machine"
        s = self.survey_combo.currentData()
        return f"survey-{s.end_date}" if s is not None else "survey"

    def _choice_changed(self, *_args) -> None:
        self.machine_combo.setEnabled(self.machine_radio.isChecked())
        self.survey_combo.setEnabled(self.survey_radio.isChecked())
        self.ctx.prefs.set("report/format", self.suffix)
        text = self.path_edit.text().strip()
        if self._path_edited and text:
            self.path_edit.setText(with_suffix(text, self.suffix))
            return
        folder = Path(self.ctx.prefs.get("report/folder", str(Path.home()), str))
        self.path_edit.setText(str(folder / default_name(self.scope_name(), self.suffix)))

    def _path_typed(self, text: str) -> None:
        self._path_edited = True
        suffix = Path(text).suffix.lower()
        if suffix in self.format_buttons and suffix != self.suffix:
            self._format.blockSignals(True)
            self.format_buttons[suffix].setChecked(True)
            self._format.blockSignals(False)

    def set_path(self, path: str | Path) -> None:
        """The file to write (as if typed); its suffix chooses the format."""
        self.path_edit.setText(str(path))
        self._path_typed(str(path))

    def choose_path(self) -> None:
        label = dict((s, f) for f, s in FORMATS)[self.suffix]
        path, _ = QFileDialog.getSaveFileName(self, "Write the report to", self.path_edit.text(),
                                              f"{label} files (*{self.suffix})")
        if path:
            self.set_path(with_suffix(path, self.suffix) if not Path(path).suffix else path)

    # -- the report job ---------------------------------------------------------------
    def target(self) -> Path:
        """The file to write, with the format's suffix (added when missing)."""
        text = self.path_edit.text().strip()
        if not text:
            raise InputError("report: no file given; choose where to write the report")
        p = Path(text).expanduser()
        if p.suffix.lower() not in self.format_buttons:
            p = p.with_name(p.name + self.suffix)
        return p

    def export(self) -> None:
        """Assemble and write the report chosen (in a job)."""
        if self.job is not None and not self.job.done:
            return
        try:
            target = self.target()
            if not target.parent.is_dir():
                raise InputError(f"{target.parent}: no such folder; choose a folder that "
                                 "exists")
        except InputError as exc:
            self._failed(str(exc), "")
            return
        arc = self.ctx.archive()
        if self.machine_radio.isChecked():
            m = self.machine_combo.currentData()
            what = f"the machine report of {m.tag}"

            def assemble(progress, cancel):
                return machine_report(arc, m.site, m.tag, progress=progress, cancel=cancel)
        else:
            s = self.survey_combo.currentData()
            what = f"the report of the survey of {s.label}"

            def assemble(progress, cancel):
                return survey_report(arc, date=s.date or None, progress=progress,
                                     cancel=cancel)
        written: dict[str, str] = {}

        def work(progress, cancel) -> str:
            def scaled(share: float, start: float):
                def report(done: int, total: int, text: str = "") -> None:
                    frac = done / total if total else 0.0
                    progress(int(PROGRESS_STEPS * (start + share * frac)), PROGRESS_STEPS,
                             text)
                return report
            try:
                data = assemble(scaled(ASSEMBLE_SHARE, 0.0), cancel)
                if cancel():
                    raise Cancelled("report stopped")
                path = render(data, target, progress=scaled(1 - ASSEMBLE_SHARE, ASSEMBLE_SHARE),
                              cancel=cancel)
            except ReportCancelled as exc:
                raise Cancelled(str(exc)) from None
            written["path"] = str(path)
            return str(path)

        self.ctx.prefs.set("report/folder", str(target.parent))
        self._set_running(True, f"Writing {what} to {target}…")
        self.job = self.ctx.jobs.run(
            work, title="Write report", on_done=self._written, on_error=self._failed,
            on_progress=self._progress,
            on_cancelled=lambda: self._stopped(written.get("path")))

    def cancel(self) -> None:
        """Stop the report being written (no file is left)."""
        if self.job is not None and not self.job.done:
            self.status.setText("Stopping…")
            self.job.cancel()

    def _set_running(self, on: bool, text: str) -> None:
        self._running_text = text
        self.progress.setVisible(on)
        if on:
            self.progress.setValue(0)
        self.export_button.setEnabled(not on)
        self.stop_button.setEnabled(on)
        for w in (self.machine_radio, self.survey_radio, self.path_edit, self.browse_button,
                  *self.format_buttons.values()):
            w.setEnabled(not on)
        if not on:
            self._choice_enable()
        self.status.setText(text)

    def _choice_enable(self) -> None:
        self.machine_radio.setEnabled(self.machine_combo.count() > 0)
        self.survey_radio.setEnabled(self.survey_combo.count() > 0)
        self.machine_combo.setEnabled(self.machine_radio.isChecked())
        self.survey_combo.setEnabled(self.survey_radio.isChecked())

    def _progress(self, done: int, total: int, text: str) -> None:
        if total > 0:
            self.progress.setMaximum(total)
            self.progress.setValue(min(done, total))
        if text:
            self.status.setText(f"{self._running_text}\n{text}")

    def _written(self, path: str) -> None:
        self._set_running(False, f"Report written: {path}")
        self.success_box = self._tell_written(path)
        self.report_written.emit(path)

    def _stopped(self, path: str | None) -> None:
        if path:                   # finished in the moment the stop was asked: it is whole
            self._written(path)
            return
        self._set_running(False, "Stopped; no file was written.")
        self.report_cancelled.emit()

    def _failed(self, message: str, details: str) -> None:
        self._set_running(False, "The report could not be written.")
        self.error_box = dialogs.show_error(
            self, "The report could not be written", message,
            path=self.path_edit.text().strip(),
            advice="Check that the folder exists and that you may write there; an older "
                   "report of the same name was left as it was.", details=details)
        self.report_failed.emit(message)

    def _tell_written(self, path: str) -> QMessageBox:
        box = QMessageBox(self)
        box.setObjectName(SUCCESS_BOX_NAME)
        box.setIcon(QMessageBox.Icon.Information)
        box.setWindowTitle("Shaftwatch — report written")
        box.setText("The report was written.")
        box.setInformativeText(path)
        box.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.open_folder_button = box.addButton("Open folder",
                                                QMessageBox.ButtonRole.ActionRole)
        self.open_folder_button.clicked.connect(lambda: self.open_folder(path))
        box.addButton(QMessageBox.StandardButton.Ok)
        box.open()
        return box

    @staticmethod
    def open_folder(path: str) -> bool:
        """Show the folder of ``path`` in the desktop's file manager."""
        return QDesktopServices.openUrl(QUrl.fromLocalFile(str(Path(path).parent)))

    def reject(self) -> None:
        """Close; a report being written is stopped first."""
        self.cancel()
        super().reject()

