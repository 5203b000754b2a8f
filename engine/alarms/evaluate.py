"""Alarm states of runs against a plan, one run at a time or a whole history at once.

Each band's value is compared with its levels: at or above danger is ``danger``, at
or above alert (and below danger) is ``alert``, below alert is ``ok``, and a value that
is NaN (not measured) is ``no data``.  A run whose data quality is ``"error"`` (a dead
channel, NaN samples, a record too short: :mod:`engine.io.quality`) is ``bad data``
in every band, whatever its values.  The run's state is its worst band's state, in the
order of :data:`SEVERITY`; ``excess`` is how far a value is past the level it crossed,
``value / level − 1`` (0.2 = 20 % above).

:func:`evaluate_history` gives the same states as :func:`evaluate_run` row by row, with
array operations, so that a changed plan re-evaluates thousands of runs at once;
:func:`state_changes` turns a history of states into the event log.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass

import numpy as np

from ..errors import InputError
from .plan import AlarmPlan, Band

STATES = ("ok", "alert", "danger")
NO_DATA = "no data"
BAD_DATA = "bad data"
#: Order of severity of every state ("" = not evaluated yet).
SEVERITY = {"": -1, "no data": 0, "ok": 1, "bad data": 2, "alert": 3, "danger": 4}
#: State names indexed by severity 0 … 4.
_BY_SEVERITY = np.array(["no data", "ok", "bad data", "alert", "danger"])


def worst(states: Sequence[str]) -> str:
    """The most severe of some states ("" when there are none)."""
    out = ""
    for s in states:
        if SEVERITY[s] > SEVERITY[out]:
            out = s
    return out


@dataclass(frozen=True)
class BandState:
    """State of one band in one run.

    Attributes
    ----------
    band : str
    value : float
        In the band's unit and scale (NaN when not measured).
    state : str
    level : float or None
        The level crossed (alert or danger), None when none was.
    excess : float or None
        ``value / level − 1`` when a level was crossed.
    """

    band: str
    value: float
    state: str
    level: float | None
    excess: float | None

    def as_dict(self) -> dict:
        d = asdict(self)
        d["value"] = None if not math.isfinite(self.value) else float(self.value)
        return d


@dataclass(frozen=True)
class RunState:
    """State of one run: the worst band's, and every band's."""

    state: str
    bands: tuple[BandState, ...]

    def as_dict(self) -> dict:
        """JSON-ready dict (NaN values as None)."""
        return {"state": self.state, "bands": [b.as_dict() for b in self.bands]}

    def band(self, name: str) -> BandState:
        for b in self.bands:
            if b.band == name:
                return b
        raise InputError(f"the run state has no band {name!r}")


def _text(value) -> str:
    """A state or quality as text (HDF5 string columns may come back as bytes)."""
    return value.decode("utf-8") if isinstance(value, bytes) else str(value)


def _texts(values) -> np.ndarray:
    return np.array([_text(v) for v in np.asarray(values, dtype=object).ravel()], dtype=str)


def _value(values: Mapping[str, float], name: str) -> float:
    v = values.get(name, math.nan)
    try:
        v = float(v)
    except (TypeError, ValueError):
        raise InputError(f"alarm values: band {name!r}: value must be a number, "
                         f"got {v!r}") from None
    return v


def _band_state(b: Band, v: float, bad: bool) -> BandState:
    if bad:
        return BandState(b.name, v, BAD_DATA, None, None)
    if not math.isfinite(v):
        return BandState(b.name, v, NO_DATA, None, None)
    if v >= b.danger:
        return BandState(b.name, v, "danger", float(b.danger), v / b.danger - 1.0)
    if v >= b.alert:
        return BandState(b.name, v, "alert", float(b.alert), v / b.alert - 1.0)
    return BandState(b.name, v, "ok", None, None)


def evaluate_run(plan: AlarmPlan, values: Mapping[str, float], *,
                 quality: str = "ok") -> RunState:
    """State of one run against a plan.

    Parameters
    ----------
    plan : AlarmPlan
    values : mapping of str to float
        Band name → value in the band's unit and scale; a band left out is NaN.
    quality : str, keyword-only
        The run's data-quality state; ``"error"`` makes every band ``bad data``.

    Returns
    -------
    RunState
        Overall state = the worst band's (:data:`SEVERITY`).
    """
    plan.validate(source=f"alarm plan {plan.name!r}")
    bad = _text(quality) == "error"
    bands = tuple(_band_state(b, _value(values, b.name), bad) for b in plan.bands)
    return RunState(state=worst([b.state for b in bands]), bands=bands)


def evaluate_history(plan: AlarmPlan, values: Mapping[str, np.ndarray],
                     quality: np.ndarray | None) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """States of many runs at once, equal row by row to :func:`evaluate_run`.

    Parameters
    ----------
    plan : AlarmPlan
    values : mapping of str to ndarray, each shape (n,)
        Band name → values of the n runs; a band left out is NaN in every run.
    quality : ndarray of str, shape (n,), or None
        Data-quality state of each run (None: all ``"ok"``).

    Returns
    -------
    (overall, bands)
        ``overall``: ndarray of str, shape (n,); ``bands``: band name → ndarray of str,
        shape (n,).
    """
    plan.validate(source=f"alarm plan {plan.name!r}")
    arrays = {k: np.asarray(v, dtype=float) for k, v in values.items()}
    sizes = {a.shape for a in arrays.values()}
    if quality is not None:
        q = _texts(quality)
        sizes.add(np.shape(quality))
    if len(sizes) > 1 or any(len(s) != 1 for s in sizes):
        raise InputError(f"alarm history: values and quality must be 1-D arrays of one "
                         f"length, got shapes {sorted(sizes)}")
    n = next(iter(sizes))[0] if sizes else 0
    bad = np.zeros(n, bool) if quality is None else (q == "error")
    severities = []
    states: dict[str, np.ndarray] = {}
    for b in plan.bands:
        v = arrays.get(b.name, np.full(n, np.nan))
        with np.errstate(invalid="ignore"):
            sev = np.where(v >= b.danger, 4, np.where(v >= b.alert, 3, 1))
        sev = np.where(np.isfinite(v), sev, 0)
        sev = np.where(bad, 2, sev)
        severities.append(sev)
        states[b.name] = _BY_SEVERITY[sev]
    overall = _BY_SEVERITY[np.max(np.vstack(severities), axis=0)] if n else _BY_SEVERITY[:0]
    return overall, states


@dataclass
class Event:
    """One change of a point's alarm state.

    Attributes
    ----------
    point : str
    run_id : str
        The run whose state differs from the one before it.
    time_s : float
        When the run was taken, s since 1970-01-01 UTC.
    band : str
        The band that set the new state ("" for no data / bad data of the whole run).
    previous, state : str
        States before and after.
    value : float
        That band's value in its unit and scale (NaN when none).
    level : float or None
        The level it crossed (alert or danger), None otherwise.
    acknowledged_at : float
        When someone acknowledged the event, s since the epoch; NaN when not yet.
    acknowledged_by, note : str
    """

    point: str
    run_id: str
    time_s: float
    band: str
    previous: str
    state: str
    value: float
    level: float | None
    acknowledged_at: float = math.nan
    acknowledged_by: str = ""
    note: str = ""

    @property
    def acknowledged(self) -> bool:
        return math.isfinite(self.acknowledged_at)

    def acknowledge(self, by: str, at_s: float, note: str = "") -> None:
        """Mark the event acknowledged by a person at a time (s since the epoch)."""
        if not str(by).strip():
            raise InputError("acknowledged_by must name the person acknowledging")
        self.acknowledged_at, self.acknowledged_by = float(at_s), str(by)
        if note:
            self.note = str(note)

    def as_dict(self) -> dict:
        """JSON-ready dict (NaN as None)."""
        d = asdict(self)
        for key in ("value", "acknowledged_at", "time_s"):
            if not math.isfinite(d[key]):
                d[key] = None
        return d

    @classmethod
    def from_dict(cls, d: Mapping) -> Event:
        kw = dict(d)
        for key in ("value", "acknowledged_at", "time_s"):
            if kw.get(key) is None:
                kw[key] = math.nan
        try:
            return cls(**kw)
        except TypeError as e:
            raise InputError(f"alarm event: {e}") from None


def state_changes(point: str, run_ids: Sequence[str], times_s: Sequence[float],
                  overall_states: Sequence[str], band_states: Mapping[str, Sequence[str]],
                  band_values: Mapping[str, Sequence[float]], plan: AlarmPlan, *,
                  previous: str = "") -> list[Event]:
    """The events of a history: one per change of the overall state.

    Parameters
    ----------
    point : str
    run_ids, times_s, overall_states : sequences of length n
        Run ids, times (s since the epoch) and overall states (any order: the runs
        are taken in time order, ties in the order given).
    band_states, band_values : mapping of band name to a sequence of length n
        From :func:`evaluate_history` and the measured values.
    plan : AlarmPlan
    previous : str, keyword-only
        State before the first run ("" = none, so the first run gives an event).

    Returns
    -------
    list of Event
        In time order.  The band of an alert/danger event is the first band of the plan
        in that state; of an ok event the band of the alarm just cleared when it is ok
        now, else the first ok band; no data and bad data name no band.
    """
    if previous not in SEVERITY:
        raise InputError(f"previous state {previous!r} is not known; expected one of "
                         + ", ".join(repr(s) for s in SEVERITY))
    times = np.asarray(times_s, dtype=float)
    n = times.size
    ids = list(run_ids)
    overall = [_text(s) for s in overall_states]
    if len(ids) != n or len(overall) != n:
        raise InputError(f"alarm events: {len(ids)} run ids, {n} times and {len(overall)} "
                         "states; they must have one length")
    names = plan.band_names
    bs, bv = {}, {}
    for name in names:
        if name not in band_states or name not in band_values:
            raise InputError(f"alarm events: band {name!r} of plan {plan.name!r} has no "
                             "states or values")
        bs[name] = [_text(s) for s in band_states[name]]
        bv[name] = np.asarray(band_values[name], dtype=float)
        if len(bs[name]) != n or bv[name].size != n:
            raise InputError(f"alarm events: band {name!r} has not {n} states and values")
    for s in overall:
        if s not in SEVERITY or s == "":
            raise InputError(f"alarm events: state {s!r} is not known")
    events: list[Event] = []
    last, last_band = previous, ""
    for i in np.argsort(times, kind="stable"):
        state = overall[i]
        if state == last:
            continue
        band = ""
        if state in ("alert", "danger", "ok"):
            if state == "ok" and last_band and bs[last_band][i] == "ok":
                band = last_band
            else:
                band = next((nm for nm in names if bs[nm][i] == state), "")
        value = float(bv[band][i]) if band else math.nan
        level = None
        if band and state in ("alert", "danger"):
            level = float(getattr(plan.band(band), state))
        events.append(Event(point=point, run_id=str(ids[i]), time_s=float(times[i]), band=band,
                            previous=last, state=state, value=value, level=level))
        last, last_band = state, band
    return events
