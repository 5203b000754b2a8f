"""Machine kinematics: shafts, speed ratios, and the frequencies a machine can produce.

A :class:`MachineModel` holds a machine's shafts with their speeds relative to the
reference shaft (the motor, ratio 1.0), the gear pairs and belt drives that link them,
the blade or vane rows, the rolling bearings and, for motors, the supply.
:func:`sources` lists every frequency the model implies at a speed, and
:func:`label_peaks` ties measured spectrum peaks to them.

Kinematics used (first principles unless cited):

* a shaft of ratio ``r`` turns at ``r · rpm / 60`` Hz; its orders are multiples of that;
* a gear pair meshes at ``teeth × shaft speed`` — the same on both gears, so the driven
  shaft turns at ``driver_teeth / driven_teeth`` of the driver;
* a belt drive (no slip) turns the driven pulley at ``d_driver / d_driven`` of the
  driver; the belt passes a point at ``π · d_driver · n_driver / L`` (``n`` in rev/s,
  ``L`` the belt length in the diameters' unit);
* a row of ``z`` blades or vanes passes a point ``z`` times a revolution;
* an induction motor of ``p`` poles on a supply of ``f`` Hz has a synchronous speed of
  ``120 f / p`` rpm; the slip frequency times ``p`` is the pole-pass frequency, and
  magnetic forces act at twice the line frequency (common practice);
* bearing defect frequencies come from :mod:`engine.bearings` ([1]_, [2]_).

References
----------
.. [1] T. A. Harris, M. N. Kotzalas, *Rolling Bearing Analysis* (5th ed.), CRC Press,
   2006.
.. [2] R. B. Randall, J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   Mechanical Systems and Signal Processing 25:485–520, 2011.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import MISSING, asdict, dataclass, field
from typing import ClassVar, Sequence

import numpy as np

from .bearings import BearingGeometry, defect_markers
from .errors import InputError, where
from .peaks import Peak

#: Kinds of source, in the order used to break ties when sorting by frequency.
SOURCE_KINDS = ("order", "bearing", "gear_mesh", "sideband", "blade_pass", "line", "belt")
#: Relative tolerance between a gear pair's tooth ratio and the shafts' typed ratios
#: (teeth are exact; ratios typed with four decimals are 1e-4 off).
GEAR_RATIO_TOLERANCE = 1e-3
#: Relative tolerance between a belt drive's diameter ratio and the shafts' ratios:
#: V-belts creep by 1–3 % under load (common practice).
BELT_RATIO_TOLERANCE = 0.03
MODEL_VERSION = 1  # format version of MachineModel.as_dict
_MINUS = "\u2212"


def _fail(path: str, name: str, expected: str, value) -> InputError:
    """``gears[0].driver_teeth must be …`` or ``machine model: poles must be …``."""
    sep = "." if path.endswith("]") or path[:1].isupper() else ": "
    return InputError(f"{path}{sep}{name} must be {expected}, got {value!r}")


def _text(value, path: str, name: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise _fail(path, name, "a non-empty name", value)
    return value.strip()


def _positive(value, path: str, name: str, *, optional: bool = False) -> float | None:
    if value is None and optional:
        return None
    if isinstance(value, bool) or not isinstance(value, numbers.Real) \
            or not math.isfinite(float(value)) or float(value) <= 0.0:
        raise _fail(path, name, "a positive number", value)
    return float(value)


def _whole(value, path: str, name: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or value < minimum:
        raise _fail(path, name, f"a whole number of at least {minimum}", value)
    return int(value)


class _Part:
    """Field checks shared by the parts of a model: ``_SPEC`` maps field → kind."""

    _SPEC: ClassVar[dict[str, str]] = {}

    def __post_init__(self) -> None:
        path = type(self).__name__
        for name, kind in self._SPEC.items():
            v = getattr(self, name)
            if kind == "name":
                v = _text(v, path, name)
            elif kind == "count":
                v = _whole(v, path, name, 1)
            elif kind == "geometry" and not isinstance(v, BearingGeometry):
                raise _fail(path, name, "a BearingGeometry", v)
            elif kind in ("size", "size?"):
                v = _positive(v, path, name, optional=kind == "size?")
            object.__setattr__(self, name, v)


class _Link(_Part):
    """A gear pair or belt drive: ``name`` is ``driver–driven``."""

    @property
    def name(self) -> str:
        return f"{self.driver_shaft}\u2013{self.driven_shaft}"


@dataclass(frozen=True)
class Shaft(_Part):
    """A shaft; ``ratio`` is its speed / the reference shaft's (the motor is 1.0), or
    ``None`` when a gear pair or belt drive from a shaft of known ratio gives it."""

    name: str
    ratio: float | None = None
    _SPEC: ClassVar = {"name": "name", "ratio": "size?"}


@dataclass(frozen=True)
class GearPair(_Link):
    """Two meshing gears: ``driver_teeth`` on ``driver_shaft`` drive ``driven_teeth``
    on ``driven_shaft``; the driven shaft turns at ``driver_teeth / driven_teeth``."""

    driver_shaft: str
    driven_shaft: str
    driver_teeth: int
    driven_teeth: int
    _SPEC: ClassVar = {"driver_shaft": "name", "driven_shaft": "name",
                       "driver_teeth": "count", "driven_teeth": "count"}

    @property
    def ratio(self) -> float:
        """Driven speed / driver speed."""
        return self.driver_teeth / self.driven_teeth


@dataclass(frozen=True)
class BeltDrive(_Link):
    """A belt from a pulley of ``driver_diameter`` to one of ``driven_diameter``.

    Pitch diameters and the optional ``belt_length`` share one length unit (mm by
    convention); only their ratios are used.
    """

    driver_shaft: str
    driven_shaft: str
    driver_diameter: float
    driven_diameter: float
    belt_length: float | None = None
    _SPEC: ClassVar = {"driver_shaft": "name", "driven_shaft": "name",
                       "driver_diameter": "size", "driven_diameter": "size",
                       "belt_length": "size?"}

    def __post_init__(self) -> None:
        super().__post_init__()
        # An open belt is 2C + π(D + d)/2 + (D − d)²/4C long, C > 0 the centre distance.
        least = math.pi * (self.driver_diameter + self.driven_diameter) / 2
        if self.belt_length is not None and self.belt_length <= least:
            raise _fail("BeltDrive", "belt_length", f"longer than π(driver_diameter + "
                        f"driven_diameter)/2 = {least:g}", self.belt_length)

    @property
    def ratio(self) -> float:
        """Driven speed / driver speed, without creep."""
        return self.driver_diameter / self.driven_diameter

    def belt_order(self) -> float | None:
        """Belt passes per driver revolution, ``π d_driver / L`` (None without a length)."""
        length = self.belt_length
        return None if length is None else math.pi * self.driver_diameter / length


@dataclass(frozen=True)
class BladeRow(_Part):
    """``count`` blades or vanes on ``shaft``; they pass at ``count ×`` shaft speed."""

    shaft: str
    count: int
    _SPEC: ClassVar = {"shaft": "name", "count": "count"}


@dataclass(frozen=True)
class BearingAt(_Part):
    """A rolling bearing of ``geometry`` on ``shaft``, called ``label`` (e.g. "pump DE")."""

    shaft: str
    geometry: BearingGeometry
    label: str
    _SPEC: ClassVar = {"shaft": "name", "geometry": "geometry", "label": "name"}


#: Fields of MachineModel that hold parts, and the class of each.
_PARTS = {"shafts": Shaft, "gears": GearPair, "belts": BeltDrive, "blades": BladeRow,
          "bearings": BearingAt}


@dataclass(frozen=True)
class MachineModel:
    """A machine's kinematic model.

    Attributes
    ----------
    shafts : tuple of Shaft
        At least one with a ratio; the others get theirs through gears and belts.
    gears, belts, blades, bearings : tuples of GearPair, BeltDrive, BladeRow, BearingAt
    line_frequency_hz : float or None
        Supply frequency of the motor, Hz (50 or 60 for mains).
    motor_shaft : str or None
        The motor's shaft, for the electrical sources.
    poles : int or None
        Motor poles (even), for the pole-pass frequency; needs ``line_frequency_hz``
        and ``motor_shaft``.

    Raises
    ------
    InputError
        A field out of range, an unknown or repeated name, a ratio that cannot be
        found or that gears and belts contradict; the message names the field.
    """

    shafts: tuple[Shaft, ...]
    gears: tuple[GearPair, ...] = ()
    belts: tuple[BeltDrive, ...] = ()
    blades: tuple[BladeRow, ...] = ()
    bearings: tuple[BearingAt, ...] = ()
    line_frequency_hz: float | None = None
    motor_shaft: str | None = None
    poles: int | None = None
    _ratios: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        p = "machine model"
        for name, cls in _PARTS.items():
            items = getattr(self, name)
            if isinstance(items, (str, bytes)) or not isinstance(items, Sequence):
                raise _fail(p, name, f"a list of {cls.__name__}", items)
            for i, item in enumerate(items):
                if not isinstance(item, cls):
                    raise _fail(p, f"{name}[{i}]", f"a {cls.__name__}", item)
            object.__setattr__(self, name, tuple(items))
        if not self.shafts:
            raise _fail(p, "shafts", "a list of at least one Shaft", list(self.shafts))
        names = [s.name for s in self.shafts]
        for i, n in enumerate(names):
            if n in names[:i]:
                raise InputError(f"{p}: shafts[{i}].name {n!r} is used twice")
        refs = [(f"{part}[{i}].{key}", getattr(item, key))
                for part in ("gears", "belts", "blades", "bearings")
                for i, item in enumerate(getattr(self, part))
                for key in ("driver_shaft", "driven_shaft", "shaft") if hasattr(item, key)]
        for where_, shaft in refs + [("motor_shaft", self.motor_shaft or names[0])]:
            if shaft not in names:
                raise InputError(f"{p}: {where_} {shaft!r} is not one of the shafts ("
                                 + ", ".join(names) + ")")
        for part in ("gears", "belts"):
            for i, item in enumerate(getattr(self, part)):
                if item.driver_shaft == item.driven_shaft:
                    raise InputError(f"{p}: {part}[{i}].driven_shaft must differ from "
                                     f"driver_shaft, both are {item.driver_shaft!r}")
        freq = _positive(self.line_frequency_hz, p, "line_frequency_hz", optional=True)
        object.__setattr__(self, "line_frequency_hz", freq)
        if self.poles is not None:
            poles = _whole(self.poles, p, "poles", 2)
            if poles % 2:
                raise _fail(p, "poles", "an even number (poles come in pairs)", self.poles)
            if freq is None or self.motor_shaft is None:
                raise InputError(f"{p}: poles needs line_frequency_hz and motor_shaft")
        object.__setattr__(self, "_ratios", _resolve_ratios(self, p))

    @property
    def ratios(self) -> dict[str, float]:
        """Every shaft's speed relative to the reference shaft, given or derived."""
        return dict(self._ratios)

    def ratio(self, shaft: str) -> float:
        """Speed of ``shaft`` / reference-shaft speed; InputError for an unknown shaft."""
        if shaft not in self._ratios:
            raise InputError(f"machine model: shaft {shaft!r} is not one of the shafts ("
                             + ", ".join(self._ratios) + ")")
        return self._ratios[shaft]

    def as_dict(self) -> dict:
        """A plain, JSON-able dict of the model (``from_dict`` reads it back)."""
        # asdict recurses, so a BearingAt's geometry becomes a plain dict too.
        out = {"version": MODEL_VERSION, **{name: [asdict(item) for item in getattr(self, name)]
                                            for name in _PARTS}}
        out.update(line_frequency_hz=self.line_frequency_hz, motor_shaft=self.motor_shaft,
                   poles=self.poles)
        return out

    @classmethod
    def from_dict(cls, data: dict, *, source: str | None = None) -> MachineModel:
        """A model from a dict as written by :meth:`as_dict`.

        ``source`` (keyword-only) names the file it came from in messages.  Raises
        InputError for unknown or missing keys or a failed check, naming ``source``
        and the field (``belts[0].driver_diameter``).
        """
        pre = f"{where(source)}machine model"
        if not isinstance(data, dict):
            raise InputError(f"{pre}: expected a dict, got {type(data).__name__}")
        _no_unknown(data, ["version", *_PARTS, "line_frequency_hz", "motor_shaft", "poles"], pre)
        if data.get("version", MODEL_VERSION) != MODEL_VERSION:
            raise InputError(f"{pre}: version must be {MODEL_VERSION}, got {data['version']!r}")
        parts = {}
        try:
            for name, item_cls in _PARTS.items():
                rows = data.get(name, [])
                if not isinstance(rows, list):
                    raise _fail("machine model", name, "a list", rows)
                parts[name] = [_item_from_dict(item_cls, row, f"machine model: {name}[{i}]")
                               for i, row in enumerate(rows)]
            return cls(**parts, line_frequency_hz=data.get("line_frequency_hz"),
                       motor_shaft=data.get("motor_shaft"), poles=data.get("poles"))
        except InputError as exc:
            raise InputError(f"{where(source)}{exc}") from None


