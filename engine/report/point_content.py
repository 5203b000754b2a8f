"""What a report shows of one point: its status row, trends, forecasts, spectra and
findings, read from the archive (nothing is written).

:mod:`engine.report.assemble` calls :func:`point_content` for every point of a machine
or a survey and puts the parts together.  The rules of what is shown are set out in
that module's notes.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np

from ..alarms.evaluate import SEVERITY
from ..errors import InputError
from ..findings import SEVERITIES
from ..forecast import Forecast
from ..results import BAND_PREFIX, RunResults, band_value_name
from ..trends import SCALE_LABELS, TrendData, trend, value_levels
from ..units import ACCELERATION, unit as unit_of
from .content import hz, number
from .data import (STATES, FindingItem, ForecastItem, SpectrumPlot, StatusRow, TrendSeries,
                   iso_date)

#: The value that every point's trends start with: ISO broadband velocity, mm/s RMS.
OVERALL_VALUE = "overall_velocity_mm_s"
#: Trend value of each bearing defect family: the envelope line at the defect
#: frequency, g RMS (:data:`engine.results.STANDARD_VALUES`).
DEFECT_VALUES = {"FTF": "ftf_g", "BSF": "bsf_g", "BPFO": "bpfo_g", "BPFI": "bpfi_g"}
#: Finding severities reported whatever the point's state (those above "info").
REPORTED_SEVERITIES = SEVERITIES[1:]
#: States in which a point's findings are all reported (they explain the alarm).
ALARM_STATES = ("alert", "danger")
#: Forecast statuses that get a line in the forecast table (a flat or falling trend
#: has no date to give; its plot says so).
FORECAST_TABLE_STATUSES = ("forecast", "already above")
#: Band measures drawn on the (velocity) spectrum and on the envelope spectrum.
SPECTRUM_MEASURES = ("band_rms", "band_peak", "overall")
ENVELOPE_MEASURES = ("envelope_rms", "envelope_peak")

#: Longest source name used as it is for a marker label (rotated labels must fit the
#: plot's height; see :func:`marker_label`).
MARKER_LABEL_CHARS = 20

_DEFECT = re.compile(r"\b(FTF|BSF|BPFO|BPFI)\d*\b")


@dataclass
class PointPart:
    """One point's share of a report (see :func:`point_content`)."""

    row: StatusRow
    trends: list[TrendSeries] = field(default_factory=list)
    forecasts: list[ForecastItem] = field(default_factory=list)
    spectra: list[SpectrumPlot] = field(default_factory=list)
    findings: list[FindingItem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


@dataclass
class PointLatest:
    """A point's latest run within the report's scope, as the value table has it.

    ``state`` is the recorded alarm state ("" when never evaluated), ``zone`` the ISO
    20816 zone, ``overall_mm_s`` the broadband velocity RMS (mm/s, NaN unknown),
    ``taken_s`` POSIX seconds (NaN when there is no run); ``note`` says why a point
    has no state.
    """

    run_id: str = ""
    state: str = "no data"
    zone: str = ""
    overall_mm_s: float = math.nan
    taken_s: float = math.nan
    worst_band: str = ""
    quality: str = ""
    note: str = ""


def value_label(value: str) -> str:
    """Plain name of a trend value: "overall velocity", "band 1x", "BPFO envelope line"."""
    if value == OVERALL_VALUE:
        return "overall velocity"
    if value.startswith(BAND_PREFIX):
        return f"band {value[len(BAND_PREFIX):]}"
    for family, name in DEFECT_VALUES.items():
        if value == name:
            return f"{family} envelope line"
    return value.replace("_", " ")


def report_state(state: str) -> str:
    """A recorded state as one of the report's :data:`~engine.report.data.STATES`
    (a point never evaluated, state "", shows as "no data")."""
    return state if state in STATES else "no data"


def reported_findings(results: RunResults | None, state: str) -> list[dict]:
    """The findings of a run that the report shows: those graded above "info", and
    every finding of a point in alert or danger (they explain the alarm)."""
    if results is None:
        return []
    return [f for f in results.findings
            if f.get("severity") in REPORTED_SEVERITIES or state in ALARM_STATES]


def defect_families(findings: list[dict]) -> list[str]:
    """Bearing defect families (FTF, BSF, BPFO, BPFI) named by bearing findings."""
    out: list[str] = []
    for f in findings:
        if f.get("kind") != "bearing":
            continue
        m = _DEFECT.search(str(f.get("title", "")))
        if m and m.group(1) not in out:
            out.append(m.group(1))
    return out


def _scale_unit(spectrum) -> str:
    return f"{spectrum.unit} {SCALE_LABELS.get(spectrum.scale, spectrum.scale)}".strip()


def _is_envelope_unit(text: str) -> bool:
    """True when an evidence unit ("g", "m/s2 RMS") is an acceleration: envelope lines."""
    try:
        return unit_of(str(text).split()[0]).quantity == ACCELERATION
    except (InputError, IndexError):
        return False


def evidence_markers(findings: list[dict]) -> tuple[list[tuple[float, str]],
                                                    list[tuple[float, str]]]:
    """Markers ``(Hz, source name)`` of the findings' evidence: (spectrum, envelope).

    Evidence in an acceleration unit was read on the envelope spectrum, the rest on
    the velocity spectrum; evidence without a frequency (a level) gives no marker; a
    source seen twice at the same frequency (to 0.01 Hz) is marked once.
    """
    spec: dict[tuple[float, str], float] = {}
    env: dict[tuple[float, str], float] = {}
    for f in findings:
        for e in f.get("evidence", []):
            freq = e.get("frequency_hz")
            if freq is None or not math.isfinite(float(freq)):
                continue
            label = marker_label(e)
            target = env if _is_envelope_unit(e.get("unit", "")) else spec
            target.setdefault((round(float(freq), 2), label), float(freq))
    return ([(f, k[1]) for k, f in spec.items()], [(f, k[1]) for k, f in env.items()])


def marker_label(e: dict) -> str:
    """A marker's label: the evidence's source name, or its description when the name
    is longer than :data:`MARKER_LABEL_CHARS` and the description shorter (a gear
    sideband reads "sideband -1× input" rather than "gear mesh input–output -1×
    input"; the finding's evidence keeps the full name)."""
    src = str(e.get("source_name") or "").strip()
    desc = str(e.get("description") or "").strip()
    if src and (len(src) <= MARKER_LABEL_CHARS or not desc or len(desc) >= len(src)):
        return src
    return desc or src


def evidence_text(e: dict) -> str:
    """One piece of evidence as a sentence: what, where (Hz), how much, matched to what."""
    desc = str(e.get("description", "")).strip()
    parts = []
    if e.get("frequency_hz") is not None and math.isfinite(float(e["frequency_hz"])):
        parts.append(hz(float(e["frequency_hz"])))
    if e.get("amplitude") is not None and math.isfinite(float(e["amplitude"])):
        parts.append(f"{number(float(e['amplitude']))} {e.get('unit', '')}".strip())
    text = desc + (": " + ", ".join(parts) if parts else "")
    src = str(e.get("source_name") or "")
    if src and _letters(src) not in _letters(desc):
        text += f" (matched to {src})"   # only when the description does not name it
    return text


def _letters(text: str) -> str:
    """The letters of a text, lower case: "2×BPFO+1×" and "sideband +1× of 2×BPFO" share
    "bpfo", so the second already names the first."""
    return re.sub(r"[^a-z]", "", text.lower())


def plan_bands(plan, rpm: float, measures: tuple[str, ...]
               ) -> list[tuple[float, float, float | None, float | None, str]]:
    """Bands of ``plan`` with their own edges, of the given measures, in Hz at ``rpm``.

    The broadband overall band (no edges) is left out: it spans the whole spectrum and
    its levels are on the overall-velocity trend.
    """
    out = []
    for b in plan.bands if plan is not None else ():
        if b.measure not in measures or b.low is None or b.high is None:
            continue
        edges = b.edges_hz(rpm)
        if edges is not None:
            out.append((float(edges[0]), float(edges[1]), float(b.alert), float(b.danger),
                        b.name))
    return out


def _dates(fc: Forecast, level: str) -> tuple[str, tuple[str, str] | None]:
    date = iso_date(getattr(fc, f"{level}_date_s"))
    lo, hi = iso_date(getattr(fc, f"{level}_low_s")), iso_date(getattr(fc, f"{level}_high_s"))
    return date, ((lo, hi) if lo or hi else None)


def forecast_item(label: str, td: TrendData) -> ForecastItem:
    """The forecast table's line of a trend (dates ISO, "" when not forecast)."""
    fc = td.forecast
    alert, alert_iv = _dates(fc, "alert")
    danger, danger_iv = _dates(fc, "danger")
    return ForecastItem(point=label, value=value_label(td.value), unit=td.unit,
                        status=fc.status, model=fc.model, alert_date=alert,
                        alert_interval=alert_iv, danger_date=danger,
                        danger_interval=danger_iv)


def trend_series(label: str, td: TrendData, since_s: float | None) -> TrendSeries:
    """A trend for the report: runs at or after ``since_s`` (POSIX s) shown, the
    forecast (made from the whole history) kept as it is."""
    keep = np.ones(td.times_s.size, bool) if since_s is None else td.times_s >= since_s
    return TrendSeries(point=label, value=value_label(td.value), unit=td.unit,
                       times_s=td.times_s[keep], values=td.values[keep], alert=td.alert,
                       danger=td.danger,
                       forecast=td.forecast.as_dict() if td.forecast is not None else None)


def _trend(arc, point: str, value: str, until_s: float | None, notes: list[str]
           ) -> TrendData:
    """:func:`engine.trends.trend`; when the forecast itself fails on a numerical
    problem, the trend without forecast and a note saying so (the report goes out)."""
    try:
        return trend(arc, point, value, until_s=until_s)
    except InputError:
        raise
    except (ArithmeticError, OSError, ValueError) as exc:
        notes.append(f"{point}: no forecast of {value_label(value)} could be made "
                     f"({type(exc).__name__}: {exc}); its trend is shown without one.")
        return trend(arc, point, value, forecast=False, until_s=until_s)


def _trends(arc, point: str, plan, band_states: dict[str, str], families: list[str],
            until_s: float | None) -> tuple[list[TrendData], list[str]]:
    """The point's trends (overall, bands that matter, defect lines) and notes."""
    notes: list[str] = []
    out = [_trend(arc, point, OVERALL_VALUE, until_s, notes)]
    overall_band = value_levels(plan, OVERALL_VALUE)[3]
    for b in plan.bands if plan is not None else ():
        if b.name == overall_band:
            continue  # the same value as the overall velocity trend
        try:
            td = _trend(arc, point, band_value_name(b.name), until_s, notes)
        except InputError as exc:
            notes.append(f"{point}: band {b.name} has no trend ({exc}).")
            continue
        rising = td.forecast is not None and td.forecast.status == "forecast"
        if band_states.get(b.name) in ALARM_STATES or rising:
            out.append(td)
    for family in families:
        out.append(_trend(arc, point, DEFECT_VALUES[family], until_s, notes))
    return [td for td in out if td.times_s.size], notes


def _spectra(label: str, results: RunResults, findings: list[dict], plan
             ) -> list[SpectrumPlot]:
    spec_marks, env_marks = evidence_markers(findings)
    taken = iso_date(results.taken_s)
    out = []
    if results.spectrum is not None and spec_marks:
        out.append(SpectrumPlot(
            point=label, run_id=results.run_id, kind="spectrum",
            title=f"{label} \u2014 velocity spectrum, {taken}",
            frequency_hz=results.spectrum.frequency_hz, amplitude=results.spectrum.amplitude,
            unit=_scale_unit(results.spectrum), markers=sorted(spec_marks),
            bands=plan_bands(plan, results.rpm, SPECTRUM_MEASURES)))
    if results.envelope is not None and env_marks:
        band = results.envelope_band_hz
        demod = (f" (demodulated {band[0]:.0f}\u2013{band[1]:.0f} Hz)" if band else "")
        out.append(SpectrumPlot(
            point=label, run_id=results.run_id, kind="envelope",
            title=f"{label} \u2014 envelope spectrum{demod}, {taken}",
            frequency_hz=results.envelope.frequency_hz, amplitude=results.envelope.amplitude,
            unit=_scale_unit(results.envelope), markers=sorted(env_marks),
            bands=plan_bands(plan, results.rpm, ENVELOPE_MEASURES)))
    return out


def point_content(arc, point: str, *, machine_label: str, machine_name: str,
                  latest: PointLatest, plan,
                  since_s: float | None = None, until_s: float | None = None) -> PointPart:
    """Everything a report shows of one point.

    Parameters
    ----------
    arc : Archive
        Read only.
    point : str
        ``"Site/Machine/Point"``.
    machine_label, machine_name : str
        How the report names the machine (its tag, with the site when the plant has
        several) and the machine's name; plots and tables name the point
        ``"<machine_label> <point name>"``, e.g. ``"P-102 pump DE H"``.
    latest : PointLatest
        The point's latest run within the report's scope.
    plan : AlarmPlan or None
        The plan in force.
    since_s, until_s : float, optional
        Trends show runs taken at or after ``since_s``; trends and forecasts use the
        runs taken at or before ``until_s`` (POSIX seconds).

    Returns
    -------
    PointPart
    """
    name = arc.point(point).name
    point_label = f"{machine_label} {name}"
    state = report_state(latest.state)
    results = arc.results(latest.run_id) if latest.run_id else None
    findings = reported_findings(results, state)
    notes = [latest.note] if latest.note else []
    if latest.quality and latest.quality != "ok":
        notes.append(f"data quality {latest.quality}")
    if findings:
        notes.append(str(findings[0].get("title", "")))
    row = StatusRow(machine=machine_label, machine_name=machine_name, point=name,
                    state=state, zone=latest.zone, overall_mm_s=float(latest.overall_mm_s),
                    taken=iso_date(latest.taken_s), worst_band=latest.worst_band,
                    note="; ".join(n for n in notes if n))
    part = PointPart(row=row)
    if not latest.run_id:
        return part
    band_states = {b["band"]: b["state"] for b in (results.bands if results else [])}
    tds, part.notes = _trends(arc, point, plan, band_states, defect_families(findings),
                              until_s)
    for td in tds:
        part.trends.append(trend_series(point_label, td, since_s))
        if (td.forecast is not None and td.forecast.status in FORECAST_TABLE_STATUSES
                and (td.alert is not None or td.danger is not None)):
            part.forecasts.append(forecast_item(point_label, td))
    if results is not None:
        part.spectra = _spectra(point_label, results, findings, plan)
        taken = iso_date(results.taken_s)
        part.findings = [FindingItem(
            machine=machine_label, point=row.point, run_id=results.run_id, taken=taken,
            title=str(f.get("title", "")), severity=str(f.get("severity", "")),
            evidence=[evidence_text(e) for e in f.get("evidence", [])],
            recommendation=str(f.get("recommendation", ""))) for f in findings]
    return part


def worst_state(states) -> str:
    """The most urgent of some states (danger > alert > bad data > ok > no data)."""
    states = list(states)
    return max(states, key=lambda s: SEVERITY.get(s, -1)) if states else "no data"
