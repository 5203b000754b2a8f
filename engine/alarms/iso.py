"""ISO 20816-3 zone boundaries and the generic alarm plan built from them.

ISO 20816-3 judges industrial machines above 15 kW by the broadband velocity RMS
(10–1000 Hz, or 2–1000 Hz at 600 rpm and below, ISO 20816-1) measured on the bearing
housings, in four zones:

* **A** — vibration of newly commissioned machines;
* **B** — acceptable for unrestricted long-term operation;
* **C** — not acceptable for long-term operation; the machine may run for a limited
  time until a suitable opportunity for remedial action;
* **D** — severe enough to cause damage to the machine.

The boundaries depend on the machine group — group 1: large machines, rated power
above 300 kW (electrical machines with shaft height of 315 mm and more); group 2:
medium machines, 15 kW to 300 kW (shaft height 160 mm to 315 mm) — and on whether the
support is rigid or flexible in the direction measured.

The group definitions above and the values of :data:`ZONE_BOUNDARIES_MM_S` are from
memory of ISO 20816-3 and its tables; the user must confirm them against their copy of
the standard.  They are generic:
the machine manufacturer's limits, the site's standards and local codes take
precedence, and decisions to run or stop a machine rest with qualified personnel.

Zones are closed below: a value at a boundary belongs to the zone above it (at the
B/C boundary the machine is in zone C), so that zone C of :func:`zone_of` is exactly
the alert state of :func:`default_plan` and zone D its danger state.

References
----------
.. [1] ISO 20816-3:2022, Mechanical vibration — Measurement and evaluation of machine
   vibration — Part 3: Industrial machinery with a power rating above 15 kW and
   operating speeds between 120 r/min and 30 000 r/min.
.. [2] ISO 20816-1:2016, Part 1: General guidelines.
"""

from __future__ import annotations

import math
import numbers

from ..errors import InputError
from .plan import AlarmPlan, Band

#: Zone boundaries A/B, B/C, C/D of velocity RMS in mm/s by (group, foundation)
#: (from memory of ISO 20816-3's tables; confirm against your copy).
ZONE_BOUNDARIES_MM_S = {(2, "rigid"): (1.4, 2.8, 4.5), (2, "flexible"): (2.3, 4.5, 7.1),
                        (1, "rigid"): (2.3, 4.5, 7.1), (1, "flexible"): (3.5, 7.1, 11.0)}
GROUPS = (1, 2)
FOUNDATIONS = ("rigid", "flexible")
ZONES = ("A", "B", "C", "D")
#: Short meaning of each zone, in our own words (see the module notes).
ZONE_MEANING = {
    "A": "newly commissioned condition",
    "B": "acceptable for unrestricted long-term operation",
    "C": "not acceptable for long-term operation; plan remedial action",
    "D": "severe enough to cause damage",
}
#: Note carried by every default plan.
GENERIC_NOTE = ("Generic limits from ISO 20816-3 (boundary values from memory of the "
                "standard's tables; confirm them against your copy). The machine "
                "manufacturer's limits and the site's standards take precedence; "
                "decisions to run or stop a machine rest with qualified personnel.")
#: Name of the band of a default plan.
OVERALL_BAND = "overall velocity"


def _group(group) -> int:
    if isinstance(group, bool) or not isinstance(group, numbers.Integral) or group not in GROUPS:
        raise InputError(f"ISO 20816-3: group must be 1 (above 300 kW) or 2 (15–300 kW), "
                         f"got {group!r}")
    return int(group)


def _foundation(foundation) -> str:
    key = str(foundation).strip().lower()
    if key not in FOUNDATIONS:
        raise InputError(f"ISO 20816-3: foundation must be rigid or flexible, got "
                         f"{foundation!r}")
    return key


def zone_boundaries(group: int, foundation: str) -> tuple[float, float, float]:
    """Boundaries A/B, B/C and C/D for a machine group and foundation.

    Parameters
    ----------
    group : int
        1 (large machines, above 300 kW) or 2 (medium machines, 15–300 kW).
    foundation : str
        ``rigid`` or ``flexible`` (case ignored).

    Returns
    -------
    (ab, bc, cd) : tuple of float
        Velocity RMS, mm/s (from memory of ISO 20816-3's tables).

    Raises
    ------
    InputError
        An unknown group or foundation.
    """
    return ZONE_BOUNDARIES_MM_S[(_group(group), _foundation(foundation))]


def zone_of(velocity_mm_s: float, boundaries) -> str:
    """ISO 20816 zone of a broadband velocity RMS.

    Parameters
    ----------
    velocity_mm_s : float
        Broadband velocity RMS, mm/s.
    boundaries : (ab, bc, cd)
        Increasing positive boundaries, mm/s (see :func:`zone_boundaries`).

    Returns
    -------
    str
        ``"A"``, ``"B"``, ``"C"`` or ``"D"``; ``""`` for NaN (no value).  A value at a
        boundary is in the zone above it.

    Raises
    ------
    InputError
        A negative or infinite velocity, or boundaries that are not three increasing
        positive numbers.
    """
    try:
        ab, bc, cd = (float(b) for b in boundaries)
    except (TypeError, ValueError):
        raise InputError(f"zone boundaries must be three numbers (A/B, B/C, C/D in mm/s), "
                         f"got {boundaries!r}") from None
    if not (0 < ab < bc < cd and math.isfinite(cd)):
        raise InputError(f"zone boundaries must increase and be positive, got "
                         f"{ab:g}, {bc:g}, {cd:g} mm/s")
    try:
        v = float(velocity_mm_s)
    except (TypeError, ValueError):
        raise InputError(f"velocity must be a number of mm/s, got {velocity_mm_s!r}") from None
    if math.isnan(v):
        return ""
    if v < 0 or math.isinf(v):
        raise InputError(f"velocity must be a finite RMS value ≥ 0 mm/s, got {v!r}")
    if v < ab:
        return "A"
    if v < bc:
        return "B"
    return "C" if v < cd else "D"


def default_plan(group: int, foundation: str) -> AlarmPlan:
    """The generic alarm plan of ISO 20816-3 for a machine group and foundation.

    One band, ``"overall velocity"``: the ISO broadband velocity RMS in mm/s
    (10–1000 Hz; 2–1000 Hz at 600 rpm and below), alert at the B/C boundary, danger at
    the C/D boundary.

    Parameters
    ----------
    group : int
        1 or 2 (see :func:`zone_boundaries`).
    foundation : str
        ``rigid`` or ``flexible``.

    Returns
    -------
    AlarmPlan
        Origin ``"ISO 20816-3 group G, FOUNDATION (generic)"``; its note says the limits
        are generic and the manufacturer's limits and site standards take precedence.
    """
    g, f = _group(group), _foundation(foundation)
    _, bc, cd = ZONE_BOUNDARIES_MM_S[(g, f)]
    label = f"ISO 20816-3 group {g}, {f}"
    band = Band(name=OVERALL_BAND, measure="overall", alert=bc, danger=cd, unit="mm/s",
                scale="rms", basis="hz")
    plan = AlarmPlan(name=label, bands=(band,), origin=f"{label} (generic)", note=GENERIC_NOTE)
    plan.validate(source=label)
    return plan
