"""Rules of alarm bands: which units, scales and edges fit each measure, and how a
band is read from plain data (a plan file's table).

Which unit fits which measure (our decision, checked by
:meth:`engine.alarms.plan.AlarmPlan.validate`):

=====================================  ==================================  ============
measure                                units                               scales
=====================================  ==================================  ============
``band_rms``, ``band_peak``            any vibration unit: g, m/s2, mm/s,  rms, peak, pp
                                       in/s, m/s, um, mm, mil, m
``overall``                            velocity only: mm/s, in/s, m/s      rms, peak, pp
``envelope_rms``, ``envelope_peak``    acceleration only: g, m/s2          rms, peak, pp
``defect``                             acceleration only: g, m/s2          rms, peak, pp
``crest_factor``, ``kurtosis``         ``"1"`` (dimensionless)             ``""``
=====================================  ==================================  ============

``overall`` is the ISO 20816 broadband velocity level, so an acceleration unit such as
g is refused for it: an overall acceleration level is a ``band_rms`` band in g.  The
peak and pp scales of RMS-type measures (band RMS, overall, envelope RMS) are the
sinusoid-equivalent values √2·RMS and 2√2·RMS, as in the trade's "derived peak".

Band edges: ``band_rms`` and ``band_peak`` need them; ``overall`` and the envelope
measures may have them (without, ``overall`` is the ISO broadband range 10–1000 Hz, or
2–1000 Hz at 600 rpm and below, see :func:`engine.levels.velocity_band_for`, and the
envelope measures take the whole envelope spectrum); ``defect``, ``crest_factor`` and
``kurtosis`` must have none.
"""

from __future__ import annotations

import math
import numbers

from ..errors import InputError
from ..units import ACCELERATION, DISPLACEMENT, VELOCITY, unit

MEASURES = ("band_rms", "band_peak", "overall", "envelope_rms", "envelope_peak",
            "defect", "crest_factor", "kurtosis")
BASES = ("hz", "order")
#: Defect frequencies a ``defect`` band may name (those of :mod:`engine.bearings`).
DEFECTS = ("ftf", "bsf", "bsf2", "bpfo", "bpfi")
#: Amplitude scales of spectral measures.
BAND_SCALES = ("rms", "peak", "pp")
DIMENSIONLESS = ("crest_factor", "kurtosis")
#: Quantities each measure may be expressed in (see the module notes).
MEASURE_QUANTITIES = {
    "band_rms": (ACCELERATION, VELOCITY, DISPLACEMENT),
    "band_peak": (ACCELERATION, VELOCITY, DISPLACEMENT),
    "overall": (VELOCITY,),
    "envelope_rms": (ACCELERATION,),
    "envelope_peak": (ACCELERATION,),
    "defect": (ACCELERATION,),
}
_EDGES_REQUIRED = ("band_rms", "band_peak")
_EDGES_FORBIDDEN = ("defect", "crest_factor", "kurtosis")
_ENVELOPE = ("envelope_rms", "envelope_peak")
#: Fields of :class:`engine.alarms.plan.Band`, in order.
BAND_FIELDS = ("name", "measure", "alert", "danger", "unit", "scale", "low", "high",
               "basis", "defect")


def finite_rpm(rpm) -> float | None:
    """``rpm`` as a positive finite float, or None when unknown (NaN, None, ≤ 0)."""
    try:
        r = float(rpm)
    except (TypeError, ValueError):
        return None
    return r if math.isfinite(r) and r > 0 else None


def is_number(value) -> bool:
    """True for a real number that is not a bool."""
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def check_band(b, *, fmax_hz, envelope_fmax_hz, rpm, source: str) -> None:
    """Check one band (see :meth:`engine.alarms.plan.AlarmPlan.validate`).

    Raises
    ------
    InputError
        ``"<source>: band '<name>': <field> …"`` for the first problem found.
    """
    if not isinstance(b.name, str) or not b.name.strip():
        raise InputError(f"{source}: a band has no name (name {b.name!r}); give each band "
                         "a name")
    pre = f"{source}: band {b.name!r}:"

    def fail(text: str) -> None:
        raise InputError(f"{pre} {text}")

    if b.measure not in MEASURES:
        fail(f"measure {b.measure!r} is not known; expected one of {', '.join(MEASURES)}")
    if b.basis not in BASES:
        fail(f"basis {b.basis!r} is not known; expected one of {', '.join(BASES)}")
    for key in ("alert", "danger"):
        v = getattr(b, key)
        if not is_number(v) or not math.isfinite(v) or v <= 0:
            fail(f"{key} must be a positive number, got {v!r}")
    if not b.alert < b.danger:
        fail(f"alert {b.alert:g} must be below danger {b.danger:g}")
    _check_unit(b, fail, source)
    if b.measure == "defect":
        if b.defect not in DEFECTS:
            fail(f"defect {b.defect!r} is not known; expected one of {', '.join(DEFECTS)}")
    elif b.defect:
        fail(f"defect {b.defect!r} is only used by measure defect; leave it empty")
    _check_edges(b, fail, fmax_hz=fmax_hz, envelope_fmax_hz=envelope_fmax_hz, rpm=rpm)


