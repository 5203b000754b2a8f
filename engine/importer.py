"""Importing recording files into an archive: plan first, then import.

:func:`plan_import` finds the files (one file, many, or folders searched recursively
for the suffixes of :data:`engine.io.SUFFIXES`) and maps each to a point — the point
given, or the one whose remembered file-name patterns match the file name (``fnmatch``
globs, ignoring case).  Nothing is written until :func:`run_import` runs the plan; a
file that cannot be read is skipped with the reader's message, and nothing already
stored changes.  A cancel request stops after the current file; every run stored so
far stays.

How each file is read: the options given win; otherwise a point with a sensor
sensitivity reads its files as volts and converts them, and a point without one reads
them in its own unit.  When the time a file was taken is not given and the file does
not hold it, the file's modification time is used (and stored as ``taken_source``
"file time").
"""

from __future__ import annotations

import fnmatch
import math
import os
import re
import sys
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

from .archive import Archive
from .errors import InputError
from .io import SUFFIXES, read_recording, wav_info

#: WAV files whose samples take more than this as float64 are streamed into the archive
#: instead of being read into memory first, bytes.
STREAM_THRESHOLD_BYTES = 64 << 20


@dataclass(frozen=True)
class ReadOptions:
    """How to read the files (``None`` = the point's setting or the reader's default)."""

    input_unit: str | None = None
    sensitivity: str | tuple[float, str] | None = None
    full_scale: float | None = None
    sample_rate_hz: float | None = None
    variable: str | None = None
    time_column: str | None = None


@dataclass
class PlanItem:
    """One file of a plan: the point it goes to, or why it has none."""

    file: Path
    point: str | None
    reason: str | None = None

    def as_dict(self) -> dict:
        return {"file": str(self.file), "point": self.point, "reason": self.reason}


@dataclass
class ImportPlan:
    """What :func:`run_import` will do; nothing has been written yet."""

    archive: Archive
    items: list[PlanItem]
    options: ReadOptions = field(default_factory=ReadOptions)
    taken: datetime | str | None = None
    rpm: float | None = None
    tach_channel: int | None = None
    channel: int | None = None
    notes: str = ""
    remember: bool = False
    explicit_point: str | None = None

    def mapped(self) -> list[PlanItem]:
        return [i for i in self.items if i.point is not None]

    def as_dict(self) -> dict:
        return {"files": [i.as_dict() for i in self.items],
                "to_import": len(self.mapped()),
                "unmapped": len(self.items) - len(self.mapped())}


@dataclass
class ImportSummary:
    """What an import did: runs stored, duplicates found, files skipped and why."""

    imported: list[dict] = field(default_factory=list)
    duplicates: list[dict] = field(default_factory=list)
    skipped: list[dict] = field(default_factory=list)
    cancelled: bool = False
    remembered: dict[str, list[str]] = field(default_factory=dict)
    evaluation: dict | None = None     # engine.pipeline.Evaluation.as_dict() of the new runs

    def as_dict(self) -> dict:
        return {"imported": self.imported, "duplicates": self.duplicates,
                "skipped": self.skipped, "cancelled": self.cancelled,
                "remembered": self.remembered, "evaluation": self.evaluation}


def find_files(inputs: Sequence[str | os.PathLike]) -> tuple[list[Path], list[dict]]:
    """Files named, and recording files found in folders (recursively, sorted).

    Returns
    -------
    (files, skipped)
        ``skipped`` lists inputs that do not exist, with the reason.
    """
    files, skipped, seen = [], [], set()
    for raw in inputs:
        p = Path(raw)
        if p.is_dir():
            found = sorted(q for q in p.rglob("*")
                           if q.is_file() and q.suffix.lower() in SUFFIXES)
        elif p.exists():
            found = [p]
        else:
            skipped.append({"file": str(p), "reason": f"{p}: no such file or folder"})
            continue
        for q in found:
            key = os.path.normcase(os.path.abspath(q))
            if key not in seen:
                seen.add(key)
                files.append(q)
    return files, skipped


def matching_points(archive: Archive, file_name: str) -> list[str]:
    """Points whose mapping patterns match a file name (ignoring case)."""
    name = file_name.lower()
    return [p.path for p in archive.points()
            if any(fnmatch.fnmatchcase(name, pat.lower()) for pat in p.mapping_patterns)]


