"""What a batch is given and what it gives back: the checks of the caller's input, the
selection of runs and points, and :class:`BatchSummary` (see :mod:`engine.batch`)."""

from __future__ import annotations

import math
import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path

from .archive import open_archive
from .errors import EngineWarning, InputError

WHATS = ("analyse", "evaluate")
#: Analysis settings a batch may override (units as in the point properties).
SETTING_KEYS = ("fmax_hz", "lines", "window", "averages", "overlap")


@dataclass
class BatchSummary:
    """What a batch did.

    Attributes
    ----------
    what : str
        ``analyse``, ``evaluate`` or ``plan`` (:func:`engine.batch.apply_plan`).
    total : int
        Runs the batch covered (``evaluate``: the analysed runs of its points).
    done : list of str
        Run ids analysed (or re-measured) by this call.
    skipped : list of str
        Run ids left as they were: done by the stopped batch this one continues, or
        already current.
    failed : list of dict
        ``{"run_id", "point", "path", "reason"}`` of every run (or point, with
        ``run_id`` ``""``) that could not be done.
    cancelled : bool
        A cancel request stopped the batch before every run was handed out.
    left : int
        Runs neither done, skipped nor failed: not reached before a stop, or re-measured
        but not kept (their point was not complete).
    seconds : float
        Wall time, s.
    workers : int
        Worker processes (or cluster threads) that shared the work; 1 when the
        calling process did it alone.
    where : str
        Where the work ran.
    states : dict
        Point -> alarm state of its latest run after the batch (points evaluated).
    changed : dict
        Point -> (state before, state now), for the points whose state changed.
    events : int
        Events in the logs of the points evaluated.
    remeasured : int
        Runs whose band values were measured again from their stored spectra.
    notes : list of str
        What the batch found on its way (a journal continued, the archive's notices).
    """

    what: str
    total: int = 0
    done: list[str] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)
    failed: list[dict] = field(default_factory=list)
    cancelled: bool = False
    left: int = 0
    seconds: float = 0.0
    workers: int = 1
    where: str = "this process"
    states: dict[str, str] = field(default_factory=dict)
    changed: dict[str, tuple[str, str]] = field(default_factory=dict)
    events: int = 0
    remeasured: int = 0
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict:
        """JSON-able summary (counts of the runs done and skipped, not their ids)."""
        return {"what": self.what, "total": self.total, "done": len(self.done),
                "skipped": len(self.skipped), "failed": self.failed,
                "cancelled": self.cancelled, "left": self.left,
                "seconds": round(self.seconds, 3), "workers": self.workers,
                "where": self.where, "states": self.states,
                "changed": {k: {"before": a, "now": b} for k, (a, b) in self.changed.items()},
                "events": self.events, "remeasured": self.remeasured, "notes": self.notes}


# -- checks -------------------------------------------------------------------------------
def check_settings(settings: dict | None) -> dict:
    """The analysis settings to override, checked (InputError naming the field)."""
    from .spectrum import SpectrumSettings

    if not settings:
        return {}
    if not isinstance(settings, dict):
        raise InputError(f"settings must be a dict of {', '.join(SETTING_KEYS)}")
    unknown = sorted(set(settings) - set(SETTING_KEYS))
    if unknown:
        raise InputError(f"settings: unknown {', '.join(unknown)}; expected some of "
                         f"{', '.join(SETTING_KEYS)}")
    out = {k: v for k, v in settings.items() if v is not None}
    try:
        if "fmax_hz" in out:
            out["fmax_hz"] = float(out["fmax_hz"])
            if not (math.isfinite(out["fmax_hz"]) and out["fmax_hz"] > 0):
                raise InputError(f"settings: fmax_hz must be a positive number of Hz, got "
                                 f"{settings['fmax_hz']}")
        for k in ("lines", "averages"):
            if k in out:
                least = 1 if k == "lines" else 0
                if float(out[k]) != int(out[k]) or int(out[k]) < least:
                    raise InputError(f"settings: {k} must be a whole number of at least "
                                     f"{least}, got {out[k]}")
                out[k] = int(out[k])
        if "overlap" in out:
            out["overlap"] = float(out["overlap"])
        if "window" in out:
            out["window"] = str(out["window"])
    except (TypeError, ValueError) as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"settings: {exc}") from None
    checked = SpectrumSettings(lines=out.get("lines", 1600), window=out.get("window", "hann"),
                               overlap=out.get("overlap", 0.5),
                               averages=out.get("averages") or None
                               ).validated(source="settings")
    if "window" in out:
        out["window"] = checked.window
    return out


def check_workers(workers) -> int:
    if workers is None:
        return max(1, os.cpu_count() or 1)
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise InputError(f"workers must be a whole number of at least 1, got {workers!r}")
    return workers


def stopper(cancel):
    if cancel is None:
        return lambda: False
    if hasattr(cancel, "is_set"):
        return cancel.is_set
    if callable(cancel):
        return lambda: bool(cancel())
    raise InputError("cancel must be a callable returning True to stop, or a threading.Event")


def open_writer(path: Path, command: str, notes: list[str]):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EngineWarning)
        arc = open_archive(path, mode="w", command=command)
    notes.extend(arc.notices)
    return arc


def selected_points(arc, points) -> list[str] | None:
    if points is None:
        return None
    if isinstance(points, str):
        points = [points]
    out = [arc.point(p).path for p in points]
    if not out:
        raise InputError("points: give at least one point, or none for every point")
    return list(dict.fromkeys(out))


def selected_runs(arc, run_ids, points: list[str] | None) -> list:
    """Catalogue rows of the runs asked for (every run when neither is given)."""
    if run_ids is not None:
        if isinstance(run_ids, str):
            run_ids = [run_ids]
        ids = list(dict.fromkeys(arc.resolve_run(r) for r in run_ids))
        rows = [arc._catalogue.get(r) for r in ids]
        return [r for r in rows if points is None or r.point in points]
    if points is None:
        return arc.runs()
    return [r for p in points for r in arc.runs(p)]