def _no_unknown(data: dict, known: list[str], path: str) -> None:
    extra = sorted(set(data) - set(known))
    if extra:
        raise InputError(f"{path}: unknown field(s) {', '.join(map(repr, extra))}; expected "
                         + ", ".join(known))


def _item_from_dict(cls, row, path: str):
    """A part from its dict; messages name ``path`` (``machine model: gears[0]``)."""
    if not isinstance(row, dict):
        raise InputError(f"{path} must be a dict, got {row!r}")
    fields = cls.__dataclass_fields__
    _no_unknown(row, list(fields), path)
    for n, f in fields.items():
        if f.default is MISSING and n not in row:
            raise InputError(f"{path}.{n} is missing")
    values = dict(row)
    if cls is BearingAt:
        if not isinstance(values["geometry"], dict):
            raise InputError(f"{path}.geometry must be a dict of BearingGeometry fields, "
                             f"got {values['geometry']!r}")
        try:
            values["geometry"] = BearingGeometry(**values["geometry"])
        except (TypeError, InputError) as exc:
            raise InputError(f"{path}.geometry: {exc}") from None
    try:
        return cls(**values)
    except InputError as exc:  # "GearPair.driver_teeth …" → "…: gears[0].driver_teeth …"
        text = str(exc)
        raise InputError(path + text[len(cls.__name__):] if text.startswith(cls.__name__)
                         else f"{path}: {text}") from None


