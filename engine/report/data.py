"""What a report holds: plain dataclasses, filled by the caller, no archive access.

The renderers (:mod:`engine.report.render_pdf`, :mod:`engine.report.render_html`) read
only these objects, so that a report can be built from an archive, from a single run or
by hand (tests, examples).  Times are UTC: ``times_s`` are seconds since 1970-01-01
(POSIX time); dates in text fields are ISO-8601 strings as the caller wrote them.

:func:`validate_report` checks the shapes and kinds of every field before anything is
drawn and raises :class:`~engine.errors.InputError` naming the field.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import UTC, datetime

import numpy as np

from ..errors import InputError

#: The states a point can be in, mildest first (the alarm layer's words).
STATES = ("ok", "alert", "danger", "no data", "bad data")
#: Kinds of spectrum plot: the (velocity or acceleration) spectrum or the envelope one.
SPECTRUM_KINDS = ("spectrum", "envelope")


def _float_array(values, name: str) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"report data: {name} must hold numbers") from None
    if arr.ndim != 1:
        raise InputError(f"report data: {name} must be one-dimensional, got shape {arr.shape}")
    return arr


@dataclass
class StatusRow:
    """One point's line of the status table.

    ``state`` is one of :data:`STATES`; ``zone`` the ISO 20816 zone "A" … "D" of the
    overall velocity or "" when not judged; ``overall_mm_s`` the broadband velocity
    RMS, mm/s (NaN unknown); ``taken`` the ISO date of the latest run ("" none);
    ``worst_band`` the alarm band that set the state.
    """

    machine: str
    machine_name: str
    point: str
    state: str
    zone: str
    overall_mm_s: float
    taken: str
    worst_band: str = ""
    note: str = ""


@dataclass
class TrendSeries:
    """A value of one point against time, with its alarm levels and forecast.

    ``times_s`` are POSIX seconds (UTC), ``values`` in ``unit``; ``alert`` and
    ``danger`` the levels in the same unit (``None`` when the plan has none).
    ``forecast`` is ``engine.forecast.Forecast.as_dict()`` plus the lists
    ``"curve_t_s"`` (POSIX s), ``"curve_value"``, ``"curve_low"``, ``"curve_high"``
    (``unit``) of the fitted and extrapolated curve and its interval.
    """

    point: str
    value: str
    unit: str
    times_s: np.ndarray
    values: np.ndarray
    alert: float | None
    danger: float | None
    forecast: dict | None = None

    def __post_init__(self) -> None:
        self.times_s = _float_array(self.times_s, f"trend {self.point!r} times_s")
        self.values = _float_array(self.values, f"trend {self.point!r} values")


@dataclass
class SpectrumPlot:
    """A spectrum (``kind`` "spectrum") or envelope spectrum ("envelope") of one run.

    ``frequency_hz`` and ``amplitude`` (in ``unit``) are the lines; ``markers`` the
    matched sources as ``(frequency Hz, label)``; ``bands`` the alarm bands as
    ``(low Hz, high Hz, alert, danger, name)`` with the levels in the band's own unit
    and measure (``None`` when the band has no such level).
    """

    point: str
    run_id: str
    title: str
    kind: str
    frequency_hz: np.ndarray
    amplitude: np.ndarray
    unit: str
    markers: list[tuple[float, str]] = field(default_factory=list)
    bands: list[tuple[float, float, float | None, float | None, str]] = field(
        default_factory=list)

    def __post_init__(self) -> None:
        self.frequency_hz = _float_array(self.frequency_hz,
                                         f"spectrum {self.title!r} frequency_hz")
        self.amplitude = _float_array(self.amplitude, f"spectrum {self.title!r} amplitude")


@dataclass
class FindingItem:
    """A finding of one run: title, severity (info/watch/warning/serious), the evidence
    as sentences and the recommendation, worded as an indication for a qualified
    person."""

    machine: str
    point: str
    run_id: str
    taken: str
    title: str
    severity: str
    evidence: list[str]
    recommendation: str


@dataclass
class ForecastItem:
    """One line of the forecast table: when a value is expected to reach alert and
    danger, as ISO dates ("" when not forecast) with their intervals ``(low, high)``."""

    point: str
    value: str
    unit: str
    status: str
    model: str
    alert_date: str
    alert_interval: tuple[str, str] | None
    danger_date: str
    danger_interval: tuple[str, str] | None


@dataclass
class ReportData:
    """Everything one report shows, in the order it shows it.

    ``scope`` says what the report covers, e.g. "Machine P-102 — Raw-water pump 2" or
    "Survey of 2026-11-16"; ``generated_at`` is an ISO time; ``cautions`` are sentences
    (normally :data:`engine.report.CAUTIONS`, which the renderers show when the list is
    empty: a report never goes out without them); ``notes`` plain sentences shown last.
    """

    title: str
    plant: str
    scope: str
    generated_at: str
    status: list[StatusRow]
    trends: list[TrendSeries]
    spectra: list[SpectrumPlot]
    findings: list[FindingItem]
    forecasts: list[ForecastItem]
    cautions: list[str]
    notes: list[str] = field(default_factory=list)


def _require_list(value, name: str, kind: type) -> None:
    if not isinstance(value, (list, tuple)):
        raise InputError(f"report data: {name} must be a list, got {type(value).__name__}")
    for i, item in enumerate(value):
        if not isinstance(item, kind):
            raise InputError(f"report data: {name}[{i}] must be a {kind.__name__}, "
                             f"got {type(item).__name__}")


def _require_text(value, name: str) -> None:
    if not isinstance(value, str):
        raise InputError(f"report data: {name} must be text, got {type(value).__name__}")


def validate_report(data: ReportData) -> None:
    """Check a report's data before drawing anything.

    Parameters
    ----------
    data : ReportData

    Raises
    ------
    InputError
        When a field has the wrong kind, a state is unknown, axes and values differ in
        length, a marker or band is not a number or a forecast curve is ragged; the
        message names the field.
    """
    if not isinstance(data, ReportData):
        raise InputError(f"report data must be a ReportData, got {type(data).__name__}")
    for name in ("title", "plant", "scope", "generated_at"):
        _require_text(getattr(data, name), name)
    _require_list(data.status, "status", StatusRow)
    _require_list(data.trends, "trends", TrendSeries)
    _require_list(data.spectra, "spectra", SpectrumPlot)
    _require_list(data.findings, "findings", FindingItem)
    _require_list(data.forecasts, "forecasts", ForecastItem)
    _require_list(data.cautions, "cautions", str)
    _require_list(data.notes, "notes", str)
    for i, row in enumerate(data.status):
        where = f"status[{i}] ({row.machine} {row.point})"
        if row.state not in STATES:
            raise InputError(f"report data: {where} state must be one of "
                             f"{', '.join(STATES)}, got {row.state!r}")
        if not _is_number(row.overall_mm_s):
            raise InputError(f"report data: {where} overall_mm_s must be a number (NaN "
                             f"when unknown), got {row.overall_mm_s!r}")
        for name in ("machine", "machine_name", "point", "zone", "taken", "worst_band",
                     "note"):
            _require_text(getattr(row, name), f"{where} {name}")
    for i, tr in enumerate(data.trends):
        for name in ("alert", "danger"):
            level = getattr(tr, name)
            if level is not None and not _is_number(level):
                raise InputError(f"report data: trends[{i}] ({tr.point}, {tr.value}) {name} "
                                 f"must be a number or None, got {level!r}")
        if tr.times_s.size != tr.values.size:
            raise InputError(f"report data: trends[{i}] ({tr.point}, {tr.value}) has "
                             f"{tr.times_s.size} times_s but {tr.values.size} values")
        if tr.forecast is not None:
            forecast_curve(tr.forecast, f"trends[{i}] ({tr.point}, {tr.value}) forecast")
    for i, sp in enumerate(data.spectra):
        where = f"spectra[{i}] ({sp.title})"
        if sp.kind not in SPECTRUM_KINDS:
            raise InputError(f"report data: {where} kind must be 'spectrum' or "
                             f"'envelope', got {sp.kind!r}")
        if sp.frequency_hz.size != sp.amplitude.size:
            raise InputError(f"report data: {where} has {sp.frequency_hz.size} "
                             f"frequency_hz but {sp.amplitude.size} amplitude values")
        for j, marker in enumerate(sp.markers):
            if len(marker) != 2 or not _is_number(marker[0]):
                raise InputError(f"report data: {where} markers[{j}] must be "
                                 f"(frequency Hz, label), got {marker!r}")
        for j, band in enumerate(sp.bands):
            if (len(band) != 5 or not _is_number(band[0]) or not _is_number(band[1])
                    or not all(b is None or _is_number(b) for b in band[2:4])):
                raise InputError(f"report data: {where} bands[{j}] must be (low Hz, high "
                                 f"Hz, alert, danger, name), got {band!r}")
    for i, item in enumerate(data.findings):
        _require_list(item.evidence, f"findings[{i}] evidence", str)
    for i, fc in enumerate(data.forecasts):
        for name in ("alert_interval", "danger_interval"):
            interval = getattr(fc, name)
            if interval is not None and (len(interval) != 2 or not all(
                    isinstance(d, str) for d in interval)):
                raise InputError(f"report data: forecasts[{i}] ({fc.point}) {name} must be "
                                 f"(low, high) ISO dates or None, got {interval!r}")


def _is_number(value) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
        value, bool)


def forecast_curve(forecast: dict, name: str = "forecast"
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None:
    """The forecast's curve as arrays ``(t_s, value, low, high)``, or ``None``.

    Parameters
    ----------
    forecast : dict
        ``Forecast.as_dict()`` with ``curve_t_s`` (POSIX seconds or ISO strings),
        ``curve_value``, ``curve_low`` and ``curve_high``; any of them missing or
        empty means there is no curve to draw.
    name : str
        Field name for messages.

    Returns
    -------
    tuple of four 1-D float arrays of equal length, or None

    Raises
    ------
    InputError
        When the forecast is not a dict or the four lists differ in length.
    """
    if not isinstance(forecast, dict):
        raise InputError(f"report data: {name} must be a dict, got {type(forecast).__name__}")
    keys = ("curve_t_s", "curve_value", "curve_low", "curve_high")
    if any(forecast.get(k) is None or len(forecast.get(k)) == 0 for k in keys):
        return None
    t = np.array([to_posix_s(v, f"{name} curve_t_s") for v in forecast["curve_t_s"]])
    rest = [_float_array(forecast[k], f"{name} {k}") for k in keys[1:]]
    if any(r.size != t.size for r in rest):
        raise InputError(f"report data: {name} curve lists differ in length: "
                         + ", ".join(f"{k} {len(forecast[k])}" for k in keys))
    return t, rest[0], rest[1], rest[2]


def to_posix_s(value, name: str = "time") -> float:
    """A time as POSIX seconds: a number as it is, an ISO-8601 string parsed (UTC when
    it carries no zone), ``None``/"" as NaN."""
    if value is None or value == "":
        return math.nan
    if _is_number(value):
        return float(value)
    if isinstance(value, str):
        try:
            t = datetime.fromisoformat(value)
        except ValueError:
            raise InputError(f"report data: {name} {value!r} is not an ISO-8601 time") from None
        if t.tzinfo is None:
            t = t.replace(tzinfo=UTC)
        return t.timestamp()
    raise InputError(f"report data: {name} must be a number or an ISO time, got {value!r}")


def iso_date(t_s: float) -> str:
    """POSIX seconds as an ISO date (UTC), "" for NaN."""
    if not math.isfinite(t_s):
        return ""
    return datetime.fromtimestamp(t_s, UTC).date().isoformat()
