"""Dialogs shared by the whole app: the error dialog (what failed, which file, what to do;
never a traceback), the progress dialog of a job, the About box with the product's
cautions and the list of keyboard shortcuts."""

from __future__ import annotations

import contextlib
import logging
import re

from PySide6.QtCore import Qt
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QHeaderView,
    QMessageBox,
    QProgressDialog,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)
from shiboken6 import isValid

import engine

from .jobs import Job
from .logsetup import log_path

log = logging.getLogger("shaftwatch.app")

ERROR_DIALOG_NAME = "shaftwatch-error"

#: The cautions the product shows (README, reports, About box).
CAUTIONS = (
    "Vibration analysis supports decisions; it does not prove a machine safe.",
    "Work on or near running machinery only under the site's own procedures (guards, "
    "lock-out/tag-out, hearing protection).",
    "ISO 20816 zone defaults are generic: the machine manufacturer's limits, the site's "
    "standards and local codes take precedence, and decisions to run or stop a machine "
    "rest with qualified, licensed personnel.",
)

_PATH_RE = re.compile(r"(/[^\s:;,()'\"]+|[A-Za-z]:\\[^\s:;,()'\"]+)")


def file_in(message: str) -> str:
    """The first file path a message names ("" when none)."""
    m = _PATH_RE.search(message or "")
    return m.group(1) if m else ""


def show_error(parent: QWidget | None, what: str, message: str, *, path: str = "",
               advice: str = "", details: str = "") -> QMessageBox:
    """Tell the user that something failed, without a traceback.

    Parameters
    ----------
    parent : QWidget or None
    what : str
        What failed, in a few words ("Reading the run failed").
    message : str
        The engine's message (it names the file and the problem).
    path : str, keyword-only
        The file concerned, when the message does not already name it.
    advice : str, keyword-only
        What the user can do about it.
    details : str, keyword-only
        The traceback or anything else for the log file only.

    Returns
    -------
    QMessageBox
        Shown (window-modal, not blocking the caller).
    """
    log.warning("%s: %s%s", what, message, f"\n{details}" if details else "")
    box = QMessageBox(parent)
    box.setObjectName(ERROR_DIALOG_NAME)
    box.setIcon(QMessageBox.Icon.Warning)
    box.setWindowTitle(f"Shaftwatch — {what}")
    box.setText(what)
    named = path or file_in(message)
    lines = [message]
    if named and named not in message:
        lines.append(f"File: {named}")
    if advice:
        lines.append(f"What to do: {advice}")
    where = log_path()
    if where is not None:
        lines.append(f"Details are in the log: {where}")
    box.setInformativeText("\n\n".join(lines))
    box.setStandardButtons(QMessageBox.StandardButton.Ok)
    box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
    box.setWindowModality(Qt.WindowModality.WindowModal if parent is not None
                          else Qt.WindowModality.ApplicationModal)
    box.open()
    return box


def advice_for(message: str) -> str:
    """A suggestion of what to do, from the kind of problem a message describes."""
    text = message.lower()
    if "cannot be opened as hdf5" in text or "missing root attribute" in text \
            or "missing group" in text:
        return ("The file may be damaged or was not written completely. Check the archive "
                "with `shaftwatch check ARCHIVE`; the other runs are not affected.")
    if "lines" in text and ("need frames" in text or "between" in text):
        return "Choose fewer lines or a higher Fmax in the settings panel."
    if "lock" in text or "writer" in text:
        return "Wait until the other program has finished writing, then try again."
    if "no shaftwatch archive" in text:
        return "Choose a folder that holds a Shaftwatch archive (it contains plant.h5)."
    return "Check the settings and the file named above, then try again."


