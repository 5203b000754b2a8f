"""Trends of a point's values over time, with their alarm levels and forecast.

This is the forecast layer over the archive: it reads the value table, the plan in
force and the stored spectra, and never writes.

* :func:`trend` — one value of one point against time (s since 1970 UTC), the states
  and ISO 20816 zones of its runs, the alert and danger lines of the plan in force, and
  the forecast of when they will be reached (:func:`engine.forecast.forecast`);
* :func:`engine.trend_spectra.spectra_by_date` (waterfall) and
  :func:`engine.trend_spectra.compare` (current spectrum against a reference), also
  importable from here.

Fit window (``recent=None``)
----------------------------
The forecast's fit assumes one regime: healthy weeks before a fault began flatten the
fitted slope and make the forecast late.  So the window is chosen from the data:

1. the *baseline band* of the value is mean ± 3σ (sample σ, ``ddof=1``) of the point's
   first :data:`BASELINE_RUNS` runs with a value (the same first runs a statistical
   baseline learns from, :data:`engine.alarms.baseline.MIN_BASELINE_RUNS`);
2. the fit uses the runs *after* the last run whose value lies inside that band — the
   runs of the present regime — but never fewer than
   :data:`engine.forecast.MIN_POINTS` (the window then reaches back to that many);
3. when the latest run itself lies inside the band, the value is in its baseline regime
   and the fit uses the forecast's default window, the
   :data:`engine.forecast.RECENT_POINTS` latest runs.

(Five values always lie within their own mean ± 1.79σ — Samuelson's inequality,
(n − 1)/√n — so the baseline runs are inside their band and step 2 is always defined.)
The rule and its numbers are said at the start of the forecast's ``reason``.  Give
``recent`` to fit the latest ``recent`` runs instead.

Alarm levels
------------
``band:<name>`` takes the levels, unit and scale of that band of the plan in force.  A
standard value that a band of the plan measures takes that band's levels:
``overall_velocity_mm_s`` ↔ a band of measure ``overall`` without edges in mm/s RMS (the
ISO broadband value, e.g. the ISO default's "overall velocity" band), ``crest_factor``
and ``kurtosis`` ↔ the bands of those measures.  Other standard values have no levels
(the band values are measured differently from them, e.g. a band RMS against the 1×
amplitude read around its peak).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from .alarms.baseline import MIN_BASELINE_RUNS
from .errors import InputError
from .forecast import MIN_POINTS, RECENT_POINTS, Forecast, iso_date
from .forecast import forecast as _forecast
from .results import BAND_PREFIX, STANDARD_VALUES, VALUE_UNITS
from .trend_spectra import Comparison, Waterfall, compare, spectra_by_date

__all__ = ["BASELINE_RUNS", "BASELINE_SIGMAS", "CSV_COLUMNS", "Comparison", "FitWindow",
           "TrendData", "Waterfall", "band_unit", "compare", "fit_window", "read_trend_csv",
           "spectra_by_date", "trend", "value_levels"]

#: Runs whose values form a value's baseline band (the first runs of the point).
BASELINE_RUNS = MIN_BASELINE_RUNS
#: Half-width of the baseline band in sample standard deviations.
BASELINE_SIGMAS = 3.0
#: Columns of a trend CSV file, after its ``#`` header lines.
CSV_COLUMNS = ("time", "value", "state", "zone", "run_id")
#: Label of each amplitude scale in a unit (as engine.results.VALUE_UNITS writes them).
SCALE_LABELS = {"rms": "RMS", "peak": "0-peak", "pp": "peak-peak", "": ""}
#: Standard values that a band measure gives exactly (see the module notes).
_MEASURED_AS = {"crest_factor": "crest_factor", "kurtosis": "kurtosis"}


def band_unit(band) -> str:
    """Unit text of a band's values, e.g. ``"mm/s RMS"``, ``"g 0-peak"``, ``"1"``."""
    if band.unit == "1":
        return "1"
    return f"{band.unit} {SCALE_LABELS.get(band.scale, band.scale)}".strip()


def _is_iso_overall(band) -> bool:
    return (band.measure == "overall" and band.low is None and band.high is None
            and band.unit == "mm/s" and band.scale == "rms")


