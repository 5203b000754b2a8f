"""What the trend view reads from the archive, without any widget: the values a point can
be trended by (with their units), the trends of the values chosen, and the words and
numbers of the forecast readout.

Every function here runs inside a job (``AppContext.jobs``), never on the GUI thread;
they only read the archive (:mod:`engine.trends` never writes).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import UTC, datetime

import numpy as np

from engine.errors import EngineError
from engine.pipeline import plan_in_force
from engine.results import BAND_PREFIX, STANDARD_VALUES, VALUE_UNITS
from engine.trends import TrendData, band_unit, trend
from engine.units import scale_factor

from .jobs import Cancelled

#: Plain names of the standard values (engine.results.STANDARD_VALUES).
VALUE_LABELS = {
    "overall_velocity_mm_s": "Overall velocity",
    "1x_mm_s": "1× velocity",
    "2x_mm_s": "2× velocity",
    "3x_mm_s": "3× velocity",
    "half_x_mm_s": "½× velocity",
    "acceleration_rms_g": "Acceleration RMS",
    "acceleration_peak_g": "Acceleration peak",
    "envelope_rms_g": "Envelope RMS",
    "ftf_g": "Envelope at FTF",
    "bsf_g": "Envelope at BSF",
    "bpfo_g": "Envelope at BPFO",
    "bpfi_g": "Envelope at BPFI",
    "crest_factor": "Crest factor",
    "kurtosis": "Kurtosis",
    "rpm": "Speed",
}
#: The value shown when nothing was chosen before.
DEFAULT_VALUE = "overall_velocity_mm_s"


def value_label(value: str) -> str:
    """Plain name of a value: ``"Overall velocity"``, ``"Band 1x"``."""
    if value.startswith(BAND_PREFIX):
        return f"Band {value[len(BAND_PREFIX):]}"
    return VALUE_LABELS.get(value, value)


@dataclass(frozen=True)
class ValueChoice:
    """One entry of the value picker.

    Attributes
    ----------
    name : str
        The value's name in the archive (standard value or ``band:<name>``).
    label, unit : str
        Plain name and unit as stored (e.g. ``"mm/s RMS"``, ``"1"``).
    count : int
        Runs of the point with a finite value (0: nothing to draw).
    """

    name: str
    label: str
    unit: str
    count: int

    def text(self) -> str:
        unit = "" if self.unit in ("", "1") else f" ({self.unit})"
        return f"{self.label}{unit}"


def value_choices(arc, point: str) -> list[ValueChoice]:
    """The standard values and the bands of the plan in force of a point, in that order.

    Parameters
    ----------
    arc : Archive
    point : str
        ``"Site/Machine/Point"``.

    Returns
    -------
    list of ValueChoice
        Standard values present in the value table, then each band of the plan in force
        whose values are stored.

    Raises
    ------
    InputError
        An unknown point.
    """
    arc.point(point)
    rows = arc.value_rows(point)
    out = []

    def count(name: str) -> int:
        col = rows.get(name) if rows else None
        return int(np.isfinite(np.asarray(col, dtype=float)).sum()) if col is not None else 0

    for name in STANDARD_VALUES:
        if rows and name in rows:
            out.append(ValueChoice(name, value_label(name), VALUE_UNITS[name], count(name)))
    plan = plan_in_force(arc, point)
    for band in plan.bands if plan is not None else ():
        name = BAND_PREFIX + band.name
        if rows and name in rows:
            out.append(ValueChoice(name, value_label(name), band_unit(band), count(name)))
    return out


@dataclass
class TrendSet:
    """The trends of one point drawn together.

    Attributes
    ----------
    point : str
    choices : list of ValueChoice
        Everything the picker offers for the point.
    trends : list of TrendData
        The values asked for that could be read, in the order asked.
    problems : list of (str, str)
        ``(value, message)`` of each value that could not be read.
    """

    point: str
    choices: list[ValueChoice]
    trends: list[TrendData] = field(default_factory=list)
    problems: list[tuple[str, str]] = field(default_factory=list)


def load_trends(arc, point: str, values: list[str], *, forecast: bool = True,
                fallback: str | None = DEFAULT_VALUE,
                progress: Callable[[int, int, str], None] | None = None,
                cancel: Callable[[], bool] | None = None) -> TrendSet:
    """Read the value choices of a point and the trends of ``values``.

    Parameters
    ----------
    arc : Archive
    point : str
    values : list of str
        Value names; those the point does not offer are skipped (not an error: the
        picker remembers choices across points).
    forecast : bool, keyword-only
        Forecast the alert and danger dates of each value.
    fallback : str or None, keyword-only
        Shown when the point offers none of ``values``.
    progress, cancel : callables, keyword-only
        The job's progress and cancel (raises :class:`app.jobs.Cancelled`).

    Returns
    -------
    TrendSet
    """
    choices = value_choices(arc, point)
    offered = {c.name for c in choices}
    wanted = list(dict.fromkeys(v for v in values if v in offered))
    if not wanted and fallback in offered:
        wanted = [fallback]
    out = TrendSet(point=point, choices=choices)
    for i, value in enumerate(wanted):
        if cancel is not None and cancel():
            raise Cancelled("trend stopped")
        if progress is not None:
            progress(i, len(wanted), value_label(value))
        try:
            out.trends.append(trend(arc, point, value, forecast=forecast))
        except EngineError as exc:      # one value's problem must not hide the others
            out.problems.append((value, str(exc)))
    if progress is not None:
        progress(len(wanted), len(wanted), "")
    return out


# -- display units ------------------------------------------------------------------------
def display_unit(unit_text: str, system: str) -> tuple[float, str]:
    """Factor and unit text to show a value stored in ``unit_text`` in a unit system.

    Parameters
    ----------
    unit_text : str
        As the engine writes it, e.g. ``"mm/s RMS"``, ``"g 0-peak"``, ``"1"``.
    system : str
        ``"SI"`` or ``"US"`` (the preference ``view/units``).

    Returns
    -------
    (factor, text)
        Multiply stored values by ``factor``; velocities become in/s in the US system
        (1 in = 25.4 mm exactly, via :func:`engine.units.scale_factor`); other units are
        left as they are.
    """
    symbol, _, rest = unit_text.partition(" ")
    if system == "US" and symbol == "mm/s":
        return scale_factor("mm/s", "in/s"), f"in/s {rest}".strip()
    return 1.0, unit_text


# -- forecast readout ---------------------------------------------------------------------
def date_text(t_s: float) -> str:
    """A time (s since 1970 UTC) as ``YYYY-MM-DD``; ``"—"`` for NaN."""
    if not math.isfinite(t_s):
        return "—"
    return datetime.fromtimestamp(t_s, UTC).strftime("%Y-%m-%d")


def time_text(t_s: float) -> str:
    """A time (s since 1970 UTC) as ``YYYY-MM-DD HH:MM UTC``."""
    return datetime.fromtimestamp(t_s, UTC).strftime("%Y-%m-%d %H:%M UTC")


def level_date_text(date_s: float, low_s: float, high_s: float) -> str:
    """``2026-12-09 (12-08 to 12-11)``, the date a level is expected with its interval."""
    if not math.isfinite(date_s):
        return "not expected"
    if math.isfinite(low_s) and math.isfinite(high_s):
        return f"{date_text(date_s)} (90 % {date_text(low_s)} to {date_text(high_s)})"
    if math.isfinite(low_s):
        return f"{date_text(date_s)} (90 %: from {date_text(low_s)})"
    return date_text(date_s)


def forecast_line(td: TrendData) -> str:
    """One line for the plot: model and the expected alert and danger dates."""
    f = td.forecast
    if f is None:
        return ""
    if f.status != "forecast":
        return f"Forecast: {f.status}"
    parts = [f"Forecast ({f.model} fit of {f.points_used} runs)"]
    finite = td.values[np.isfinite(td.values)]
    last = float(finite[-1]) if finite.size else math.nan
    for kind in ("alert", "danger"):
        level = getattr(td, kind)
        if level is None:
            continue
        if last >= level:
            parts.append(f"{kind} reached")
        else:
            parts.append(f"{kind} " + level_date_text(getattr(f, f"{kind}_date_s"),
                                                      getattr(f, f"{kind}_low_s"),
                                                      getattr(f, f"{kind}_high_s")))
    return " · ".join(parts)


def state_counts(td: TrendData) -> dict[str, int]:
    """How many runs of the trend are in each state, in the order first met."""
    out: dict[str, int] = {}
    for s in td.states:
        out[s] = out.get(s, 0) + 1
    return out
