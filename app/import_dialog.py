"""Import a survey: pick files or a folder, check which point each file goes to, import.

The mapping preview is :func:`engine.importer.plan_import` on the archive as read; the
user may change any file's point (or leave a file out) in the table.  The import itself
is :func:`engine.importer.run_import` in a job, through ``ctx.writer()``, with progress
and a stop button; a file that cannot be read is skipped with the reader's reason,
nothing is stored for it, and a dialog says which file failed and what to do.
"""

from __future__ import annotations

import fnmatch
import os
from collections.abc import Callable, Sequence
from pathlib import Path

from PySide6.QtCore import Signal
from PySide6.QtWidgets import (QAbstractItemView, QCheckBox, QComboBox, QDialog, QFileDialog,
                               QHBoxLayout, QHeaderView, QLabel, QLineEdit, QMessageBox,
                               QPlainTextEdit, QProgressBar, QPushButton, QTableWidget,
                               QTableWidgetItem, QVBoxLayout, QWidget)

from engine.errors import InputError
from engine.importer import (ImportPlan, ImportSummary, PlanItem, matching_points, plan_import,
                             remembered_pattern, run_import)
from engine.io import SUFFIXES

SKIP = "— leave out —"
#: Files listed by name in the error dialog before the rest are counted.
LISTED_FAILURES = 8
_FILTER = "Recordings (" + " ".join(f"*{s}" for s in SUFFIXES) + ");;All files (*)"


class _Flag:
    """The ``is_set()`` that :func:`engine.importer.run_import` checks, over a job's
    ``cancel()`` callable."""

    def __init__(self, cancel: Callable[[], bool]):
        self._cancel = cancel

    def is_set(self) -> bool:
        return bool(self._cancel())




def _plain_reason(file: str, reason: str | None) -> str:
    """A reader's message without the file path it starts with (the table names it)."""
    reason = reason or "not imported"
    prefix = f"{file}: "
    return reason[len(prefix):] if reason.startswith(prefix) else reason


def _remember_hand_choices(arc, summary: ImportSummary, by_hand: dict[str, str]) -> None:
    """Store a file-name pattern (:func:`engine.importer.remembered_pattern`) for every
    file put on a point by hand and now in the archive, unless the point's patterns
    already match it; what is added goes into ``summary.remembered``."""
    for entry in summary.imported + summary.duplicates:
        path = by_hand.get(entry["file"])
        if path is None:
            continue
        point, name = arc.point(path), Path(entry["file"]).name
        known = point.mapping_patterns + summary.remembered.get(path, [])
        if any(fnmatch.fnmatchcase(name.lower(), p.lower()) for p in known):
            continue
        pattern = remembered_pattern(name, point.machine)
        arc.update_point(path, mapping_patterns=list(point.mapping_patterns) + [pattern])
        summary.remembered.setdefault(path, []).append(pattern)


