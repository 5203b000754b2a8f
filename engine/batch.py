"""Reprocessing a whole archive: analysis or alarm evaluation of many runs at once.

:func:`reprocess` analyses runs again (``what="analyse"``: spectra, values, peaks,
findings and band values, optionally with other analysis settings) or re-evaluates
their alarms from the stored results (``what="evaluate"``); :func:`apply_plan` stores an
alarm plan for points and re-evaluates their whole history.  Both report progress,
can be cancelled, and leave the archive consistent whenever they stop.

How the work is shared
----------------------
The calling process opens the archive as its writer and holds the lock for the whole
batch.  It resolves each run into a small task (run file, results file, the point's
setup computed once per point, the catalogue's time, speed and quality, the axial
companion values) and hands tasks to workers: processes of a local pool (h5py holds
one global lock, so processes, not threads; forked from a clean fork server, or
spawned where there is none, :mod:`engine.batch_exec`), or tasks of a Dask distributed cluster when a scheduler address is given
(:mod:`engine.batch_dask`; the ``cluster`` extra, imported only then).  A worker reads
the run file read-only, analyses it with :func:`engine.analysis.analyse_recording`
exactly as :func:`engine.pipeline.analyse_run` does, writes the run's results file
atomically and sends back the results without spectra (:mod:`engine.batch_tasks`).
The parent keeps them in the value table (``store_results(rows, written=True)``) every
:data:`STORE_EVERY` runs and writes the table (``flush``) every :data:`FLUSH_EVERY`
runs once :data:`FLUSH_EVERY_S` seconds have passed, then evaluates the alarms of the
points concerned (:func:`engine.pipeline.evaluate_points`).  With one worker, or fewer
runs than :data:`POOL_MIN_RUNS_PER_WORKER` per worker, the parent does the work itself
(no pool to start); re-measuring band values uses a pool only from
:data:`POOL_MIN_REMEASURE` runs on, as each takes milliseconds, and hands them out
:data:`REMEASURE_CHUNK` at a time.  The parent reads the asset tree and the value table
through :class:`engine.batch_view.ArchiveView` (each point's model, shaft and plan read
once; value rows grouped by point once), which answers as the archive does.

The axial point's 1× and 2× feed the radial points' findings: runs of axial points are
analysed first, all of them, and their values are in the table before any radial run
is handed out (as :func:`engine.pipeline.analyse_runs` orders them), so pool, cluster
and serial analysis give the same findings.

Resume and what counts as done
------------------------------
``what="analyse"`` keeps a journal, ``batch.json`` in the archive folder
(:mod:`engine.batch_journal`), listing the runs whose results are in the written
value table.  Running the same batch again after a cancel, a Ctrl-C or a crash skips
those runs and continues; a batch that finishes removes its journal.  Besides, a run
whose results already carry the run's stamp (engine version, point setup and settings,
axial companion values; :func:`engine.batch_tasks.run_stamp`) and the digest of the
plan in force is *current*: it is not analysed again, only its row refreshed.
``resume=False`` sets the journal aside and analyses every run again.
``what="evaluate"`` needs no journal: runs whose band values were measured for the
plan in force are not measured again, so a stopped evaluation continues by itself.

Cancel
------
``cancel`` (a callable returning True, or a ``threading.Event``) stops the hand-out of
work; the runs in flight finish and are kept, the value table and the journal are
written, and the alarms of the points concerned are evaluated so that every stored
run has its state.  The summary says ``cancelled``.  A stopped re-measurement keeps
the points whose runs all came back and evaluates them; the value rows of the others
stay as they were (the next evaluation measures their runs again).

Failures
--------
A run that cannot be analysed (an unreadable run file, a record too short for the
settings) is listed in ``failed`` with the file and the reason; its earlier results,
if any, stay as they were, and every other run goes on.  A run whose results file
cannot be read when its band values must be measured again is listed likewise; its
point's value rows and states stay as they were and its alarms are not evaluated (a
note says so), the other points go on.  Settings given to
:func:`reprocess` apply to this batch only; they are not stored as the points'
settings (runs imported later are analysed with the points' own).
"""

from __future__ import annotations

import time
from pathlib import Path

from .batch_exec import Runners
from .batch_input import (SETTING_KEYS, WHATS, BatchSummary, check_settings, check_workers,
                          open_writer, selected_points, selected_runs, stopper)