def _check_unit(b, fail, source: str) -> None:
    if b.measure in DIMENSIONLESS:
        if b.unit != "1":
            fail(f"unit {b.unit!r} does not fit measure {b.measure}; it is a ratio, unit "
                 "must be \"1\"")
        if b.scale != "":
            fail(f"scale {b.scale!r} does not fit measure {b.measure}; scale must be \"\"")
        return
    if not isinstance(b.unit, str):
        fail(f"unit must be a unit symbol, got {b.unit!r}")
    if b.unit == "1":
        fail(f"unit \"1\" is only for crest_factor and kurtosis; measure {b.measure} needs "
             "a vibration unit")
    q = unit(b.unit, source=f"{source}: band {b.name!r}").quantity
    allowed = MEASURE_QUANTITIES[b.measure]
    if q not in allowed:
        fail(f"unit {b.unit!r} ({q}) does not fit measure {b.measure}; expected "
             f"{' or '.join(allowed)}")
    if b.scale not in BAND_SCALES:
        fail(f"scale {b.scale!r} is not known; expected one of {', '.join(BAND_SCALES)}")


def _check_edges(b, fail, *, fmax_hz, envelope_fmax_hz, rpm) -> None:
    has = (b.low is not None, b.high is not None)
    if b.measure in _EDGES_FORBIDDEN:
        if any(has):
            fail(f"low/high are not used by measure {b.measure}; leave them empty")
        return
    if not any(has):
        if b.measure in _EDGES_REQUIRED:
            fail(f"measure {b.measure} needs band edges low and high")
        return
    if not all(has):
        fail(f"{'high' if has[0] else 'low'} is missing; give both edges or neither")
    for key in ("low", "high"):
        v = getattr(b, key)
        if not is_number(v) or not math.isfinite(v) or v < 0:
            fail(f"{key} must be a number ≥ 0, got {v!r}")
    if not b.low < b.high:
        fail(f"low {b.low:g} must be below high {b.high:g}")
    limit = envelope_fmax_hz if b.measure in _ENVELOPE else fmax_hz
    if limit is None:
        return
    what = "envelope Fmax" if b.measure in _ENVELOPE else "Fmax"
    edges = b.edges_hz(rpm if rpm is not None else math.nan)
    if edges is None:
        return  # an order band at an unknown speed: checked when the speed is known
    if edges[1] > float(limit) * (1.0 + 1e-9):
        where = (f"{b.high:g} orders ({edges[1]:g} Hz at {float(rpm):g} rpm)"
                 if b.basis == "order" else f"{b.high:g} Hz")
        fail(f"high {where} is above the {what} of {float(limit):g} Hz")


def text_field(value, key: str, source: str, *, required: bool = False) -> str:
    """``value`` as text ("" for None unless required), or InputError naming ``key``."""
    if value is None and not required:
        return ""
    if not isinstance(value, str) or (required and not value.strip()):
        raise InputError(f"{source}: {key} must be a non-empty text, got {value!r}"
                         if required else f"{source}: {key} must be text, got {value!r}")
    return value


_BAND_TEXT = ("name", "measure", "unit", "scale", "basis", "defect")


def band_fields(d, index: int, source: str) -> dict:
    """Keyword arguments of a Band from one plan-file table (types checked, names
    made canonical); InputError naming the band (or its position) and the field."""
    label = f"band #{index + 1}"
    if isinstance(d, dict) and isinstance(d.get("name"), str) and d["name"].strip():
        label = f"band {d['name']!r}"
    if not isinstance(d, dict):
        raise InputError(f"{source}: {label}: must be a table/object, got {type(d).__name__}")
    unknown = sorted(set(d) - set(BAND_FIELDS))
    if unknown:
        raise InputError(f"{source}: {label}: unknown field {unknown[0]!r}; expected "
                         + ", ".join(BAND_FIELDS))
    for key in ("name", "measure", "alert", "danger"):
        if key not in d:
            raise InputError(f"{source}: {label}: {key} is missing")
    kw = {}
    for key, value in d.items():
        if key in _BAND_TEXT:
            if not isinstance(value, str):
                raise InputError(f"{source}: {label}: {key} must be text, got {value!r}")
            kw[key] = value.strip() if key != "name" else value
        elif value is None and key in ("low", "high"):
            kw[key] = None
        elif is_number(value):
            kw[key] = float(value)
        else:
            raise InputError(f"{source}: {label}: {key} must be a number, got {value!r}")
    unit_text = kw.get("unit", "mm/s")
    if unit_text != "1":
        kw["unit"] = unit(unit_text, source=f"{source}: {label}").symbol
    kw["measure"] = kw["measure"].lower()
    for key in ("basis", "defect", "scale"):
        if key in kw:
            kw[key] = kw[key].lower()
    return kw