class ImportDialog(QDialog):
    """Import recording files into the archive of ``ctx``.

    Signals
    -------
    import_finished(object)
        The :class:`~engine.importer.ImportSummary` of an import that ended or was
        stopped (``cancelled`` True).
    import_failed(str)
        The import could not run (the message shown to the user).
    """

    import_finished = Signal(object)
    import_failed = Signal(str)

    def __init__(self, ctx, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.setWindowTitle("Import recordings")
        self.setAcceptDrops(True)
        self.inputs: list[Path] = []
        self.items: list[PlanItem] = []  # the plan's items, as planned
        self.summary: ImportSummary | None = None
        self.error_box: QMessageBox | None = None
        self.job = None
        self._close_when_done = False
        self._build()

    def _build(self) -> None:
        self.path_edit = QLineEdit()
        self.path_edit.setPlaceholderText("A recording file or a folder of recordings "
                                          "(several separated by ;)")
        self.path_edit.returnPressed.connect(self._paths_typed)
        self.files_button = QPushButton("Files…")
        self.files_button.clicked.connect(self._choose_files)
        self.folder_button = QPushButton("Folder…")
        self.folder_button.clicked.connect(self._choose_folder)
        pick = QHBoxLayout()
        pick.addWidget(QLabel("Import from"))
        pick.addWidget(self.path_edit, 1)
        pick.addWidget(self.files_button)
        pick.addWidget(self.folder_button)

        self.table = QTableWidget(0, 4)
        self.table.setHorizontalHeaderLabels(["File", "Point", "Mapping", "Result"])
        self.table.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Interactive)
        self.table.horizontalHeader().setSectionResizeMode(1, QHeaderView.ResizeMode.Interactive)
        self.table.horizontalHeader().setSectionResizeMode(2, QHeaderView.ResizeMode.Stretch)
        self.table.setColumnWidth(0, 240)
        self.table.setColumnWidth(1, 250)
        self.table.setColumnWidth(3, 160)
        self.table.setWordWrap(True)
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.NoSelection)
        self.remember_box = QCheckBox("Remember the points chosen by hand for the next survey")
        self.remember_box.setChecked(self.ctx.prefs.get("import/remember", True, bool))
        self.count_label = QLabel("Choose files or a folder, or drop them here.")

        self.progress_bar = QProgressBar()
        self.progress_bar.setVisible(False)
        self.status_label = QLabel("")
        self.status_label.setWordWrap(True)
        self.summary_text = QPlainTextEdit()
        self.summary_text.setReadOnly(True)
        self.summary_text.setPlaceholderText("The summary of the import appears here.")
        self.summary_text.setMaximumHeight(160)

        self.import_button = QPushButton("Import")
        self.import_button.setDefault(True)
        self.import_button.setEnabled(False)
        self.import_button.clicked.connect(self.start_import)
        self.stop_button = QPushButton("Stop")
        self.stop_button.setEnabled(False)
        self.stop_button.setToolTip("Stop after the file being imported; runs stored so far "
                                    "stay in the archive")
        self.stop_button.clicked.connect(self.cancel_import)
        self.close_button = QPushButton("Close")
        self.close_button.clicked.connect(self.reject)
        buttons = QHBoxLayout()
        buttons.addWidget(self.progress_bar, 1)
        buttons.addWidget(self.import_button)
        buttons.addWidget(self.stop_button)
        buttons.addWidget(self.close_button)

        layout = QVBoxLayout(self)
        layout.addLayout(pick)
        layout.addWidget(self.count_label)
        layout.addWidget(self.table, 1)
        layout.addWidget(self.remember_box)
        layout.addWidget(self.status_label)
        layout.addWidget(self.summary_text)
        layout.addLayout(buttons)
        self.resize(1040, 600)

    # -- choosing the files -------------------------------------------------------------
    def _start_folder(self) -> str:
        return self.ctx.prefs.get("import/folder", str(Path.home()), str)

    def _choose_files(self) -> None:
        files, _ = QFileDialog.getOpenFileNames(self, "Recording files", self._start_folder(),
                                                _FILTER)
        if files:
            self.ctx.prefs.set("import/folder", str(Path(files[0]).parent))
            self.set_inputs(files)

    def _choose_folder(self) -> None:
        folder = QFileDialog.getExistingDirectory(self, "Folder of recordings",
                                                  self._start_folder())
        if folder:
            self.ctx.prefs.set("import/folder", folder)
            self.set_inputs([folder])

    def _paths_typed(self) -> None:
        self.set_inputs([p.strip() for p in self.path_edit.text().split(";") if p.strip()])

    def dragEnterEvent(self, event) -> None:  # noqa: N802 - Qt's name
        if event.mimeData().hasUrls() and self.job is None:
            event.acceptProposedAction()

    def dropEvent(self, event) -> None:  # noqa: N802 - Qt's name
        paths = [u.toLocalFile() for u in event.mimeData().urls() if u.isLocalFile()]
        if paths:
            self.set_inputs(paths)

    def set_inputs(self, paths: Sequence[str | os.PathLike]) -> None:
        """Plan the import of ``paths`` (files and folders) and show the mapping."""
        self.inputs = [Path(p) for p in paths]
        self.path_edit.setText("; ".join(str(p) for p in self.inputs))
        self.summary = None
        self.summary_text.clear()
        self.status_label.setText("")
        arc = self.ctx.archive()
        try:
            plan = plan_import(arc, self.inputs)
        except InputError as exc:
            self.items = []
            self._fill_table(arc)
            self.status_label.setText(str(exc))
            return
        for item in plan.items:
            if item.point is None and Path(item.file).exists():
                item.reason = self._unmapped_reason(arc, item.file)
        self.items = plan.items
        self._fill_table(arc)

    @staticmethod
    def _unmapped_reason(arc, file: Path) -> str:
        hits = matching_points(arc, file.name)
        if hits:
            return ("matches the file-name patterns of several points (" + ", ".join(hits)
                    + "); choose one in the Point column")
        return "no point's file-name pattern matches it; choose a point in the Point column"

    def _display_name(self, file: Path) -> str:
        for base in self.inputs:
            if base.is_dir():
                try:
                    return str(file.relative_to(base))
                except ValueError:
                    continue
        return file.name

    def _fill_table(self, arc) -> None:
        points = sorted(p.path for p in arc.points())
        self.table.setRowCount(len(self.items))
        for row, item in enumerate(self.items):
            name = QTableWidgetItem(self._display_name(item.file))
            name.setToolTip(str(item.file))
            self.table.setItem(row, 0, name)
            combo = QComboBox()
            combo.addItem(SKIP, None)
            for path in points:
                combo.addItem(path, path)
            if item.point is not None:
                combo.setCurrentIndex(combo.findData(item.point))
            combo.setEnabled(item.file.exists())
            combo.currentIndexChanged.connect(lambda _i, r=row: self._point_changed(r))
            self.table.setCellWidget(row, 1, combo)
            mapping = QTableWidgetItem(self._mapping_text(arc, item, item.point))
            mapping.setToolTip(mapping.text())
            self.table.setItem(row, 2, mapping)
            self.table.setItem(row, 3, QTableWidgetItem(""))
        self.table.resizeRowsToContents()
        self._update_counts()

    def _mapping_text(self, arc, item: PlanItem, chosen: str | None) -> str:
        if chosen is None:
            if item.point is not None:
                return "skipped: left out by hand"
            return "skipped: " + _plain_reason(str(item.file), item.reason)
        if chosen != item.point:
            return "chosen by hand"
        name = item.file.name.lower()
        pats = [p for p in arc.point(chosen).mapping_patterns
                if fnmatch.fnmatchcase(name, p.lower())]
        return f"pattern {pats[0]}" if pats else "mapped"

    def _point_changed(self, row: int) -> None:
        item = self.items[row]
        chosen = self.table.cellWidget(row, 1).currentData()
        cell = self.table.item(row, 2)
        cell.setText(self._mapping_text(self.ctx.archive(), item, chosen))
        cell.setToolTip(cell.text())
        self._update_counts()

    def _update_counts(self) -> None:
        chosen = self.plan_items()
        n_map = sum(i.point is not None for i in chosen)
        if not chosen:
            text = ("No recording files found (" + ", ".join(SUFFIXES) + ")."
                    if self.inputs else "Choose files or a folder, or drop them here.")
        else:
            text = f"{len(chosen)} file(s): {n_map} to import, {len(chosen) - n_map} skipped."
        self.count_label.setText(text)
        self.import_button.setEnabled(n_map > 0 and self.job is None)

    def plan_items(self) -> list[PlanItem]:
        """The files with the points the table now gives them (``point`` None: skipped,
        with its reason)."""
        out = []
        for row, item in enumerate(self.items):
            combo = self.table.cellWidget(row, 1)
            chosen = combo.currentData() if combo is not None else item.point
            reason = None
            if chosen is None:
                reason = (f"{item.file}: left out by hand" if item.point is not None
                          else f"{item.file}: {_plain_reason(str(item.file), item.reason)}")
            out.append(PlanItem(item.file, chosen, reason))
        return out

    # -- importing ---------------------------------------------------------------------
    def start_import(self) -> None:
        """Import the files the table maps, in a job."""
        if self.job is not None:
            return
        items = self.plan_items()
        if not any(i.point is not None for i in items):
            self.status_label.setText("Nothing to import: choose a point for at least one file.")
            return
        planned = {str(i.file): i.point for i in self.items}
        by_hand = {str(i.file): i.point for i in items
                   if i.point is not None and i.point != planned[str(i.file)]}
        remember = self.remember_box.isChecked()
        self.ctx.prefs.set("import/remember", remember)
        holder: dict[str, ImportSummary] = {}

        def work(progress, cancel):
            todo = sum(i.point is not None for i in items)
            progress(0, todo, "opening the archive for writing")
            with self.ctx.writer("shaftwatch-gui import") as arc:
                plan = ImportPlan(arc, items)
                summary = run_import(plan, cancel=_Flag(cancel),
                                     progress=lambda d, t, f: progress(d, t, Path(f).name))
                holder["summary"] = summary
                if remember and by_hand:
                    _remember_hand_choices(arc, summary, by_hand)
            return summary

        self.summary = None
        self.summary_text.clear()
        self._busy(True)
        self.job = self.ctx.jobs.run(work, title="Import recordings",
                                     on_done=self._on_done, on_error=self._on_error,
                                     on_progress=self._on_progress,
                                     on_cancelled=lambda: self._on_stopped(holder))

    def cancel_import(self) -> None:
        """Stop after the file being imported (runs stored so far stay)."""
        if self.job is not None:
            self.job.cancel()
            self.status_label.setText("Stopping after the current file…")

    def reject(self) -> None:
        if self.job is not None:
            self._close_when_done = True
            self.cancel_import()
            return
        super().reject()

    def _busy(self, busy: bool) -> None:
        self.progress_bar.setVisible(busy)
        self.stop_button.setEnabled(busy)
        for w in (self.import_button, self.files_button, self.folder_button, self.path_edit,
                  self.table, self.remember_box):
            w.setEnabled(not busy)
        if busy:
            self.progress_bar.setRange(0, 0)
        else:
            self._update_counts()

    def _on_progress(self, done: int, total: int, text: str) -> None:
        self.progress_bar.setRange(0, max(total, 1))
        self.progress_bar.setValue(done)
        self.status_label.setText(f"{done} of {total} imported — {text}" if done
                                  else f"{text}…")

    def _ended(self) -> None:
        self.job = None
        self._busy(False)
        if self._close_when_done:
            self._close_when_done = False
            super().reject()

    def _on_done(self, summary: ImportSummary) -> None:
        self._show_summary(summary)
        self._ended()

    def _on_stopped(self, holder: dict) -> None:
        summary = holder.get("summary") or ImportSummary(cancelled=True)
        summary.cancelled = True
        self._show_summary(summary)
        self._ended()

    def _on_error(self, message: str, _details: str) -> None:
        self.status_label.setText(f"The import could not be completed: {message}")
        self._ended()
        self.ctx.reload()  # runs stored before the problem stay; show them
        self._error("The import could not be completed.", message,
                    "If another Shaftwatch window or the command line is writing to this "
                    "archive, let it finish and import again. Runs stored before the problem "
                    "stay in the archive; importing the same files again adds no duplicates.")
        self.import_failed.emit(message)

    def _error(self, text: str, detail: str, todo: str) -> None:
        self.error_box = QMessageBox(QMessageBox.Icon.Warning, "Import recordings", text,
                                     parent=self)
        self.error_box.setInformativeText(f"{detail}\n\nWhat to do: {todo}")
        self.error_box.open()

    def _show_results(self, summary: ImportSummary) -> None:
        """What became of each file, in the table's Result column."""
        result = {d["file"]: "imported" for d in summary.imported}
        result |= {d["file"]: "already in the archive" for d in summary.duplicates}
        runs = {d["file"]: d["run_id"] for d in summary.imported + summary.duplicates}
        result |= {s["file"]: ("skipped" if i.point is None else "not read")
                   for s, i in ((s, self._item(s["file"])) for s in summary.skipped) if i}
        for row, item in enumerate(self.items):
            text = result.get(str(item.file), "not reached (stopped)" if summary.cancelled
                              else "")
            cell = QTableWidgetItem(text)
            reason = next((s["reason"] for s in summary.skipped if s["file"] == str(item.file)),
                          None)
            if reason:
                cell.setToolTip(_plain_reason(str(item.file), reason))
            elif str(item.file) in runs:
                cell.setToolTip(f"run {runs[str(item.file)]}")
            self.table.setItem(row, 3, cell)
        self.table.resizeRowsToContents()

    def _item(self, file: str) -> PlanItem | None:
        """The file's item as the table now maps it."""
        return next((i for i in self.plan_items() if str(i.file) == file), None)

    def _show_summary(self, summary: ImportSummary) -> None:
        self.summary = summary
        to_point = {str(i.file): i.point for i in self.plan_items()}
        failed = [s for s in summary.skipped if to_point.get(s["file"]) is not None]
        lines = [("Stopped by the user. " if summary.cancelled else "")
                 + f"Imported {len(summary.imported)}, duplicates {len(summary.duplicates)}, "
                 f"skipped {len(summary.skipped)}."]
        lines += [f"  {Path(d['file']).name} → {d['point']} (run {d['run_id'][:10]})"
                  for d in summary.imported]
        lines += [f"  {Path(d['file']).name}: already in the archive as run {d['run_id'][:10]}"
                  f" ({d['point']}); nothing added" for d in summary.duplicates]
        lines += [f"  skipped {Path(s['file']).name}: {_plain_reason(s['file'], s['reason'])}"
                  for s in summary.skipped]
        lines += [f"  remembered for {p}: {', '.join(pats)}"
                  for p, pats in summary.remembered.items()]
        self.summary_text.setPlainText("\n".join(lines))
        self._show_results(summary)
        self.status_label.setText(lines[0])
        if summary.imported or summary.remembered:
            self.ctx.reload()
        if failed:
            listed = [f"• {Path(s['file']).name}: {_plain_reason(s['file'], s['reason'])}"
                      for s in failed[:LISTED_FAILURES]]
            if len(failed) > LISTED_FAILURES:
                listed.append(f"… and {len(failed) - LISTED_FAILURES} more (see the summary)")
            self._error(
                f"{len(failed)} file(s) could not be read and were skipped; nothing was "
                "stored for them." + (" The other files were imported."
                                      if summary.imported or summary.duplicates else ""),
                "\n".join(listed),
                "check that each file is a complete recording (" + ", ".join(SUFFIXES)
                + ") — open it in another program or export it again from the recorder — "
                "then import it again. Files already imported are recognised and not "
                "stored twice.")
        self.import_finished.emit(summary)