from .batch_journal import Journal, parameters_digest
from .batch_tasks import Chunk, Outcome, RunItem, run_stamp, setup_stamp
from .batch_view import ArchiveView
from .errors import EngineError, InputError
from .pipeline import Progress, _axial_companion, evaluate_points, point_setup

__all__ = ["SETTING_KEYS", "WHATS", "BatchSummary", "apply_plan", "check_settings",
           "reprocess"]

#: Results kept in the value table (in memory) at a time.
STORE_EVERY = 50
#: The value table and the journal are written after this many runs, at most once
#: every FLUSH_EVERY_S seconds (a 20,000-row table takes about half a second to write).
FLUSH_EVERY = 200
FLUSH_EVERY_S = 10.0
#: Runs re-measured per task (each takes milliseconds; one task per run would spend
#: more on handing out than on measuring).
REMEASURE_CHUNK = 50
#: Fewer runs to analyse than this per worker: the parent analyses them itself.
POOL_MIN_RUNS_PER_WORKER = 2
#: Fewer runs to re-measure than this: the parent re-measures them itself.
POOL_MIN_REMEASURE = 400


class _Keeper:
    """Keeps the outcomes coming back: value table, progress, journal.

    With ``expected`` (point -> runs handed out for it), a point's rows are kept only
    once all of its runs are back and none failed, so that a stopped or failed
    re-measurement leaves each point's rows either wholly re-measured or as they were
    (its results files then hold band values the value table does not have yet; the
    next evaluation finds those runs out of date and measures them again).
    """

    def __init__(self, view: ArchiveView, summary: BatchSummary, progress: Progress,
                 total: int, journal: Journal | None = None, start: int = 0,
                 expected: dict[str, int] | None = None):
        self.view, self.summary, self.progress = view, summary, progress
        self.total, self.count, self.journal = total, start, journal
        self.expected = expected
        self.held: dict[str, list] = {}
        self.back: dict[str, int] = {}
        self.complete: set[str] = set()
        self.rows: list = []
        self.unflushed: list[str] = []
        self.bad_points: set[str] = set()
        self.last_flush = time.monotonic()

    def begin(self, text: str) -> None:
        """Report where the batch starts (before any run is handed out)."""
        if self.progress is not None:
            self.progress(self.count, self.total, text)

    def __call__(self, outcomes: list[Outcome]) -> None:
        for o in outcomes:
            if o.status == "failed":
                self.summary.failed.append({"run_id": o.run_id, "point": o.point,
                                            "path": o.path, "reason": o.reason})
                self.bad_points.add(o.point)
            else:
                self.held.setdefault(o.point, []).append(o)
            self.back[o.point] = self.back.get(o.point, 0) + 1
            if self.expected is None:
                self._keep(self.held.pop(o.point, []))
            elif self.back[o.point] == self.expected.get(o.point):
                held = self.held.pop(o.point, [])
                if o.point not in self.bad_points:   # a point is kept whole or not at all
                    self._keep(held)
                    self.complete.add(o.point)
            self.count += 1
            if self.progress is not None:
                self.progress(self.count, self.total, f"{o.status} {o.point} run {o.run_id[:8]}")
        if len(self.rows) >= STORE_EVERY:
            self.store()
        if len(self.unflushed) >= FLUSH_EVERY \
                and time.monotonic() - self.last_flush >= FLUSH_EVERY_S:
            self.flush()

    def _keep(self, outcomes: list[Outcome]) -> None:
        for o in outcomes:
            (self.summary.done if o.status == "done" else self.summary.skipped).append(o.run_id)
            self.rows.append(o.results)
            self.unflushed.append(o.run_id)

    def store(self) -> None:
        if self.rows:
            self.view.store_results(self.rows, written=True)
            self.rows = []

    def flush(self) -> None:
        self.store()
        self.view.flush()
        if self.journal is not None and self.unflushed:
            self.journal.add(self.unflushed)
            self.journal.save()
        self.unflushed = []
        self.last_flush = time.monotonic()


