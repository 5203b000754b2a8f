"""What a worker of the batch engine does: analyse or re-measure a chunk of runs.

The parent (:mod:`engine.batch`) holds the archive's writer lock and resolves
everything a run needs — its run file, its results file, the point's setup, the
catalogue's time, speed and data quality, the axial companion values — into a
:class:`Chunk`.  A worker only reads that run file (read-only, never the lock, the
catalogue or the value table), analyses it with :func:`engine.analysis.analyse_recording`
exactly as :func:`engine.pipeline.analyse_run` does, writes the run's results file
atomically (:func:`engine.archive.derived.write_results_file`) and returns the results
without their spectra, so that what travels back to the parent is small.  The parent
then keeps the rows in the value table (``store_results(rows, written=True)``).

The same function runs in the parent itself (one worker), in a process pool and on a
Dask cluster, so that every way gives the same results.  Nothing here keeps state
between calls.

A *stamp* (:func:`setup_stamp`, :func:`run_stamp`) is a digest of everything a run's
analysis depends on apart from its samples and the alarm plan: the engine version, the
point's properties, the machine model, shaft, speed ratio, ISO zone limits, the
spectrum settings in effect, and the axial companion values.  It is stored in the
results' ``settings["batch"]["stamp"]``; results with the run's stamp and the digest of
the plan in force are current and are not computed again.  (The plan is left out of
the stamp because a plan change only re-measures band values from the stored spectra,
which updates the results' plan digest.)
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import asdict, dataclass, replace
from pathlib import Path

from . import __version__
from .analysis import PointSetup, analyse_recording
from .errors import EngineError
from .results import RunResults

#: Kinds of chunk a worker understands.
KINDS = ("analyse", "remeasure")


@dataclass(frozen=True)
class RunItem:
    """One run of a chunk.

    Attributes
    ----------
    run_id, point : str
    run_file : str
        Absolute path of the run file (read only for ``analyse``).
    results_file : str
        Absolute path of the run's results file.
    taken_s, rpm : float
        From the catalogue: time taken (s since 1970 UTC), reference speed (rev/min).
    quality : str
        The run's data-quality state from the catalogue.
    axial_companion : dict or None
        1× and 2× (mm/s RMS) at the machine's axial point near the run's time.
    stamp : str
        The stamp the results must carry to count as current (``""``: never current).
    """

    run_id: str
    point: str
    run_file: str
    results_file: str
    taken_s: float = math.nan
    rpm: float = math.nan
    quality: str = "ok"
    axial_companion: dict | None = None
    stamp: str = ""


@dataclass(frozen=True)
class Chunk:
    """Runs of one point, with the point's setup (pickled once for all of them)."""

    kind: str
    setup: PointSetup
    items: tuple[RunItem, ...]
    check_current: bool = True


@dataclass
class Outcome:
    """What became of one run: ``done``, ``current`` (left as it was) or ``failed``.

    ``results`` (without spectra) for ``done`` and ``current``; ``path`` and ``reason``
    for ``failed``.
    """

    run_id: str
    point: str
    status: str
    results: RunResults | None = None
    path: str = ""
    reason: str = ""


def _digest(obj) -> str:
    text = json.dumps(obj, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]


def setup_stamp(setup: PointSetup) -> str:
    """Digest of what a point's analysis depends on, the alarm plan left out."""
    model = setup.model
    return _digest({"engine": __version__, "point": setup.path, "props": setup.props,
                    "model": None if model is None else model.as_dict(),
                    "shaft": setup.shaft, "ratio": float(setup.ratio),
                    "zones": setup.zone_limits_mm_s,
                    "spectrum": asdict(setup.spectrum_settings())})


def run_stamp(point_stamp: str, axial_companion: dict | None) -> str:
    """The stamp of one run: its point's stamp and its axial companion values."""
    return _digest({"point": point_stamp, "companion": axial_companion})


def stamp_of(results: RunResults) -> str:
    """The stamp stored in a run's results (``""`` when it has none)."""
    batch = results.settings.get("batch") if isinstance(results.settings, dict) else None
    return str(batch.get("stamp", "")) if isinstance(batch, dict) else ""


