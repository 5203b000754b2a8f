"""The long work of the setup view, as plain functions of the engine's long-work form
(``progress``, ``cancel``) for ``AppContext.jobs``: store an alarm plan and re-evaluate
the history, re-analyse a point's runs after its settings changed, and learn levels
from the first runs.  Each returns what changed so that the view can say so.

Storing and re-evaluating go through the batch engine (``engine.batch.apply_plan``,
``engine.batch.reprocess``); the states are read before and after from the archive
itself, so the summary shows what the archive now holds.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from pathlib import Path

from engine import batch
from engine.alarms.baseline import MIN_BASELINE_RUNS, baseline_plan
from engine.alarms.plan import AlarmPlan
from engine.archive import open_archive
from engine.errors import InputError
from engine.pipeline import Stopped, point_setup, remeasure
from engine.results import band_value_name

from .jobs import Cancelled

Progress = Callable[[int, int, str], None] | None
Cancel = Callable[[], bool] | None




@dataclass(frozen=True)
class RunChange:
    """A run whose alarm state changed: ``taken_s`` in s since 1970 UTC."""

    point: str
    run_id: str
    taken_s: float
    before: str
    now: str

    @property
    def taken_text(self) -> str:
        if not math.isfinite(self.taken_s):
            return ""
        return datetime.fromtimestamp(self.taken_s, tz=UTC).strftime("%Y-%m-%d %H:%M")


@dataclass
class ChangeSummary:
    """What a piece of setup work changed.

    Attributes
    ----------
    title : str
        What was done ("Alarm plan applied to 1 point").
    points : dict of str to (str, str)
        Every point worked on: its state (latest run) before and now.
    runs : list of RunChange
        Runs whose state changed, by point then time.
    evaluated : int
        Runs whose state was evaluated.
    problems : list of dict
        Runs that could not be analysed (``run_id``, ``point``, ``reason``).
    notes : list of str
        What the work noticed on its way (a stop before the end, archive notices).
    """

    title: str
    points: dict[str, tuple[str, str]] = field(default_factory=dict)
    runs: list[RunChange] = field(default_factory=list)
    evaluated: int = 0
    problems: list[dict] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def changed_points(self) -> dict[str, tuple[str, str]]:
        return {p: s for p, s in self.points.items() if s[0] != s[1]}

    def lines(self) -> list[str]:
        """The summary in plain lines (what the summary dialog shows)."""
        out = [self.title, f"{self.evaluated} runs evaluated; {len(self.runs)} changed state."]
        for p, (before, now) in self.points.items():
            mark = "" if before != now else " (unchanged)"
            out.append(f"{p}: {state_word(before)} → {state_word(now)}{mark}")
        for r in self.runs:
            out.append(f"  {r.point} {r.taken_text} run {r.run_id[:8]}: "
                       f"{state_word(r.before)} → {state_word(r.now)}")
        for pr in self.problems:
            out.append(f"not analysed: {pr.get('point', '')} run {str(pr.get('run_id', ''))[:8]}"
                       f": {pr.get('reason', '')}")
        out += self.notes
        return out

    def text(self) -> str:
        return "\n".join(self.lines())


def state_word(state: str) -> str:
    return state or "not evaluated"


def snapshot(arc, points: Iterable[str]) -> dict[str, dict]:
    """Per point: its latest state and ``{run_id: (taken_s, state)}`` of every run."""
    latest = arc.point_states()
    out = {}
    for p in points:
        rows = arc.value_rows(p)
        runs = {}
        if rows and rows["run_id"].size:
            runs = {str(r): (float(t), str(s)) for r, t, s in
                    zip(rows["run_id"], rows["taken_s"], rows["state"])}
        out[p] = {"state": str(latest.get(p, {}).get("state", "")), "runs": runs}
    return out


def compare(title: str, before: dict, after: dict, problems: list[dict] | None = None,
            notes: list[str] | None = None) -> ChangeSummary:
    """The summary of two :func:`snapshot` results."""
    out = ChangeSummary(title=title, problems=list(problems or []), notes=list(notes or []))
    for p, now in after.items():
        was = before.get(p, {"state": "", "runs": {}})
        out.points[p] = (was["state"], now["state"])
        out.evaluated += len(now["runs"])
        changes = [RunChange(p, rid, t, was["runs"].get(rid, (t, ""))[1], s)
                   for rid, (t, s) in now["runs"].items()
                   if was["runs"].get(rid, (t, ""))[1] != s]
        out.runs += sorted(changes, key=lambda c: c.taken_s)
    return out


def _read(archive_path, points) -> dict:
    with open_archive(archive_path, mode="r") as arc:
        return snapshot(arc, points)


def _batch_outcome(result) -> tuple[list[dict], list[str]]:
    """Problems and notes of an ``engine.batch`` summary (``failed``, ``notes``,
    ``cancelled``)."""
    problems = [dict(f) for f in getattr(result, "failed", None) or []]
    notes = list(getattr(result, "notes", None) or [])
    if getattr(result, "cancelled", False):
        notes.append("Stopped before the end: the work done so far is kept; do it again "
                     "to finish.")
    return problems, notes


def apply_plan(archive_path: str | Path, points: list[str], plan: AlarmPlan, *,
               progress: Progress = None, cancel: Cancel = None) -> ChangeSummary:
    """Store ``plan`` for ``points`` and re-evaluate their whole history.

    Parameters
    ----------
    archive_path : str or Path
    points : list of str
        ``Site/Machine/Point`` paths; each gets the plan (validated against its Fmax).
    plan : AlarmPlan
    progress, cancel : callables, keyword-only
        The engine's long-work callbacks.

    Returns
    -------
    ChangeSummary

    Raises
    ------
    InputError
        A plan that does not fit a point (nothing is stored).
    app.jobs.Cancelled
        The user stopped the re-evaluation (the plan is stored; apply again to finish).
    """
    points = list(dict.fromkeys(points))
    before = _read(archive_path, points)
    try:
        problems, notes = _batch_outcome(batch.apply_plan(archive_path, points, plan,
                                                          progress=progress, cancel=cancel))
    except Stopped as exc:
        raise Cancelled(f"{exc}; the plan is stored, apply it again to finish the "
                        "re-evaluation") from None
    n = len(points)
    return compare(f"Alarm plan {plan.name!r} applied to {n} point{'s' if n != 1 else ''}",
                   before, _read(archive_path, points), problems, notes)


def reprocess_points(archive_path: str | Path, points: list[str], *,
                     progress: Progress = None, cancel: Cancel = None) -> ChangeSummary:
    """Analyse every run of ``points`` again with their settings and re-evaluate them.

    Returns
    -------
    ChangeSummary
        With the runs that could not be analysed in ``problems``.
    """
    points = list(dict.fromkeys(points))
    before = _read(archive_path, points)
    try:
        problems, notes = _batch_outcome(batch.reprocess(
            archive_path, what="analyse", points=points, progress=progress, cancel=cancel))
    except Stopped as exc:
        raise Cancelled(f"{exc}; analyse again to finish") from None
    n = len(points)
    return compare(f"Runs of {n} point{'s' if n != 1 else ''} analysed again", before,
                   _read(archive_path, points), problems, notes)


def learn_baseline(archive_path: str | Path, point: str, template: AlarmPlan, *,
                   runs: int = MIN_BASELINE_RUNS, method: str = "sigma",
                   progress: Progress = None, cancel: Cancel = None,
                   **factors) -> AlarmPlan:
    """Levels for the template's bands learnt from the point's first ``runs`` runs.

    The template's bands are measured again on each run's stored spectra (the bands
    may have been edited since the runs were evaluated), then
    :func:`engine.alarms.baseline.baseline_plan` sets the levels.  Runs of bad data
    quality (``error``) are left out.

    Parameters
    ----------
    archive_path : str or Path
    point : str
    template : AlarmPlan
        The bands to learn levels for.
    runs : int, keyword-only
        How many of the first analysed runs form the baseline.
    method : str, keyword-only
        ``sigma`` or ``ratio`` (see :mod:`engine.alarms.baseline`).
    **factors
        ``k``, ``danger_k``, ``alert_ratio``, ``danger_ratio`` for ``baseline_plan``.

    Raises
    ------
    InputError
        Too few analysed runs, or a band that cannot be learnt (the message names it).
    """
    if isinstance(runs, bool) or not isinstance(runs, int) or runs < MIN_BASELINE_RUNS:
        raise InputError(f"baseline of {point}: runs must be a whole number of at least "
                         f"{MIN_BASELINE_RUNS}, got {runs!r}")
    with open_archive(archive_path, mode="r") as arc:
        rows = arc.value_rows(point)
        if not rows or not rows["run_id"].size:
            raise InputError(f"baseline of {point}: the point has no analysed runs")
        order = sorted(range(rows["run_id"].size), key=lambda i: float(rows["taken_s"][i]))
        chosen = [str(rows["run_id"][i]) for i in order if str(rows["quality"][i]) != "error"]
        chosen = chosen[:runs]
        if len(chosen) < runs:
            raise InputError(f"baseline of {point}: {len(chosen)} analysed run(s) of good "
                             f"quality; {runs} were asked for")
        setup = replace(point_setup(arc, point), plan=template)
        values = []
        for i, rid in enumerate(chosen):
            if cancel is not None and cancel():
                raise Cancelled("baseline stopped")
            results = arc.results(rid)
            if results is None:
                continue
            fresh = remeasure(arc, results, setup)
            values.append({b.name: fresh.value(band_value_name(b.name)) for b in template.bands})
            if progress is not None:
                progress(i + 1, len(chosen), f"measured run {rid[:8]}")
    return baseline_plan(template, values, method=method, name=template.name, **factors)