def _resolve_ratios(model: MachineModel, p: str) -> dict[str, float]:
    """Propagate ratios through gears and belts; check links against given ratios."""
    ratios = {s.name: s.ratio for s in model.shafts if s.ratio is not None}
    if not ratios:
        raise InputError(f"{p}: shafts: at least one needs a ratio (the reference has 1.0)")
    links = [(f"gears[{i}]", g, GEAR_RATIO_TOLERANCE) for i, g in enumerate(model.gears)]
    links += [(f"belts[{i}]", b, BELT_RATIO_TOLERANCE) for i, b in enumerate(model.belts)]
    changed = True
    while changed:
        changed = False
        for _, link, _ in links:
            a, b = link.driver_shaft, link.driven_shaft
            if a in ratios and b not in ratios:
                ratios[b], changed = ratios[a] * link.ratio, True
            elif b in ratios and a not in ratios:
                ratios[a], changed = ratios[b] / link.ratio, True
    for i, s in enumerate(model.shafts):
        if s.name not in ratios:
            raise InputError(f"{p}: shafts[{i}].ratio is not given and no gear or belt links "
                             f"{s.name!r} to a shaft of known ratio")
    for path, link, tol in links:
        a, b = link.driver_shaft, link.driven_shaft
        implied = ratios[a] * link.ratio
        if abs(ratios[b] - implied) > tol * implied:
            raise InputError(
                f"{p}: {path} gives {b!r} a ratio of {implied:.6g} ({a!r} at {ratios[a]:.6g} "
                f"× {link.ratio:.6g}) but the shafts say {ratios[b]:.6g}; they differ by more "
                f"than {tol:.1%}")
    return {s.name: ratios[s.name] for s in model.shafts}