def value_levels(plan, value: str) -> tuple[str, float | None, float | None, str]:
    """Unit, alert, danger and the band they come from, for a value of a point.

    Parameters
    ----------
    plan : AlarmPlan or None
        The plan in force.
    value : str
        A standard value (:data:`engine.results.STANDARD_VALUES`) or ``band:<name>``.

    Returns
    -------
    (unit, alert, danger, band_name)
        Levels in the value's unit (None when the plan has none for it); ``band_name``
        is ``""`` when no band gives the levels.

    Raises
    ------
    InputError
        An unknown value name, or a band the plan in force does not have.
    """
    if value.startswith(BAND_PREFIX):
        name = value[len(BAND_PREFIX):]
        if plan is None:
            raise InputError(f"value {value!r}: the point has no alarm plan, so no band "
                             f"{name!r}")
        band = plan.band(name)
        return band_unit(band), float(band.alert), float(band.danger), band.name
    if value not in STANDARD_VALUES:
        raise InputError(f"value {value!r} is not known; expected one of "
                         + ", ".join(STANDARD_VALUES) + " or band:<band name>")
    unit = VALUE_UNITS[value]
    for b in plan.bands if plan is not None else ():
        if (value == "overall_velocity_mm_s" and _is_iso_overall(b)) \
                or _MEASURED_AS.get(value) == b.measure:
            return unit, float(b.alert), float(b.danger), b.name
    return unit, None, None, ""


@dataclass
class FitWindow:
    """The runs a forecast is fitted to, and why.

    Attributes
    ----------
    start, count : int
        First index and number of runs, counted among the runs with a value.
    rule : str
        ``"since baseline"``, ``"in baseline"``, ``"too few"`` or ``"latest"``.
    text : str
        A sentence saying which runs and why (put first in the forecast's reason).
    baseline_low, baseline_high : float
        The baseline band (value unit); NaN when not computed.
    """

    start: int
    count: int
    rule: str
    text: str
    baseline_low: float = math.nan
    baseline_high: float = math.nan


def fit_window(times_s: np.ndarray, values: np.ndarray, *, unit: str = "",
               recent: int | None = None) -> FitWindow:
    """The fit window of a value's history (rule: module notes).

    Parameters
    ----------
    times_s, values : ndarray, shape (n,)
        Runs with a value, in time order (s since 1970 UTC; value unit).
    unit : str, keyword-only
        Named in the sentence.
    recent : int, optional, keyword-only
        Fit the latest ``recent`` runs instead (≥ MIN_POINTS).
    """
    n = int(values.size)
    if recent is not None:
        if isinstance(recent, bool) or not isinstance(recent, (int, np.integer)) \
                or recent < MIN_POINTS:
            raise InputError(f"trend: recent must be a whole number ≥ {MIN_POINTS}, "
                             f"got {recent!r}")
        k = min(int(recent), n)
        return FitWindow(n - k, k, "latest", f"Fit window: the latest {k} runs (as asked).")
    if n <= BASELINE_RUNS or n < MIN_POINTS:
        return FitWindow(0, n, "too few", f"Fit window: all {n} runs (no runs after the "
                         f"{BASELINE_RUNS} baseline runs).")
    base = values[:BASELINE_RUNS]
    mean, sd = float(base.mean()), float(base.std(ddof=1))
    # Equal baseline values (σ = 0): "inside" means equal to within rounding.
    half = max(BASELINE_SIGMAS * sd, 1e-9 * abs(mean))
    lo, hi = mean - half, mean + half
    inside = np.flatnonzero(np.abs(values - mean) <= half)
    last_in = int(inside[-1])     # ≥ BASELINE_RUNS − 1, see the module notes
    band = (f"mean ± {BASELINE_SIGMAS:g}σ of the first {BASELINE_RUNS} runs, "
            f"{lo:.4g} to {hi:.4g}{' ' + unit if unit and unit != '1' else ''}")
    if last_in == n - 1:
        k = min(RECENT_POINTS, n)
        return FitWindow(n - k, k, "in baseline",
                         f"Fit window: the latest {k} runs (the latest value lies inside its "
                         f"baseline band, {band}).", lo, hi)
    start = min(last_in + 1, n - MIN_POINTS)
    since = iso_date(float(times_s[start]))[:10]
    extra = ("" if start == last_in + 1 else
             f"; reaching back to {MIN_POINTS} runs, the fewest a forecast uses")
    return FitWindow(start, n - start, "since baseline",
                     f"Fit window: the {n - start} runs from {since}, after the value last "
                     f"sat inside its baseline band ({band}){extra}.", lo, hi)


def _iso(t: float) -> str | None:
    return iso_date(float(t)) or None


