"""The alarm plan as a table: one row per band (name, measure, basis, edges, unit, scale,
alert, danger, defect) and the band's value in the run shown, and the conversions
between a band and the texts of its row.

A cell that cannot be read (a letter where a number belongs) is kept as typed and
shaded by the editor; :func:`located` finds the cell a validation message is about.
"""

from __future__ import annotations

import math
import re
from dataclasses import replace

from PySide6.QtWidgets import QWidget

from engine.alarms.plan import BAND_SCALES, BASES, DEFECTS, DIMENSIONLESS, MEASURES, Band
from engine.units import UNITS, VOLTAGE

from .setup_widgets import Column, EditTable, number_text

#: Columns that hold Band fields (the table's other column is the run's value).
FIELD_KEYS = ("name", "measure", "basis", "low", "high", "unit", "scale", "alert", "danger",
              "defect")
_BAND_RE = re.compile(r"band '((?:[^'\\]|\\.)*)'|band \"((?:[^\"\\]|\\.)*)\"")


def unit_choices() -> list[str]:
    return [s for s, u in UNITS.items() if u.quantity != VOLTAGE] + ["1"]


def plan_columns() -> list[Column]:
    return [
        Column("name", "Band", "Name of the band (unique in the plan)"),
        Column("measure", "Measure", "band_rms, band_peak: spectrum band; overall: ISO "
               "broadband velocity; envelope_…: envelope spectrum; defect: a bearing defect "
               "line; crest_factor, kurtosis: of the waveform", lambda: MEASURES),
        Column("basis", "Basis", "hz: edges in Hz; order: edges in orders of the point's "
               "shaft, so the band follows speed", lambda: BASES),
        Column("low", "Low", "Lower edge (Hz or orders); empty for none"),
        Column("high", "High", "Upper edge (Hz or orders); empty for none"),
        Column("unit", "Unit", "Unit of the levels", unit_choices, editable_choice=True),
        Column("scale", "Scale", "rms, peak or pp (empty for crest factor and kurtosis)",
               lambda: BAND_SCALES + ("",)),
        Column("alert", "Alert", "Alert level, in the band's unit and scale"),
        Column("danger", "Danger", "Danger level, above alert"),
        Column("defect", "Defect", "For measure defect: which bearing line",
               lambda: ("",) + DEFECTS),
        Column("value", "This run", "The band's value in the run drawn, measured for the "
               "plan as edited", read_only=True),
    ]


def band_row(b: Band) -> dict[str, str]:
    """A band as the texts of its table row."""
    return {"name": b.name, "measure": b.measure, "basis": b.basis,
            "low": number_text(b.low), "high": number_text(b.high), "unit": b.unit,
            "scale": b.scale, "alert": number_text(b.alert, 4),
            "danger": number_text(b.danger, 4),
            "defect": b.defect}


def with_measure(b: Band, measure: str) -> Band:
    """``b`` with another measure, its unit, scale and edges made to fit it (a unit of
    the measure's quantity, no edges where the measure takes none)."""
    if measure in DIMENSIONLESS:
        return replace(b, measure=measure, unit="1", scale="", low=None, high=None,
                       basis="hz", defect="")
    unit_, scale = b.unit, b.scale or "rms"
    if measure in ("envelope_rms", "envelope_peak", "defect"):
        unit_ = unit_ if unit_ in ("g", "m/s2") else "g"
    elif measure == "overall":
        unit_ = unit_ if unit_ in ("mm/s", "in/s", "m/s") else "mm/s"
    elif unit_ == "1":
        unit_ = "mm/s"
    low, high = b.low, b.high
    if measure == "defect":
        low = high = None
    return replace(b, measure=measure, unit=unit_, scale=scale, low=low, high=high,
                   defect=(b.defect or "bpfo") if measure == "defect" else "")


def located(message: str, names: list[str]) -> tuple[int, str] | None:
    """(row, column key) of the band and field a validation message is about."""
    m = _BAND_RE.search(message)
    if m is None:
        return None
    name = m.group(1) if m.group(1) is not None else m.group(2)
    if name not in names:
        return None
    rest = message[m.end():]
    found = [(rest.find(k), k) for k in FIELD_KEYS if re.search(rf"\b{k}\b", rest)]
    return names.index(name), (min(found)[1] if found else "name")


class PlanTable(EditTable):
    """The table of a plan's bands (see :func:`plan_columns`)."""

    def __init__(self, parent: QWidget | None = None):
        super().__init__("Bands", plan_columns(), parent, add_text="Add band",
                         remove_text="Remove band")

    def set_bands(self, bands: list[Band]) -> None:
        self.set_rows([band_row(b) for b in bands])

    def set_band(self, row: int, b: Band) -> None:
        """Show ``b`` in ``row`` (without emitting ``edited``)."""
        for k, v in band_row(b).items():
            if self.text(row, k) != v:
                self.set_text(row, k, v)

    def set_values(self, values: list[float | None], units: list[str]) -> None:
        for i, (v, u) in enumerate(zip(values, units)):
            text = "—" if v is None or not math.isfinite(v) else \
                f"{v:.3g}{'' if u == '1' else ' ' + u}"
            self.set_text(i, "value", text)