def plan_import(archive: Archive, inputs: Sequence[str | os.PathLike], *,
                point: str | None = None, options: ReadOptions | None = None,
                taken=None, rpm: float | None = None, tach_channel: int | None = None,
                channel: int | None = None, notes: str = "", remember: bool = False
                ) -> ImportPlan:
    """Map every file to a point; nothing is read or written.

    Parameters
    ----------
    archive : Archive
    inputs : sequence of path-like
        Files and folders.
    point : str, optional, keyword-only
        ``"Site/Machine/Point"`` for every file; otherwise each file goes to the point
        whose patterns match its name.
    options : ReadOptions, keyword-only
    taken, rpm, tach_channel, channel, notes : keyword-only
        As in :meth:`engine.archive.Archive.import_recording`, for every file.
    remember : bool, keyword-only
        After the import, store a pattern for the files imported to ``point`` so that
        the next survey maps by itself.

    Returns
    -------
    ImportPlan
    """
    if point is not None:
        archive.point(point)
    if remember and point is None:
        raise InputError("--remember needs --point: it stores a pattern for that point")
    files, missing = find_files(inputs)
    items = [PlanItem(Path(m["file"]), None, m["reason"]) for m in missing]
    for f in files:
        if point is not None:
            items.append(PlanItem(f, point))
            continue
        hits = matching_points(archive, f.name)
        if len(hits) == 1:
            items.append(PlanItem(f, hits[0]))
        elif hits:
            items.append(PlanItem(f, None, f"{f}: matches the patterns of several points "
                                           f"({', '.join(hits)}); give --point"))
        else:
            items.append(PlanItem(f, None, f"{f}: no point's pattern matches this file "
                                           "name; give --point or add a pattern to a point"))
    return ImportPlan(archive, items, options or ReadOptions(), taken, rpm, tach_channel,
                      channel, notes, remember, point)


def remembered_pattern(file_name: str, machine_tag: str) -> str:
    """A glob for files like ``file_name``: every run of digits outside the machine tag
    becomes ``*`` (dates, times, counters), so that the next survey's files match.

    >>> remembered_pattern("P-101_DE_H_2026-08-03_0815.wav", "P-101")
    'P-101_DE_H_*-*-*_*.wav'
    """
    parts = re.split(f"({re.escape(machine_tag)})", file_name, flags=re.IGNORECASE)
    out = [glob_escape(p) if i % 2 else re.sub(r"\d+", "*", glob_escape(p))
           for i, p in enumerate(parts)]
    return re.sub(r"\*+", "*", "".join(out))


def glob_escape(text: str) -> str:
    """``text`` with fnmatch's special characters taken literally."""
    return re.sub(r"([*?\[])", r"[\1]", text)


def _read_options(opts: ReadOptions, props: dict) -> tuple[str, object]:
    unit, sens = opts.input_unit, opts.sensitivity
    point_sens = props.get("sensitivity_v_per_unit", math.nan)
    has_point_sens = isinstance(point_sens, float) and not math.isnan(point_sens)
    if unit is None:
        if sens is not None:
            unit = "V"
        elif has_point_sens:
            unit, sens = "V", (point_sens, props["unit"])
        else:
            unit = props["unit"]
    elif unit == "V" and sens is None and has_point_sens:
        sens = (point_sens, props["unit"])
    return unit, sens


def _file_time(path: Path) -> datetime:
    return datetime.fromtimestamp(path.stat().st_mtime, UTC)


def run_import(plan: ImportPlan, *, progress: Callable[[int, int, str], None] | None = None,
               cancel=None, stream_threshold_bytes: int = STREAM_THRESHOLD_BYTES,
               analyse: bool = True) -> ImportSummary:
    """Import the mapped files of a plan, one after the other.

    Parameters
    ----------
    plan : ImportPlan
    progress : callable(done, total, file), optional, keyword-only
        Called after each file.
    cancel : object with ``is_set()`` (e.g. threading.Event), optional, keyword-only
        Checked before each file; when set, the import stops there.
    stream_threshold_bytes : int, keyword-only
        WAV files whose float64 samples exceed this are streamed.
    analyse : bool, keyword-only
        Analyse the new runs and evaluate their points' alarms (engine.pipeline), so
        that every run gets its state on import (default True).

    Returns
    -------
    ImportSummary
    """
    arc = plan.archive
    summary = ImportSummary()
    summary.skipped = [{"file": str(i.file), "reason": i.reason} for i in plan.items
                       if i.point is None]
    todo = plan.mapped()
    remember: dict[str, list[str]] = {}
    try:
        for n, item in enumerate(todo):
            if cancel is not None and cancel.is_set():
                summary.cancelled = True
                break
            _import_one(plan, item, summary, stream_threshold_bytes, remember)
            if progress is not None:
                progress(n + 1, len(todo), str(item.file))
    finally:
        arc.flush()
    for path, pats in remember.items():
        point = arc.point(path)
        new = [p for p in pats if p not in point.mapping_patterns]
        if new:
            arc.update_point(path, mapping_patterns=list(point.mapping_patterns) + new)
            summary.remembered[path] = new
    if analyse and summary.imported:
        from .pipeline import process_new_runs

        ids = [e["run_id"] for e in summary.imported]
        summary.evaluation = process_new_runs(arc, ids).as_dict()
        arc.flush()
    return summary