@dataclass(frozen=True)
class Source:
    """A frequency the machine can produce.

    ``name`` is a label such as ``"pump 2×"``, ``"pump DE BPFO"`` or ``"gear mesh
    input–output"``; ``kind`` one of :data:`SOURCE_KINDS`; ``shaft`` the shaft it turns
    with (the modulating shaft for sidebands); ``order_of_reference`` the frequency in
    orders of the reference shaft; ``family`` its group: ``"running speed"``,
    ``"subharmonic"``, a bearing family (``"BPFO"`` …), ``"gear mesh"``, ``"blade
    pass"``, ``"belt"`` or ``"electrical"``.
    """

    name: str
    frequency_hz: float
    kind: str
    shaft: str | None
    order_of_reference: float
    family: str

    def as_dict(self) -> dict:
        return asdict(self)


def _times(k: int, text: str) -> str:
    return text if k == 1 else f"{k}×{text}"


def _signed(j: int) -> str:
    return f"{'+' if j > 0 else _MINUS}{abs(j)}×"


def sources(model: MachineModel, reference_rpm: float, *, harmonics: int = 3,
            sidebands: int = 2) -> list[Source]:
    """Every source frequency of a machine at a speed, sorted by frequency.

    Parameters
    ----------
    model : MachineModel
    reference_rpm : float
        Speed of the reference shaft (ratio 1.0), rev/min.
    harmonics : int, keyword-only
        Harmonics of each periodic source, counting the fundamental (1 … 20).
    sidebands : int, keyword-only
        Sideband pairs of the bearing families that carry them (see
        :func:`engine.bearings.defect_markers`); gear mesh always gets ±1× and ±2× of
        both shafts.

    Returns
    -------
    list of Source
        Per shaft 0.5× (``"subharmonic"``) and 1× … n×; per bearing its defect lines
        with harmonics and sidebands; per gear pair the mesh and harmonics with ±1×/±2×
        sidebands of both shafts; blade pass and belt frequency with harmonics; line
        and 2× line, and with poles the pole pass and the motor's 1× ± pole pass.
        Sources at or below 0 Hz are left out.

    Raises InputError when ``reference_rpm`` is not positive or an option out of range.

    Examples
    --------
    A 23-tooth pinion at 1480 rpm meshes at 23 × 1480 / 60 = 567.33 Hz:

    >>> m = MachineModel((Shaft("input", 1.0), Shaft("output")),
    ...                  gears=(GearPair("input", "output", 23, 67),))
    >>> [round(s.frequency_hz, 2) for s in sources(m, 1480.0, harmonics=1)
    ...  if s.kind == "gear_mesh"]
    [567.33]
    """
    if not isinstance(model, MachineModel):
        raise InputError(f"sources: model must be a MachineModel, got {type(model).__name__}")
    ref_hz = _positive(reference_rpm, "sources", "reference_rpm") / 60.0
    n_h = _whole(harmonics, "sources", "harmonics", 1)
    n_sb = _whole(sidebands, "sources", "sidebands", 0)
    if n_h > 20:
        raise _fail("sources", "harmonics", "at most 20", harmonics)
    hz = {name: r * ref_hz for name, r in model.ratios.items()}
    out: list[tuple[str, float, str, str | None, str]] = []  # name, Hz, kind, shaft, family
    for name, f in hz.items():
        out.append((f"{name} 0.5×", 0.5 * f, "order", name, "subharmonic"))
        out += [(f"{name} {k}×", k * f, "order", name, "running speed") for k in range(1, n_h + 1)]
    for b in model.bearings:
        for m in defect_markers(b.geometry, hz[b.shaft], harmonics=n_h, sidebands=n_sb):
            kind = "bearing" if m.kind == "harmonic" else "sideband"
            out.append((f"{b.label} {m.label}", m.frequency_hz, kind, b.shaft, m.family))
    for g in model.gears:
        mesh_hz = g.driver_teeth * hz[g.driver_shaft]
        stem = f"gear mesh {g.name}"
        for k in range(1, n_h + 1):
            centre = k * mesh_hz
            out.append((_times(k, stem), centre, "gear_mesh", g.driver_shaft, "gear mesh"))
            out += [(f"{_times(k, stem)} {_signed(j)} {shaft}", centre + j * hz[shaft],
                     "sideband", shaft, "gear mesh")
                    for shaft in (g.driver_shaft, g.driven_shaft) for j in (-2, -1, 1, 2)]
    for row in model.blades:
        f = row.count * hz[row.shaft]
        out += [(_times(k, f"blade pass {row.shaft}"), k * f, "blade_pass", row.shaft, "blade pass")
                for k in range(1, n_h + 1)]
    for belt in model.belts:
        order = belt.belt_order()
        if order is not None:
            f = order * hz[belt.driver_shaft]
            out += [(_times(k, f"belt {belt.name}"), k * f, "belt", belt.driver_shaft, "belt")
                    for k in range(1, n_h + 1)]
    if model.line_frequency_hz is not None:
        line, motor = model.line_frequency_hz, model.motor_shaft
        out += [("line", line, "line", motor, "electrical"),
                ("2× line", 2.0 * line, "line", motor, "electrical")]
        if model.poles is not None:
            slip_hz = 2.0 * line / model.poles - hz[motor]  # synchronous speed 120 f / p rpm
            pole_pass = model.poles * slip_hz
            if slip_hz > 0.0:
                out.append(("pole pass", pole_pass, "line", motor, "electrical"))
                out += [(f"{motor} 1× {'+' if j > 0 else _MINUS}pole pass",
                         hz[motor] + j * pole_pass, "sideband", motor, "electrical")
                        for j in (-1, 1)]
    result = [Source(name, float(f), kind, shaft, float(f / ref_hz), family)
              for name, f, kind, shaft, family in out if f > 0.0]
    return sorted(result, key=lambda s: (s.frequency_hz, SOURCE_KINDS.index(s.kind)))