def _num(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


@dataclass
class TrendData:
    """One value of one point over time.

    Attributes
    ----------
    point, value : str
        Point path and value name (standard value or ``band:<name>``).
    unit : str
        Unit of the values, e.g. ``"mm/s RMS"``.
    times_s : ndarray, shape (n,)
        When each run was taken, s since 1970-01-01 UTC, ascending.
    values : ndarray, shape (n,)
        The value of each run (NaN when not measurable).
    run_ids, states, zones : list of str, length n
        Run ids; alarm states recorded by the last evaluation (``""`` when none); ISO
        20816 zone of each run's overall velocity (``""`` when the machine has no ISO
        group or the run no value).
    alert, danger : float or None
        Levels of the plan in force, in ``unit``.
    levels_from : str
        The band of the plan the levels come from (``""`` when none).
    forecast : Forecast or None
        None when not asked for.
    window : FitWindow or None
        The runs the forecast used.
    until_s : float or None
        The trend holds only runs taken at or before this time.
    """

    point: str
    value: str
    unit: str
    times_s: np.ndarray
    values: np.ndarray
    run_ids: list[str]
    states: list[str]
    zones: list[str]
    alert: float | None = None
    danger: float | None = None
    levels_from: str = ""
    forecast: Forecast | None = None
    window: FitWindow | None = None
    until_s: float | None = None
    plan_name: str = field(default="")

    def forecast_dict(self) -> dict | None:
        """The forecast as JSON-ready dict, dates ISO-8601 (None when none)."""
        f = self.forecast
        if f is None:
            return None

        def interval(level: str) -> list | None:
            lo, hi = getattr(f, f"{level}_low_s"), getattr(f, f"{level}_high_s")
            if not (math.isfinite(lo) or math.isfinite(hi)):
                return None
            return [_iso(lo), _iso(hi)]

        w = self.window
        first = (float(self.times_s[np.isfinite(self.values)][w.start])
                 if w is not None and w.count else math.nan)
        return {"status": f.status, "model": f.model, "reason": f.reason,
                "alert_date": _iso(f.alert_date_s), "alert_interval": interval("alert"),
                "danger_date": _iso(f.danger_date_s), "danger_interval": interval("danger"),
                "points_used": int(f.points_used), "fit_from": _iso(first),
                "window": w.rule if w is not None else "",
                "slope_per_day": _num(f.slope_per_day), "r2": _num(f.r2),
                "curve": {"time": [_iso(t) for t in f.curve_t_s],
                          "value": [_num(x) for x in f.curve_value],
                          "low": [_num(x) for x in f.curve_low],
                          "high": [_num(x) for x in f.curve_high]}}

    def as_dict(self) -> dict:
        """JSON-ready: ``time`` (ISO-8601 UTC), ``value`` (None for NaN), ``unit``,
        ``alert``, ``danger`` and ``forecast`` (None when not made)."""
        return {"time": [_iso(t) for t in self.times_s],
                "value": [_num(v) for v in self.values], "unit": self.unit,
                "alert": self.alert, "danger": self.danger, "forecast": self.forecast_dict()}

    def to_csv(self, path) -> Path:
        """Write the trend as CSV: ``#`` lines naming the point, value, unit and levels,
        then :data:`CSV_COLUMNS` (time ISO-8601 UTC, value with every digit, state,
        zone, run id; an empty value is NaN).

        Raises
        ------
        InputError
            The file cannot be written (naming it).
        """
        p = Path(path)
        head = [("point", self.point), ("value", self.value), ("unit", self.unit),
                ("alert", "" if self.alert is None else repr(float(self.alert))),
                ("danger", "" if self.danger is None else repr(float(self.danger)))]
        try:
            with open(p, "w", newline="", encoding="utf-8") as fh:
                fh.write("# shaftwatch trend\n")
                for k, v in head:
                    fh.write(f"# {k}: {v}\n")
                w = csv.writer(fh)
                w.writerow(CSV_COLUMNS)
                for t, v, s, z, r in zip(self.times_s, self.values, self.states, self.zones,
                                         self.run_ids):
                    w.writerow([iso_date(float(t)) if float(t).is_integer()
                                else datetime.fromtimestamp(float(t), UTC).isoformat(),
                                repr(float(v)) if math.isfinite(v) else "", s, z, r])
        except OSError as e:
            raise InputError(f"{p}: cannot write the trend CSV ({e.strerror or e})") from None
        return p


def read_trend_csv(path) -> TrendData:
    """Read a file written by :meth:`TrendData.to_csv` (no forecast).

    Raises
    ------
    InputError
        Naming the file and the line: unreadable, missing header, bad time or value.
    """
    p = Path(path)
    try:
        lines = p.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError) as e:
        raise InputError(f"{p}: cannot read the trend CSV ({e})") from None
    head: dict[str, str] = {}
    body_at = 0
    for body_at, line in enumerate(lines):
        if not line.startswith("#"):
            break
        key, sep, val = line[1:].strip().partition(":")
        if sep:
            head[key.strip()] = val.strip()
    for key in ("point", "value", "unit"):
        if key not in head:
            raise InputError(f"{p}: no '# {key}:' line; not a Shaftwatch trend CSV")
    rows = list(csv.reader(lines[body_at:]))
    if not rows or tuple(rows[0]) != CSV_COLUMNS:
        raise InputError(f"{p}: line {body_at + 1}: columns must be " + ",".join(CSV_COLUMNS))
    times, vals, states, zones, ids = [], [], [], [], []
    for k, row in enumerate(rows[1:], start=body_at + 2):
        if len(row) != len(CSV_COLUMNS):
            raise InputError(f"{p}: line {k}: {len(row)} fields, expected {len(CSV_COLUMNS)}")
        try:
            moment = datetime.fromisoformat(row[0])
            vals.append(float(row[1]) if row[1] else math.nan)
        except ValueError:
            raise InputError(f"{p}: line {k}: time must be ISO-8601 and value a number, "
                             f"got {row[0]!r}, {row[1]!r}") from None
        if moment.tzinfo is None:
            moment = moment.replace(tzinfo=UTC)
        times.append(moment.timestamp())
        states.append(row[2])
        zones.append(row[3])
        ids.append(row[4])
    level = {k: (float(head[k]) if head.get(k) else None) for k in ("alert", "danger")}
    return TrendData(point=head["point"], value=head["value"], unit=head["unit"],
                     times_s=np.array(times, dtype=float), values=np.array(vals, dtype=float),
                     run_ids=ids, states=states, zones=zones, **level)