def _import_one(plan: ImportPlan, item: PlanItem, summary: ImportSummary, threshold: int,
                remember: dict[str, list[str]]) -> None:
    arc, f = plan.archive, item.file
    point = arc.point(item.point)
    unit, sens = _read_options(plan.options, point.props)
    o = plan.options
    try:
        taken, how = (plan.taken, "given") if plan.taken is not None else (None, None)
        common = dict(rpm=plan.rpm, notes=plan.notes, tach_channel=plan.tach_channel,
                      channel=plan.channel)
        if f.suffix.lower() == ".wav" and _wav_float64_bytes(f) > threshold:
            if o.sample_rate_hz is not None or o.variable or o.time_column:
                raise InputError(f"{f}: a sample rate, variable or time column does not "
                                 "apply to a WAV file")
            if taken is None:
                taken, how = _file_time(f), "file time"
            result = arc.import_wav_file(f, point.path, input_unit=unit,
                                         full_scale=o.full_scale, sensitivity=sens,
                                         taken=taken, taken_source=how, **common)
        else:
            try:
                rec = read_recording(f, input_unit=unit, sample_rate_hz=o.sample_rate_hz,
                                     variable=o.variable, full_scale=o.full_scale,
                                     sensitivity=sens, time_column=o.time_column)
            except OSError as exc:
                raise InputError(f"{f}: cannot be read ({exc.strerror or exc})") from None
            if taken is None and rec.taken is None:
                taken, how = _file_time(f), "file time"
            result = arc.import_recording(rec, point.path, taken=taken, taken_source=how,
                                          source=f.name, **common)
    except InputError as exc:
        summary.skipped.append({"file": str(f), "reason": str(exc)})
        return
    entry = {"file": str(f), "run_id": result.run_id, "point": result.point}
    (summary.duplicates if result.duplicate else summary.imported).append(entry)
    if plan.remember and item.point == plan.explicit_point:
        pattern = remembered_pattern(f.name, point.machine)
        if not any(fnmatch.fnmatchcase(f.name.lower(), p.lower())
                   for p in point.mapping_patterns + remember.get(point.path, [])):
            remember.setdefault(point.path, []).append(pattern)


def _wav_float64_bytes(path: Path) -> int:
    try:
        info = wav_info(path)
    except InputError:
        return 0  # let the ordinary reader report the problem
    return info.n_frames * info.channels * 8


class TerminalProgress:
    """A one-line progress bar with count, rate and time left, for a terminal.

    Parameters
    ----------
    stream : file, optional
        Where to draw (default ``sys.stderr``).
    width : int
        Characters of the bar.
    unit : str
        What is counted, for the rate ("files", "runs").
    label : callable(str) -> str, optional
        The text shown after the bar (default: the file name of the text, 30 characters).
    rate_from_first : bool
        Count the rate from the first report's ``done`` (a resumed batch starts with
        work done before it, which is no measure of the rate).
    """

    def __init__(self, stream=None, *, width: int = 28, unit: str = "files",
                 label=None, rate_from_first: bool = False):
        self.stream = stream or sys.stderr
        self.width = width
        self.unit = unit
        self.label = label or (lambda text: Path(text).name[:30])
        self.rate_from_first = rate_from_first
        self.first: int | None = None
        self.start = time.monotonic()
        self.drawn = False

    def __call__(self, done: int, total: int, text: str) -> None:
        if self.first is None:
            self.first = done if self.rate_from_first else 0
        elapsed = max(time.monotonic() - self.start, 1e-9)
        rate = (done - self.first) / elapsed
        left = (total - done) / rate if rate > 0 else math.inf
        filled = int(self.width * done / total) if total else self.width
        bar = "#" * filled + "-" * (self.width - filled)
        eta = "--:--" if not math.isfinite(left) else f"{int(left) // 60}:{int(left) % 60:02d}"
        line = f"[{bar}] {done}/{total}  {rate:.1f} {self.unit}/s  {eta} left  {self.label(text)}"
        self.stream.write("\r" + line.ljust(110)[:110])
        self.stream.flush()
        self.drawn = True

    def finish(self) -> None:
        if self.drawn:
            self.stream.write("\n")
            self.stream.flush()