def _evaluate_states(view: ArchiveView, points: list[str], summary: BatchSummary,
                     progress: Progress, base: int, total: int) -> None:
    """Evaluate the points' alarms; a point that cannot be evaluated is reported."""
    step = None if progress is None else (
        lambda k, n, text: progress(base + k, total, text))
    try:
        evs = [evaluate_points(view, points, progress=step)]
    except EngineError:
        evs = []
        for p in points:         # find the point at fault, evaluate the others
            try:
                evs.append(evaluate_points(view, [p]))
            except EngineError as exc:
                summary.failed.append({"run_id": "", "point": p, "path": "",
                                       "reason": f"alarms not evaluated: {exc}"})
    for ev in evs:
        summary.events += ev.events
        summary.remeasured += ev.remeasured
        for prob in ev.problems:
            summary.failed.append({"path": "", **prob})


def _finish_states(view: ArchiveView, summary: BatchSummary, points: list[str],
                   before: dict) -> None:
    now = view.point_states()
    summary.states = {p: now[p]["state"] for p in points if p in now}
    summary.changed = {p: (before.get(p, ""), s) for p, s in summary.states.items()
                       if before.get(p, "") != s}


# -- analyse --------------------------------------------------------------------------------
def _analyse(view: ArchiveView, runners: Runners, rows: list, settings: dict, resume: bool,
             progress: Progress, stop, summary: BatchSummary, points_arg
             ) -> tuple[str, Journal]:
    """Analyse the runs (axial points first); returns the runner's status and the
    journal."""
    arc = view.archive
    direction = {p.path: p.props.get("direction") for p in arc.points()}
    names = sorted({r.point for r in rows})
    setups = {p: point_setup(view, p, settings=settings) for p in names}
    stamps = {p: setup_stamp(s) for p, s in setups.items()}
    ids = sorted(r.run_id for r in rows)
    parameters = {"what": "analyse", "points": points_arg, "runs": len(ids),
                  "settings": settings}
    digest = parameters_digest({**parameters, "run_ids": ids, "setups": stamps})
    journal, note = Journal.start(arc.path, digest, parameters, resume=resume)
    if note:
        summary.notes.append(note)
    summary.skipped.extend(r.run_id for r in rows if r.run_id in journal)
    todo = sorted((r for r in rows if r.run_id not in journal), key=lambda r: r.taken_s)
    axial = [r for r in todo if direction.get(r.point) == "A"]
    radial = [r for r in todo if direction.get(r.point) != "A"]
    total = len(rows) + len(names)
    keeper = _Keeper(view, summary, progress, total, journal, start=len(summary.skipped))
    keeper.begin(f"{len(summary.skipped)} runs done by the stopped batch"
                 if summary.skipped else f"{len(todo)} runs to analyse")
    runner = runners.choose(len(todo), POOL_MIN_RUNS_PER_WORKER * runners.workers)
    summary.workers, summary.where = runner.workers, runner.where

    def item(r) -> RunItem:
        comp = _axial_companion(view, setups[r.point], r.taken_s)
        return RunItem(run_id=r.run_id, point=r.point, run_file=str(arc.path / r.path),
                       results_file=str(arc.results_file(r.run_id)), taken_s=r.taken_s,
                       rpm=r.rpm, quality=r.quality, axial_companion=comp,
                       stamp=run_stamp(stamps[r.point], comp))

    def chunks(group):
        for r in group:
            yield Chunk("analyse", setups[r.point], (item(r),), check_current=resume)

    status = ""
    try:
        status = runner.run(chunks(axial), keeper, stop)
        keeper.store()           # the axial values must be in the table for the radial runs
        if not status:
            status = runner.run(chunks(radial), keeper, stop)
    finally:
        keeper.flush()
    summary.left = len(rows) - len(summary.done) - len(summary.skipped) - len(summary.failed)
    return status, journal