class JobProgressDialog(QProgressDialog):
    """A progress dialog that follows a job and cancels it when asked."""

    def __init__(self, job: Job, text: str, parent: QWidget | None = None):
        super().__init__(text, "Cancel", 0, 0, parent)
        self.job = job
        self.setWindowTitle(f"Shaftwatch — {job.title}")
        self.setWindowModality(Qt.WindowModality.WindowModal if parent is not None
                               else Qt.WindowModality.ApplicationModal)
        self.setMinimumDuration(0)
        self.setAutoClose(False)
        self.setAutoReset(False)
        self.setMinimumWidth(420)
        self._base = text
        self._ended = False
        job.progress.connect(self._progress)
        self.canceled.connect(self._cancel)
        for sig in (job.finished, job.failed, job.cancelled):
            sig.connect(self._end)

    def _progress(self, done: int, total: int, text: str) -> None:
        if self._ended or not isValid(self):   # job ended, or the window went first
            return
        try:
            if total > 0:
                self.setMaximum(total)
                self.setValue(min(done, total))
            if text:
                self.setLabelText(f"{self._base}\n{text}")
        except RuntimeError:      # the dialog was deleted with its window meanwhile
            self._ended = True

    def _cancel(self) -> None:
        self.setLabelText(f"{self._base}\nStopping…")
        self.job.cancel()

    def _end(self, *_args) -> None:
        self._ended = True
        for sig, slot in ((self.job.progress, self._progress),
                          (self.job.finished, self._end), (self.job.failed, self._end),
                          (self.job.cancelled, self._end)):
            with contextlib.suppress(RuntimeError, TypeError):   # already disconnected
                sig.disconnect(slot)
        self.close()
        self.deleteLater()


def about_text() -> str:
    """The About box's text (HTML): what it is, its version, the cautions."""
    cautions = "".join(f"<li>{c}</li>" for c in CAUTIONS)
    return (f"<h3>Shaftwatch {engine.__version__}</h3>"
            "<p>Vibration condition monitoring of rotating machines: spectra, envelope "
            "spectra, orders, alarm bands, trends and reports over an open HDF5 plant "
            "archive.</p>"
            f"<p><b>Cautions</b></p><ul>{cautions}</ul>"
            "<p>Keyboard shortcuts: Help ▸ Keyboard shortcuts (F1).</p>")


def show_about(parent: QWidget | None) -> QMessageBox:
    box = QMessageBox(parent)
    box.setWindowTitle("About Shaftwatch")
    box.setTextFormat(Qt.TextFormat.RichText)
    box.setText(about_text())
    box.setStandardButtons(QMessageBox.StandardButton.Ok)
    box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
    box.open()
    return box


def shortcut_rows(actions: list[QAction]) -> list[tuple[str, str]]:
    """(keys, what) of every action that has a shortcut, in menu order, no repeats."""
    rows, seen = [], set()
    for a in actions:
        keys = ", ".join(s.toString(QKeySequence.SequenceFormat.NativeText)
                         for s in a.shortcuts() if not s.isEmpty())
        if not keys or keys in seen:
            continue
        seen.add(keys)
        rows.append((keys, a.text().replace("&", "").rstrip(".…")))
    return rows


class ShortcutsDialog(QDialog):
    """A table of the keyboard shortcuts, built from the window's own actions."""

    def __init__(self, actions: list[QAction], parent: QWidget | None = None):
        super().__init__(parent)
        self.setWindowTitle("Shaftwatch — keyboard shortcuts")
        rows = shortcut_rows(actions)
        self.table = QTableWidget(len(rows), 2, self)
        self.table.setHorizontalHeaderLabels(["Keys", "Action"])
        self.table.verticalHeader().setVisible(False)
        self.table.verticalHeader().setDefaultSectionSize(self.fontMetrics().height() + 6)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        for i, (keys, what) in enumerate(rows):
            self.table.setItem(i, 0, QTableWidgetItem(keys))
            self.table.setItem(i, 1, QTableWidgetItem(what))
        self.table.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.ResizeToContents)
        self.table.horizontalHeader().setStretchLastSection(True)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close, self)
        buttons.rejected.connect(self.reject)
        lay = QVBoxLayout(self)
        lay.addWidget(self.table)
        lay.addWidget(buttons)
        self.resize(460, 480)

    def rows(self) -> list[tuple[str, str]]:
        return [(self.table.item(i, 0).text(), self.table.item(i, 1).text())
                for i in range(self.table.rowCount())]