@dataclass(frozen=True)
class LabelledPeak:
    """A peak and the sources it may come from, closest first.

    ``matches`` holds ``(source, error_hz)`` with ``error_hz = peak − source`` in Hz.
    """

    peak: Peak
    matches: list[tuple[Source, float]]

    @property
    def best(self) -> Source | None:
        """The closest source, or None when nothing matched."""
        return self.matches[0][0] if self.matches else None

    def as_dict(self) -> dict:
        return {"peak": self.peak.as_dict(),
                "matches": [{"source": s.as_dict(), "error_hz": e} for s, e in self.matches]}


def label_peaks(peaks: Sequence[Peak], sources: Sequence[Source], *,
                tolerance_hz: float | None = None,
                tolerance_pct: float = 1.0) -> list[LabelledPeak]:
    """Tie each peak to the sources within tolerance of it.

    Parameters
    ----------
    peaks : sequence of Peak
    sources : sequence of Source
        For example from :func:`engine.kinematics.sources`.
    tolerance_hz : float, keyword-only
        Smallest tolerance, Hz (for example the spectrum's line spacing).
    tolerance_pct : float, keyword-only
        Tolerance as a percentage of each source's frequency (1 %: speed uncertainty,
        common practice).  The tolerance of a source is the larger of the two.

    Returns
    -------
    list of LabelledPeak
        One per peak, in the order given; each peak's matches sorted by ``|error|``.
    """
    if tolerance_hz is not None:
        tolerance_hz = _positive(tolerance_hz, "label_peaks", "tolerance_hz")
    if isinstance(tolerance_pct, bool) or not isinstance(tolerance_pct, numbers.Real) \
            or not 0.0 <= tolerance_pct <= 50.0:
        raise _fail("label_peaks", "tolerance_pct", "a number from 0 to 50", tolerance_pct)
    src = list(sources)
    f_src = np.array([s.frequency_hz for s in src], dtype=float)
    tol, out = np.maximum(f_src * tolerance_pct / 100.0, tolerance_hz or 0.0), []
    for p in peaks:
        if not isinstance(p, Peak):
            raise InputError(f"label_peaks: peaks must hold Peak objects, got {p!r}")
        err = p.frequency_hz - f_src
        hit = np.flatnonzero(np.abs(err) <= tol)
        hit = hit[np.argsort(np.abs(err[hit]), kind="stable")]
        out.append(LabelledPeak(p, [(src[i], float(err[i])) for i in hit]))
    return out