# -- evaluate -------------------------------------------------------------------------------
def _remeasure(view: ArchiveView, runners: Runners, points: list[str], progress: Progress,
               stop, summary: BatchSummary) -> tuple[str, set[str], int]:
    """Measure again, in the pool when there are many, the band values of every run
    measured for another plan than the one in force.

    Returns the runner's status, the points ready to evaluate (every run current) and
    the progress total.
    """
    chunks, expected = [], {}
    ready: set[str] = set()
    for p in points:
        setup = point_setup(view, p)
        rows = view.value_rows(p)
        if setup.plan is None or not rows["run_id"].size:
            ready.add(p)
            continue
        digest = setup.plan.digest()
        stale = [str(r) for r, d in zip(rows["run_id"], rows["plan_digest"]) if d != digest]
        summary.skipped.extend(str(r) for r, d in zip(rows["run_id"], rows["plan_digest"])
                               if d == digest)
        if not stale:
            ready.add(p)
            continue
        expected[p] = len(stale)
        for k in range(0, len(stale), REMEASURE_CHUNK):
            items = tuple(RunItem(run_id=r, point=p, run_file="",
                                  results_file=str(view.results_file(r)))
                          for r in stale[k:k + REMEASURE_CHUNK])
            chunks.append(Chunk("remeasure", setup, items))
    stale_n = sum(expected.values())
    summary.total = stale_n + len(summary.skipped)
    total = stale_n + len(points)
    keeper = _Keeper(view, summary, progress, total, expected=expected)
    keeper.begin(f"{stale_n} runs to measure again")
    runner = runners.choose(stale_n, POOL_MIN_REMEASURE)
    summary.workers, summary.where = runner.workers, runner.where
    try:
        status = runner.run(chunks, keeper, stop)
    finally:
        keeper.flush()
    summary.remeasured += len(summary.done)
    summary.left = stale_n - len(summary.done) - len(summary.failed)
    for p in sorted(set(expected) - keeper.complete - keeper.bad_points):
        summary.notes.append(f"{p}: re-measurement stopped before all of its runs were "
                             "back; its values and states stay as they were (run again "
                             "to finish)")
    for p in sorted(keeper.bad_points):
        summary.notes.append(f"{p}: alarms not evaluated, a run's results could not be "
                             "re-measured (see failed); its states stay as they were")
    return status, ready | (keeper.complete - keeper.bad_points), total


def _evaluate(view: ArchiveView, runners: Runners, points: list[str], progress: Progress,
              stop, summary: BatchSummary, before: dict) -> None:
    status, ready, total = _remeasure(view, runners, points, progress, stop, summary)
    summary.cancelled = status == "cancelled"
    if status and not summary.cancelled:
        summary.notes.append(f"{status}; run the same batch again to continue")
    _evaluate_states(view, [p for p in points if p in ready], summary, progress,
                     total - len(points), total)
    _finish_states(view, summary, points, before)