def _until(until_s) -> float | None:
    if until_s is None:
        return None
    try:
        u = float(until_s)
    except (TypeError, ValueError):
        raise InputError(f"trend: until_s must be seconds since 1970 UTC, got {until_s!r}") \
            from None
    if not math.isfinite(u):
        raise InputError(f"trend: until_s must be finite, got {until_s!r}")
    return u


def trend(arc, point: str, value: str, *, forecast: bool = True, recent: int | None = None,
          until_s: float | None = None) -> TrendData:
    """One value of one point against time, with its levels and forecast.

    Parameters
    ----------
    arc : Archive
        Open for reading or writing (nothing is written).
    point : str
        ``"Site/Machine/Point"``.
    value : str
        A standard value (e.g. ``"overall_velocity_mm_s"``, mm/s RMS) or
        ``"band:<band name>"`` of the plan in force.
    forecast : bool, keyword-only
        Fit the trend and forecast the alert and danger dates.
    recent : int, optional, keyword-only
        Fit the latest ``recent`` runs; default: the window of the module notes.
    until_s : float, optional, keyword-only
        Only runs taken at or before this time (s since 1970 UTC): the trend and the
        forecast as they were then (the forecast horizon counts from it).

    Returns
    -------
    TrendData

    Raises
    ------
    InputError
        An unknown point or value, a band not in the plan in force, a band whose values
        were never measured (evaluate the point first), a bad ``recent`` or ``until_s``.
    """
    from .alarms.iso import zone_of
    from .pipeline import plan_in_force, zone_limits

    arc.point(point)
    plan = plan_in_force(arc, point)
    unit, alert, danger, band = value_levels(plan, value)
    until = _until(until_s)
    rows = arc.value_rows(point)
    n_all = rows["run_id"].size if rows else 0
    if n_all and value not in rows:
        raise InputError(f"{arc.path}: no values of {value!r} stored for {point}; evaluate "
                         "the point against its plan first (shaftwatch evaluate)")
    sel = np.ones(n_all, bool) if until is None else rows["taken_s"] <= until
    times = rows["taken_s"][sel].astype(float) if n_all else np.zeros(0)
    vals = rows[value][sel].astype(float) if n_all else np.zeros(0)
    limits = zone_limits(arc, point)
    overall = rows["overall_velocity_mm_s"][sel] if n_all and "overall_velocity_mm_s" in rows \
        else np.full(times.size, np.nan)
    zones = [zone_of(v, limits) if limits and math.isfinite(v) else "" for v in overall]
    out = TrendData(point=point, value=value, unit=unit, times_s=times, values=vals,
                    run_ids=[str(r) for r in rows["run_id"][sel]] if n_all else [],
                    states=[str(s) for s in rows["state"][sel]] if n_all else [],
                    zones=zones, alert=alert, danger=danger, levels_from=band,
                    until_s=until, plan_name=plan.name if plan is not None else "")
    if forecast:
        ok = np.isfinite(vals)
        t, v = times[ok], vals[ok]
        w = fit_window(t, v, unit=unit, recent=recent)
        f = _forecast(t[w.start:], v[w.start:], alert=alert, danger=danger,
                      recent=max(w.count, MIN_POINTS), now_s=until)
        f.reason = f"{w.text} {f.reason}"
        out.forecast, out.window = f, w
    return out