def light(results: RunResults) -> RunResults:
    """The results without their spectra (what goes back to the parent)."""
    return replace(results, spectrum=None, envelope=None)


def _reason(exc: BaseException) -> str:
    if isinstance(exc, EngineError):
        return str(exc)
    if isinstance(exc, OSError):
        return f"{exc.filename or ''}: {exc.strerror or exc}".lstrip(": ")
    # Anything else is a fault of the analysis on this run; the batch goes on and
    # reports it with its type rather than stopping thousands of runs for one.
    return f"{type(exc).__name__}: {exc}"


def _failed(item: RunItem, path: str, exc: BaseException) -> Outcome:
    reason = _reason(exc)
    if path not in reason:
        reason = f"{path}: {reason}"
    return Outcome(item.run_id, item.point, "failed", path=path, reason=reason)


def _current(setup: PointSetup, item: RunItem) -> RunResults | None:
    """The stored results when they are current for ``item``, else None."""
    from .archive.derived import read_results_file

    path = Path(item.results_file)
    if not item.stamp or not path.exists():
        return None
    try:
        r = read_results_file(path)
    except EngineError:
        return None              # damaged: computed again and replaced
    digest = "" if setup.plan is None else setup.plan.digest()
    if stamp_of(r) == item.stamp and r.plan_digest == digest and r.run_id == item.run_id:
        return r
    return None


def analyse_item(setup: PointSetup, item: RunItem, *, check_current: bool = True) -> Outcome:
    """Analyse one run from its run file and write its results file."""
    from .archive.derived import write_results_file
    from .archive.runfile import read_run_file

    if check_current:
        r = _current(setup, item)
        if r is not None:
            return Outcome(item.run_id, item.point, "current", light(r))
    try:
        rec, _ = read_run_file(Path(item.run_file))
    except (EngineError, OSError) as exc:
        return _failed(item, item.run_file, exc)
    try:
        r = analyse_recording(rec, setup, run_id=item.run_id, taken_s=item.taken_s,
                              rpm=item.rpm, quality=item.quality,
                              axial_companion=item.axial_companion)
    except Exception as exc:     # noqa: BLE001 - reported per run, see _reason
        return _failed(item, item.run_file, exc)
    r = replace(r, settings={**r.settings, "batch": {"stamp": item.stamp}})
    try:
        write_results_file(Path(item.results_file), r)
    except (EngineError, OSError) as exc:
        return _failed(item, item.results_file, exc)
    return Outcome(item.run_id, item.point, "done", light(r))


def remeasure_item(setup: PointSetup, item: RunItem) -> Outcome:
    """Measure the band values of ``setup.plan`` again from the run's stored spectra
    (:func:`engine.pipeline.remeasure`) and write its results file."""
    from .archive.derived import read_results_file, write_results_file
    from .pipeline import remeasure

    path = Path(item.results_file)
    try:
        r = read_results_file(path)
        # remeasure reads nothing from the archive: everything is in the results.
        fresh = remeasure(None, r, setup)
        write_results_file(path, fresh)
    except Exception as exc:     # noqa: BLE001 - reported per run, see _reason
        return _failed(item, item.results_file, exc)
    return Outcome(item.run_id, item.point, "done", light(fresh))


def run_chunk(chunk: Chunk) -> list[Outcome]:
    """Do every run of a chunk (what a worker is handed); one outcome per run."""
    if chunk.kind == "analyse":
        return [analyse_item(chunk.setup, it, check_current=chunk.check_current)
                for it in chunk.items]
    if chunk.kind == "remeasure":
        return [remeasure_item(chunk.setup, it) for it in chunk.items]
    raise ValueError(f"unknown chunk kind {chunk.kind!r}; expected one of {KINDS}")


def ignore_interrupt() -> None:
    """Process-pool initializer: Ctrl-C goes to the whole terminal's process group;
    only the parent acts on it (it stops handing out work), so that the runs in
    flight finish and their results are kept."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