# -- public ---------------------------------------------------------------------------------
def reprocess(archive_path, *, what: str = "analyse", run_ids=None, points=None,
              settings: dict | None = None, workers: int | None = None,
              scheduler: str | None = None, resume: bool = True, progress: Progress = None,
              cancel=None) -> BatchSummary:
    """Analyse again, or re-evaluate the alarms of, the runs of an archive.

    Parameters
    ----------
    archive_path : path-like
        The archive folder; it is opened as the writer for the whole batch.
    what : {"analyse", "evaluate"}, keyword-only
        ``analyse``: compute each run's results again from its samples (spectra,
        values, peaks, findings, band values) and evaluate the alarms of the points
        concerned.  ``evaluate``: evaluate the alarms from the stored results only,
        measuring band values again from the stored spectra where they were measured
        for another plan.
    run_ids : list of str, optional, keyword-only
        The runs (ids or unique prefixes); default every run (of ``points``).
        ``evaluate`` evaluates the whole history of the points of these runs.
    points : list of str, optional, keyword-only
        ``"Site/Machine/Point"`` paths; default every point.
    settings : dict, optional, keyword-only
        Analysis settings for this batch instead of the points' own (``fmax_hz`` in
        Hz, ``lines``, ``window``, ``averages``, ``overlap`` as a fraction);
        ``analyse`` only.  They are not stored as the points' settings.
    workers : int, optional, keyword-only
        Worker processes of the local pool (default ``os.cpu_count()``); 1 does the
        work in this process.
    scheduler : str, optional, keyword-only
        Address of a Dask distributed scheduler (e.g. ``tcp://10.0.0.5:8786``): the
        runs are analysed by that cluster's workers, which must see the archive under
        the same path.  Needs the ``cluster`` extra.
    resume : bool, keyword-only
        Continue a stopped batch of the same parameters and leave current results as
        they are (default); False analyses every run again.
    progress : callable(done, total, text), optional, keyword-only
        Called after each run and each point evaluated; ``total`` counts the runs and
        the points to evaluate.
    cancel : callable() -> bool or threading.Event, optional, keyword-only
        Checked while the work is handed out; see the module notes.

    Returns
    -------
    BatchSummary

    Raises
    ------
    InputError
        Unknown ``what``, point, run or setting, bad ``workers``, a scheduler that
        cannot be reached; nothing is changed.
    ArchiveError
        The archive cannot be opened as the writer (another writer holds the lock).
    """
    if what not in WHATS:
        raise InputError(f"what must be one of {', '.join(WHATS)}, got {what!r}")
    settings = check_settings(settings)
    if settings and what != "analyse":
        raise InputError("settings apply to what='analyse' only; 'evaluate' uses the "
                         "stored results as they are")
    workers = check_workers(workers)
    stop = stopper(cancel)
    t0 = time.monotonic()
    summary = BatchSummary(what=what)
    path = Path(archive_path).absolute()
    runners = Runners(workers, scheduler)
    try:
        arc = open_writer(path, f"shaftwatch reprocess --what {what}", summary.notes)
        with arc:
            view = ArchiveView(arc)
            pts = selected_points(arc, points)
            before = {p: s["state"] for p, s in view.point_states().items()}
            if what == "analyse":
                rows = selected_runs(arc, run_ids, pts)
                summary.total = len(rows)
                status, journal = _analyse(view, runners, rows, settings, resume,
                                           progress, stop, summary, pts)
                summary.cancelled = status == "cancelled"
                if status and not summary.cancelled:
                    summary.notes.append(f"{status}; run the same batch again to continue")
                names = sorted({r.point for r in rows})
                _evaluate_states(view, names, summary, progress, len(rows),
                                 len(rows) + len(names))
                _finish_states(view, summary, names, before)
                arc.flush()
                if not status:
                    journal.remove()
            else:
                if run_ids is not None:
                    rows = selected_runs(arc, run_ids, pts)
                    pts = sorted({r.point for r in rows})
                _evaluate(view, runners, pts if pts is not None else
                          [p.path for p in arc.points()], progress, stop, summary, before)
    finally:
        runners.close()
    summary.seconds = time.monotonic() - t0
    return summary


def apply_plan(archive_path, points, plan, *, progress: Progress = None, cancel=None,
               workers: int | None = None, scheduler: str | None = None) -> BatchSummary:
    """Store an alarm plan for points and re-evaluate their whole history.

    Parameters
    ----------
    archive_path : path-like
    points : str or list of str
        ``"Site/Machine/Point"`` paths (every point using the plan).
    plan : engine.alarms.plan.AlarmPlan or None
        The plan (validated against each point's Fmax before anything is stored);
        None removes the points' own plans, so that their machine's ISO 20816 default
        (if any) is in force again.
    progress, cancel, workers, scheduler : keyword-only
        As in :func:`reprocess`.  A cancelled re-evaluation keeps the plan stored and
        the points wholly re-measured so far (evaluated); calling again finishes the
        others.

    Returns
    -------
    BatchSummary
        ``what="plan"``; ``changed`` maps each point whose state changed to (state
        before, state now), ``states`` gives the points' states now.

    Raises
    ------
    InputError
        No points, an unknown point, or a plan that does not fit a point (nothing is
        stored then).
    """
    from .alarms.plan import AlarmPlan

    if plan is not None and not isinstance(plan, AlarmPlan):
        raise InputError(f"plan must be an AlarmPlan (or None to remove the points' "
                         f"plans), got {type(plan).__name__}")
    workers = check_workers(workers)
    stop = stopper(cancel)
    t0 = time.monotonic()
    summary = BatchSummary(what="plan")
    path = Path(archive_path).absolute()
    runners = Runners(workers, scheduler)
    try:
        arc = open_writer(path, "shaftwatch apply plan", summary.notes)
        with arc:
            view = ArchiveView(arc)
            pts = selected_points(arc, points)
            if pts is None:
                raise InputError("points: give the points the plan is for")
            before = {p: s["state"] for p, s in view.point_states().items()}
            if plan is None:
                for p in pts:
                    view.clear_plan(p)
            else:
                view.set_plans(dict.fromkeys(pts, plan))
            _evaluate(view, runners, pts, progress, stop, summary, before)
    finally:
        runners.close()
    summary.seconds = time.monotonic() - t0
    return summary