def model_from_demo(machine) -> MachineModel:
    """The kinematic model of a machine (a ``DemoMachine``) of :mod:`engine.demo_plant`.

    Shafts and ratios come from the machine; each point's bearing sits on the point's
    shaft (one bearing per location); G-401 gets its 23/67 gear pair, F-201 its belt
    (180 mm motor pulley, fan pulley sized to the fan ratio, 2.4 m belt — the numbers
    behind ``demo_plant.BELT_ORDER``), pumps, fan, blower and mixer their vane and blade
    counts from ``demo_plant``.  All motors are on the site's 50 Hz supply; the pole
    counts (4 for the 1460–1480 rpm motors, 2 for the 2975 rpm blower motor, none for
    the inverter-fed mixer) are invented demo values that fit the speeds.
    """
    from . import demo_plant as dp  # the demo plant is only needed here

    if not isinstance(machine, dp.DemoMachine):
        raise InputError(f"model_from_demo: expected a DemoMachine, got {type(machine).__name__}")
    shafts = tuple(Shaft(name, ratio) for name, ratio in machine.shafts)
    counts = {"pump": dp.PUMP_VANES, "fan": dp.FAN_BLADES, "blower": dp.BLOWER_BLADES,
              "mixer": dp.MIXER_BLADES}
    blades = tuple(BladeRow(s.name, counts[s.name]) for s in shafts if s.name in counts)
    gears = (GearPair("input", "output", dp.PINION_TEETH, dp.WHEEL_TEETH),) \
        if machine.tag == "G-401" else ()
    motor_pulley = 180.0  # mm; BELT_ORDER = π · 0.18 m / 2.4 m
    belts = (BeltDrive("motor", "fan", motor_pulley, motor_pulley / dp.FAN_RATIO, 2400.0),) \
        if machine.tag == "F-201" else ()
    bearings, seen = [], set()
    for point in machine.points:
        if point.bearing is not None and point.location not in seen:
            seen.add(point.location)
            bearings.append(BearingAt(point.shaft, point.bearing, point.location))
    poles = {"B-301": 2, "M-501": None}.get(machine.tag, 4)
    return MachineModel(shafts, gears=gears, belts=belts, blades=blades,
                        bearings=tuple(bearings), line_frequency_hz=dp.LINE_HZ,
                        motor_shaft="motor", poles=poles)
