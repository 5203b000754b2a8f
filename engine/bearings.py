"""Rolling-element bearing defect frequencies from the bearing's geometry.

A bearing of ``n`` rolling elements of diameter ``d`` on a pitch circle of diameter
``D``, with contact angle ``α``, inner ring turning with the shaft and outer ring fixed,
has these characteristic frequencies as multiples (orders) of shaft speed ([1]_)::

    FTF  = ½ · (1 − d/D · cos α)                 cage (fundamental train)
    BPFO = n/2 · (1 − d/D · cos α)               ball pass, outer race
    BPFI = n/2 · (1 + d/D · cos α)               ball pass, inner race
    BSF  = D/(2d) · (1 − (d/D · cos α)²)          ball spin

A defect on a rolling element strikes both races once per spin, so its strongest line
is usually at 2 × BSF (the "rolling element" line of bearing tables).  From the
formulas, BPFO + BPFI = n and BPFO = n · FTF exactly.

The values are kinematic: real bearings slip by 1–2 %, so measured lines sit a little
off these values ([2]_).

Each defect also carries typical sidebands ([2]_): an inner-race defect turns with the
shaft through the load zone, so BPFI is modulated at shaft speed (BPFI ± n × 1×); a
rolling-element defect is carried by the cage, so BSF is modulated at FTF
(BSF ± n × FTF); an outer-race defect on a fixed ring under a fixed load usually shows
no sidebands.

References
----------
.. [1] T. A. Harris, M. N. Kotzalas, *Rolling Bearing Analysis* (5th ed.), CRC Press,
   2006 — kinematics of rolling bearings.
.. [2] R. B. Randall, J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   Mechanical Systems and Signal Processing 25:485–520, 2011.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import asdict, dataclass

from .errors import InputError
from .validate import require_positive

#: Length units a geometry may be given in (only the ratio d/D matters).
LENGTH_UNITS = ("mm", "in", "m")
#: Largest contact angle accepted, degrees (angular-contact bearings rarely exceed 40°;
#: 60° leaves room for thrust designs, common practice).
MAX_CONTACT_ANGLE_DEG = 60.0
#: Defect families in the order markers are returned.
FAMILIES = ("FTF", "BSF", "BPFO", "BPFI")

_MINUS = "\u2212"  # the minus sign, as printed in labels ("BPFI−1×")


@dataclass(frozen=True)
class BearingGeometry:
    """Geometry of a rolling-element bearing.

    Attributes
    ----------
    label : str
        A name for the bearing, shown in messages and on markers.
    elements : int
        Number of rolling elements (balls or rollers), at least 3.
    element_diameter : float
        Rolling-element diameter ``d``, in ``unit``.
    pitch_diameter : float
        Pitch-circle diameter ``D``, in ``unit``; larger than ``d``.
    contact_angle_deg : float
        Contact angle ``α``, degrees, 0 … 60.
    unit : str
        Length unit of the diameters: ``"mm"``, ``"in"`` or ``"m"``.

    Raises
    ------
    InputError
        When a field is out of range; the message names the bearing and the field.
    """

    label: str
    elements: int
    element_diameter: float
    pitch_diameter: float
    contact_angle_deg: float = 0.0
    unit: str = "mm"

    def __post_init__(self) -> None:
        who = f"bearing {self.label!r}"
        n = self.elements
        if isinstance(n, bool) or not isinstance(n, numbers.Integral) or n < 3:
            raise InputError(f"{who}: elements must be a whole number of at least 3, "
                             f"got {n!r}")
        d = require_positive(self.element_diameter, "element_diameter", source=who)
        big_d = require_positive(self.pitch_diameter, "pitch_diameter", source=who)
        if d >= big_d:
            raise InputError(f"{who}: element_diameter ({d:g}) must be smaller than "
                             f"pitch_diameter ({big_d:g})")
        try:
            angle = float(self.contact_angle_deg)
        except (TypeError, ValueError):
            raise InputError(f"{who}: contact_angle_deg must be a number of degrees, "
                             f"got {self.contact_angle_deg!r}") from None
        if not (0.0 <= angle <= MAX_CONTACT_ANGLE_DEG):
            raise InputError(f"{who}: contact_angle_deg must be between 0 and "
                             f"{MAX_CONTACT_ANGLE_DEG:g} degrees, got "
                             f"{self.contact_angle_deg!r}")
        if self.unit not in LENGTH_UNITS:
            raise InputError(f"{who}: unit must be one of {', '.join(LENGTH_UNITS)}, "
                             f"got {self.unit!r}")

    @property
    def ratio(self) -> float:
        """``d/D · cos α``, the dimensionless number all defect orders depend on."""
        return (float(self.element_diameter) / float(self.pitch_diameter)
                * math.cos(math.radians(float(self.contact_angle_deg))))


@dataclass(frozen=True)
class DefectOrders:
    """Defect frequencies as multiples of shaft speed (inner ring turning, outer fixed).

    Attributes
    ----------
    ftf : float
        Cage (fundamental train) frequency, orders.
    bsf : float
        Ball (rolling-element) spin frequency, orders.
    bsf2 : float
        Twice BSF, orders — the usual line of a rolling-element defect.
    bpfo : float
        Ball pass frequency, outer race, orders.
    bpfi : float
        Ball pass frequency, inner race, orders.
    """

    ftf: float
    bsf: float
    bsf2: float
    bpfo: float
    bpfi: float

    def as_dict(self) -> dict[str, float]:
        """The orders keyed by field name (``ftf``, ``bsf``, ``bsf2``, ``bpfo``, ``bpfi``)."""
        return asdict(self)


@dataclass(frozen=True)
class Marker:
    """A frequency to mark on a spectrum.

    Attributes
    ----------
    frequency_hz : float
        Where the marker goes, Hz.
    label : str
        Short text such as ``"BPFO"``, ``"2×BPFO"``, ``"BPFI−1×"``, ``"BSF+1×FTF"``.
    kind : str
        ``"harmonic"`` (the defect line or one of its harmonics) or ``"sideband"``.
    family : str
        The defect the marker belongs to: one of :data:`FAMILIES`.
    """

    frequency_hz: float
    label: str
    kind: str
    family: str


def defect_orders(geometry: BearingGeometry) -> DefectOrders:
    """Defect frequencies of a bearing as multiples of shaft speed.

    Parameters
    ----------
    geometry : BearingGeometry

    Returns
    -------
    DefectOrders
        FTF, BSF, 2×BSF, BPFO and BPFI in orders (cycles per shaft revolution), for an
        inner ring turning with the shaft and a fixed outer ring.

    Notes
    -----
    With ``ρ = d/D · cos α`` and ``n`` elements ([1]_):
    ``FTF = (1 − ρ)/2``, ``BPFO = n(1 − ρ)/2``, ``BPFI = n(1 + ρ)/2``,
    ``BSF = D/(2d) · (1 − ρ²)``.

    Examples
    --------
    The drive-end bearing of the Case Western Reserve University Bearing Data Center
    rig (9 balls of 0.3126 in on a 1.537 in pitch circle) has BPFO ≈ 3.5848:

    >>> g = BearingGeometry("drive end", 9, 0.3126, 1.537, unit="in")
    >>> round(defect_orders(g).bpfo, 4)
    3.5848
    """
    if not isinstance(geometry, BearingGeometry):
        raise InputError(f"geometry must be a BearingGeometry, got {type(geometry).__name__}")
    rho = geometry.ratio
    n = int(geometry.elements)
    d = float(geometry.element_diameter)
    big_d = float(geometry.pitch_diameter)
    bsf = big_d / (2.0 * d) * (1.0 - rho * rho)
    return DefectOrders(
        ftf=0.5 * (1.0 - rho),
        bsf=bsf,
        bsf2=2.0 * bsf,
        bpfo=0.5 * n * (1.0 - rho),
        bpfi=0.5 * n * (1.0 + rho),
    )


def defect_frequencies_hz(geometry: BearingGeometry, rpm: float) -> dict[str, float]:
    """Defect frequencies in Hz at a shaft speed.

    Parameters
    ----------
    geometry : BearingGeometry
    rpm : float
        Shaft speed, rev/min (positive).

    Returns
    -------
    dict of str to float
        ``ftf``, ``bsf``, ``bsf2``, ``bpfo``, ``bpfi`` in Hz.

    Raises
    ------
    InputError
        When ``rpm`` is not a positive number.
    """
    shaft_hz = require_positive(rpm, "rpm", source=f"bearing {geometry.label!r}") / 60.0
    return {k: v * shaft_hz for k, v in defect_orders(geometry).as_dict().items()}


def _whole(value, name: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or value < minimum:
        raise InputError(f"defect markers: {name} must be a whole number of at least "
                         f"{minimum}, got {value!r}")
    return int(value)


def _harmonic_label(h: int, family: str) -> str:
    return family if h == 1 else f"{h}×{family}"


def defect_markers(
    geometry: BearingGeometry,
    shaft_hz: float,
    *,
    harmonics: int = 3,
    sidebands: int = 2,
) -> list[Marker]:
    """Markers for a bearing's defect lines, their harmonics and typical sidebands.

    Parameters
    ----------
    geometry : BearingGeometry
    shaft_hz : float
        Shaft speed, Hz (rev/s), positive.
    harmonics : int, keyword-only
        Harmonics of each defect line, counting the line itself (1 = the line only).
    sidebands : int, keyword-only
        Sideband pairs around each harmonic of the families that carry them
        (0 = none).

    Returns
    -------
    list of Marker
        Grouped by family in the order of :data:`FAMILIES`, then by harmonic; each
        harmonic is followed by its sidebands (``−1×``, ``+1×``, ``−2×``, …).

        * FTF: harmonics only.
        * BSF: harmonics of BSF, each with sidebands at ± n × FTF ("BSF−1×FTF"); the
          second harmonic is the "2×BSF" line of a rolling-element defect.
        * BPFO: harmonics only (a fixed outer race under a fixed load is not
          modulated, [2]_).
        * BPFI: harmonics, each with sidebands at ± n × shaft speed ("BPFI−1×").

        Markers that would fall at or below 0 Hz are left out.

    Raises
    ------
    InputError
        When ``shaft_hz`` is not positive or ``harmonics``/``sidebands`` are not whole
        numbers in range.
    """
    f_shaft = require_positive(shaft_hz, "shaft_hz", source=f"bearing {geometry.label!r}")
    n_h = _whole(harmonics, "harmonics", 1)
    n_sb = _whole(sidebands, "sidebands", 0)
    orders = defect_orders(geometry)
    base = {"FTF": orders.ftf, "BSF": orders.bsf, "BPFO": orders.bpfo, "BPFI": orders.bpfi}
    # The modulating frequency of each family's sidebands, in Hz, and its label suffix.
    carrier = {"BSF": (orders.ftf * f_shaft, "×FTF"), "BPFI": (f_shaft, "×")}
    markers: list[Marker] = []
    for family in FAMILIES:
        line_hz = base[family] * f_shaft
        for h in range(1, n_h + 1):
            centre = h * line_hz
            name = _harmonic_label(h, family)
            markers.append(Marker(centre, name, "harmonic", family))
            if family not in carrier:
                continue
            mod_hz, suffix = carrier[family]
            for k in range(1, n_sb + 1):
                for sign, text in ((-1.0, _MINUS), (1.0, "+")):
                    f = centre + sign * k * mod_hz
                    if f > 0.0:
                        markers.append(Marker(f, f"{name}{text}{k}{suffix}", "sideband",
                                              family))
    return markers
