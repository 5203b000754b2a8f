"""The words and table cells both renderers show, so the PDF and the HTML say the same.

Numbers are formatted here once: overall velocity with two decimals (mm/s), levels with
three significant figures, frequencies with one decimal (Hz); a missing value is an em
dash.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .data import ForecastItem, ReportData, SpectrumPlot, StatusRow, TrendSeries

#: Sections in the order the report shows them: (key, heading).
SECTIONS: tuple[tuple[str, str], ...] = (
    ("title", "Report"),
    ("cautions", "Cautions"),
    ("status", "Status of the points"),
    ("trends", "Trends"),
    ("forecasts", "Forecast of alert and danger"),
    ("spectra", "Spectra with findings"),
    ("findings", "Findings and recommendations"),
    ("notes", "Notes"),
)
HEADINGS = dict(SECTIONS)

#: What an empty section says instead of its content.
EMPTY = {
    "status": "No points in this report.",
    "trends": "No trends in this report.",
    "forecasts": "No forecasts in this report.",
    "spectra": "No spectrum in this report carries a finding.",
    "findings": "No findings in this report.",
    "notes": "No notes.",
}

MISSING = "\u2014"  # em dash


@dataclass(frozen=True)
class Column:
    """A table column: heading, share of the table's width (0–1), alignment."""

    title: str
    width: float
    align: str = "left"


STATUS_COLUMNS = (
    Column("Machine", 0.17), Column("Point", 0.13), Column("State", 0.12),
    Column("ISO zone", 0.065, "center"), Column("Overall mm/s", 0.085, "right"),
    Column("Latest run", 0.125), Column("Worst band", 0.145), Column("Note", 0.16),
)
#: Index of the state column (shown by word and colour).
STATUS_STATE_COLUMN = 2

FORECAST_COLUMNS = (
    Column("Point", 0.17), Column("Value", 0.17), Column("Status", 0.12),
    Column("Model", 0.13), Column("Alert expected (interval)", 0.205),
    Column("Danger expected (interval)", 0.205),
)


def number(x: float | None) -> str:
    """A level with about three significant figures, or an em dash."""
    if x is None or not math.isfinite(x):
        return MISSING
    ax = abs(x)
    if ax >= 100:
        return f"{x:.0f}"
    if ax >= 10:
        return f"{x:.1f}"
    return f"{x:.3g}"


def hz(f: float) -> str:
    """A frequency, Hz, one decimal."""
    return f"{f:.1f} Hz"


def status_cells(row: StatusRow) -> list[str]:
    """The status table's cells of one point, in :data:`STATUS_COLUMNS` order."""
    machine = f"{row.machine} \u2014 {row.machine_name}" if row.machine_name else row.machine
    overall = (f"{row.overall_mm_s:.2f}" if row.overall_mm_s is not None
               and math.isfinite(row.overall_mm_s) else MISSING)
    return [machine, row.point, row.state, row.zone or MISSING, overall,
            row.taken or MISSING, row.worst_band or MISSING, row.note]


def _when(date: str, interval: tuple[str, str] | None) -> str:
    if not date:
        return MISSING
    if interval and (interval[0] or interval[1]):
        return f"{date} ({interval[0] or '?'} \u2013 {interval[1] or '?'})"
    return date


def forecast_cells(item: ForecastItem) -> list[str]:
    """The forecast table's cells of one value, in :data:`FORECAST_COLUMNS` order."""
    value = f"{item.value} ({item.unit})" if item.unit else item.value
    return [item.point, value, item.status, item.model or MISSING,
            _when(item.alert_date, item.alert_interval),
            _when(item.danger_date, item.danger_interval)]


def trend_title(tr: TrendSeries) -> str:
    return f"{tr.point} \u2014 {tr.value} ({tr.unit})"


def trend_caption(tr: TrendSeries) -> list[str]:
    """Sentences under a trend plot: its levels and, when there is one, the forecast."""
    levels = []
    if tr.alert is not None:
        levels.append(f"alert {number(tr.alert)} {tr.unit}")
    if tr.danger is not None:
        levels.append(f"danger {number(tr.danger)} {tr.unit}")
    lines = [f"{tr.values.size} runs; levels: {', '.join(levels) if levels else 'none set'}."]
    fc = tr.forecast
    if fc:
        status = fc.get("status", "")
        model = fc.get("model", "")
        head = f"Forecast: {status}" + (f", {model} model" if model else "")
        reason = str(fc.get("reason", "")).strip()
        lines.append(f"{head}. {reason}" if reason else f"{head}.")
    return lines


def spectrum_caption(sp: SpectrumPlot) -> list[str]:
    """Sentences under a spectrum: the run, the marked sources and the alarm bands."""
    kind = "Envelope spectrum" if sp.kind == "envelope" else "Spectrum"
    lines = [f"{kind} of run {sp.run_id} at {sp.point}, amplitude in {sp.unit}."]
    if sp.markers:
        marks = ", ".join(f"{label} {hz(f)}" for f, label in sorted(sp.markers))
        lines.append(f"Matched sources: {marks}.")
    if sp.bands:
        parts = []
        for lo, hi, alert, danger, name in sp.bands:
            levels = [f"alert {number(alert)}" if alert is not None else "",
                      f"danger {number(danger)}" if danger is not None else ""]
            levels = [v for v in levels if v]
            parts.append(f"{name} {lo:.0f}\u2013{hi:.0f} Hz"
                         + (f" ({', '.join(levels)})" if levels else ""))
        lines.append(f"Alarm bands (shaded): {'; '.join(parts)}.")
    return lines


def finding_heading(machine: str, point: str, title: str) -> str:
    return f"{machine} \u00b7 {point} \u2014 {title}"


def finding_meta(severity: str, run_id: str, taken: str) -> str:
    return f"Severity: {severity} \u00b7 run {run_id} \u00b7 taken {taken or MISSING}"


def title_lines(data: ReportData) -> list[tuple[str, str]]:
    """The title block's labelled lines."""
    return [("Plant", data.plant), ("Scope", data.scope), ("Generated", data.generated_at)]


def footer_text(data: ReportData) -> str:
    """The footer's left part: the plant, then the report's title."""
    return f"{data.plant} \u00b7 {data.title}"
