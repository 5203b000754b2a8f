"""The invented demo plant "Demo Works" and the signal of each of its runs.

A municipal water-treatment works with one site and six machines, surveyed weekly for
:data:`PLANT.weeks <PLANT>` weeks (week 1 is on ``PLANT.start``).  Every run is a
:class:`~engine.simulate.MachineSignal` built from the machine's kinematics (shaft
speeds, vanes, blades, gear teeth, bearing geometry) and a weekly story:

* **P-101** raw-water pump — healthy all along (about 1.2 mm/s).
* **P-102** raw-water pump — the pump drive-end bearing develops an outer-race defect
  from week 8: impacts at its BPFO (seen in the envelope spectrum) and BPFO lines, then
  a broadband rise from about week 11, then 1× and BPFO ± 1× sidebands from about
  week 13.  The overall velocity at "pump DE H" follows
  ``v(w) = v0 + c · (e^(k (w − 7)) − 1)`` (k = 0.127 /week) and is designed to pass
  2.8 mm/s at week 11.5 and about 4.5 mm/s at week 14.5 — the ISO 20816-3 group 2,
  rigid-foundation B/C and C/D boundaries (from memory) — so that a forecast has a
  smooth trend to work on.
* **F-201** belt-driven cooling fan — fan 1× (at fan shaft speed) grows steadily with
  build-up on the blades, overall from about 1.5 to about 4 mm/s.
* **B-301** direct-coupled blower — after a motor change in week 10, 2× jumps 3.5 ×
  radially and 4 × axially (misalignment).
* **G-401** conveyor gearbox, 23 teeth driving 67 — gear mesh with sidebands at both
  shaft rates that rise slowly with wear.
* **M-501** variable-speed mixer with a 1 pulse-per-revolution tachometer — weekly runs
  at about 1200 rpm, and in week 16 a run-up from 300 to 1500 rpm in 8 s crossing a
  structural resonance at 15 Hz (Q = 10).

All numbers (geometries, amplitudes, tooth counts) are invented; bearing labels are
neutral.  Each run has noise, a slow speed wobble and a ±0.3 % speed change from week
to week; every random choice is seeded from ``(tag, point, week)``.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

import numpy as np
from scipy.signal import sosfreqz

from .bearings import BearingGeometry, defect_orders
from .errors import InputError
from .recording import Channel, Recording
from .simulate import (GearMesh, Impacts, MachineSignal, Resonance, band_noise_filter,
                       impact_filter, synthesize)
from .units import STANDARD_GRAVITY

_TWO_PI = 2.0 * math.pi
#: Supply frequency of the site, Hz; motors show 2× line at 100 Hz (common practice).
LINE_HZ = 50.0
#: Band of the overall velocity, Hz (ISO 20816-1 broadband for machines above 600 rpm).
OVERALL_BAND_HZ = (10.0, 1000.0)


@dataclass(frozen=True)
class DemoPoint:
    """A measurement point: ``location`` (for example "pump DE") and ``direction``
    (H, V or A) make its ``name``; ``shaft`` names the machine shaft it sits on."""

    name: str
    location: str
    direction: str
    shaft: str
    bearing: BearingGeometry | None = None


@dataclass(frozen=True)
class DemoMachine:
    """A machine of the demo plant.

    ``nominal_rpm`` is the speed of the reference (motor) shaft; ``shafts`` are
    ``(name, speed ratio to the motor shaft)``; ``iso_group`` and ``foundation``
    ("rigid" or "flexible") select ISO 20816-3 zone defaults; ``power_kw`` is the
    motor rating.
    """

    tag: str
    name: str
    description: str
    nominal_rpm: float
    power_kw: float
    iso_group: int
    foundation: str
    shafts: tuple[tuple[str, float], ...]
    points: tuple[DemoPoint, ...]

    def point(self, name: str) -> DemoPoint:
        """The point called ``name``, or InputError listing the machine's points."""
        for p in self.points:
            if p.name == name:
                return p
        raise InputError(f"demo plant: machine {self.tag} has no point {name!r}; expected "
                         "one of " + ", ".join(repr(p.name) for p in self.points))

    def shaft_ratio(self, shaft: str) -> float:
        """Speed of ``shaft`` divided by the motor shaft's speed."""
        for name, ratio in self.shafts:
            if name == shaft:
                return ratio
        raise InputError(f"demo plant: machine {self.tag} has no shaft {shaft!r}")


@dataclass(frozen=True)
class DemoPlant:
    """The demo site: its machines, the number of weekly surveys and the first one."""

    site: str
    machines: tuple[DemoMachine, ...]
    weeks: int
    start: datetime

    def machine(self, tag: str) -> DemoMachine:
        """The machine tagged ``tag``, or InputError listing the tags."""
        for m in self.machines:
            if m.tag == tag:
                return m
        raise InputError(f"demo plant: no machine tagged {tag!r}; expected one of "
                         + ", ".join(m.tag for m in self.machines))

    def taken(self, tag: str, point: str, week: int) -> datetime:
        """When a run was taken: week ``w`` (1-based) is ``(w − 1)`` weeks after
        ``start``; machines follow each other every 25 min, points every 4 min."""
        w = _check_week(self, week)
        m_index = [m.tag for m in self.machines].index(self.machine(tag).tag)
        p_index = self.machine(tag).points.index(self.machine(tag).point(point))
        return self.start + timedelta(days=7 * (w - 1), minutes=25 * m_index + 4 * p_index)


def _check_week(plant: DemoPlant, week) -> int:
    if isinstance(week, bool) or not isinstance(week, (int, np.integer)) \
            or not 1 <= week <= plant.weeks:
        raise InputError(f"demo plant: week must be a whole number from 1 to {plant.weeks}, "
                         f"got {week!r}")
    return int(week)


# Invented bearing geometries (rolling elements × diameter on a pitch circle, in mm).
BEARING_A = BearingGeometry("bearing A (9 × 15.9 mm)", 9, 15.9, 79.5)
BEARING_B = BearingGeometry("bearing B (9 × 17.5 mm)", 9, 17.5, 80.0)
BEARING_C = BearingGeometry("bearing C (8 × 13.5 mm)", 8, 13.5, 62.0)
BEARING_D = BearingGeometry("bearing D (11 × 19.8 mm, 15°)", 11, 19.8, 104.0, 15.0)
BEARING_E = BearingGeometry("bearing E (12 × 12.3 mm)", 12, 12.3, 72.5)
BEARING_F = BearingGeometry("bearing F (13 × 14.3 mm, 12°)", 13, 14.3, 95.0, 12.0)
BEARING_G = BearingGeometry("bearing G (10 × 11.1 mm)", 10, 11.1, 58.5)

#: Fan shaft speed over motor shaft speed of F-201 (pulley ratio).
FAN_RATIO = 890.0 / 1460.0
#: Belt passes per motor revolution of F-201 (180 mm pulley, 2.4 m belt): π·0.18/2.4.
BELT_ORDER = math.pi * 0.18 / 2.4
#: Gear teeth of G-401: input pinion and output wheel.
PINION_TEETH, WHEEL_TEETH = 23, 67
OUTPUT_RATIO = PINION_TEETH / WHEEL_TEETH
PUMP_VANES, FAN_BLADES, BLOWER_BLADES, MIXER_BLADES = 5, 8, 12, 4
#: The week of B-301's motor change and P-102's first bearing-defect impacts.
MOTOR_CHANGE_WEEK, DEFECT_WEEK = 10, 8
#: M-501's structural resonance, its run-up week and speed profile (s, rpm).
MIXER_RESONANCE = Resonance(15.0, 10.0)
RUNUP_WEEK = 16
RUNUP_PROFILE = ((0.0, 1.0, 9.0, 10.0), (300.0, 300.0, 1500.0, 1500.0))


def _pt(name: str, shaft: str, bearing: BearingGeometry | None) -> DemoPoint:
    location, direction = name.rsplit(" ", 1)
    return DemoPoint(name, location, direction, shaft, bearing)


def _pump(tag: str, number: int) -> DemoMachine:
    return DemoMachine(
        tag, f"Raw-water pump {number}",
        "End-suction centrifugal pump, 5-vane impeller, on a 75 kW motor through a "
        "flexible coupling; concrete plinth.",
        1480.0, 75.0, 2, "rigid", (("motor", 1.0), ("pump", 1.0)),
        (_pt("motor DE H", "motor", BEARING_A), _pt("pump DE H", "pump", BEARING_B),
         _pt("pump DE V", "pump", BEARING_B)))


PLANT = DemoPlant(
    site="Demo Works",
    machines=(
        _pump("P-101", 1),
        _pump("P-102", 2),
        DemoMachine(
            "F-201", "Cooling fan",
            "Axial cooling fan, 8 blades, V-belt driven from a 22 kW motor "
            "(motor about 1460 rpm, fan about 890 rpm); steel frame.",
            1460.0, 22.0, 2, "flexible", (("motor", 1.0), ("fan", FAN_RATIO)),
            (_pt("motor DE H", "motor", BEARING_C), _pt("fan DE H", "fan", BEARING_D),
             _pt("fan NDE A", "fan", BEARING_D))),
        DemoMachine(
            "B-301", "Aeration blower",
            "Centrifugal blower, 12-blade impeller, direct coupled to a 55 kW two-pole "
            "motor; motor replaced in week 10.",
            2975.0, 55.0, 2, "rigid", (("motor", 1.0), ("blower", 1.0)),
            (_pt("motor DE H", "motor", BEARING_E), _pt("blower DE H", "blower", BEARING_E),
             _pt("blower DE A", "blower", BEARING_E))),
        DemoMachine(
            "G-401", "Sludge conveyor gearbox",
            "Single-stage helical gearbox, 23-tooth pinion driving a 67-tooth wheel, on a "
            "30 kW motor (input about 1480 rpm, output about 508 rpm).",
            1480.0, 30.0, 2, "rigid",
            (("motor", 1.0), ("input", 1.0), ("output", OUTPUT_RATIO)),
            (_pt("motor DE H", "motor", BEARING_A),
             _pt("gearbox input V", "input", BEARING_F),
             _pt("gearbox output H", "output", BEARING_F))),
        DemoMachine(
            "M-501", "Flocculation mixer",
            "Variable-speed mixer, 4-blade impeller, 15 kW motor on an inverter, with a "
            "once-per-revolution tachometer; mounted on a steel bridge.",
            1200.0, 15.0, 2, "flexible", (("motor", 1.0), ("mixer", 1.0)),
            (_pt("motor DE H", "motor", BEARING_G), _pt("mixer DE H", "mixer", BEARING_G),
             _pt("mixer DE A", "mixer", BEARING_G))),
    ),
    weeks=16,
    start=datetime(2026, 8, 3, 8, 0, tzinfo=UTC),
)

# Healthy baseline per (machine group, point): orders of the motor shaft → velocity in
# mm/s RMS, fixed tones Hz → mm/s RMS, white noise in g RMS.  Invented values chosen so
# that healthy machines sit at about 1–2 mm/s overall.
_F, _R = FAN_RATIO, OUTPUT_RATIO
_BASELINE = {
    ("pump", "motor DE H"): ({1: 0.85, 2: 0.35, 3: 0.1, PUMP_VANES: 0.25}, {100.0: 0.15}, 0.025),
    ("pump", "pump DE H"): ({1: 1.0, 2: 0.3, 3: 0.12, PUMP_VANES: 0.5, 2 * PUMP_VANES: 0.12},
                            {}, 0.03),
    ("pump", "pump DE V"): ({1: 0.75, 2: 0.25, PUMP_VANES: 0.4, 2 * PUMP_VANES: 0.1}, {}, 0.03),
    ("F-201", "motor DE H"): ({1: 0.5, 2: 0.25, BELT_ORDER: 0.15}, {100.0: 0.1}, 0.025),
    ("F-201", "fan DE H"): ({1: 0.3, 2 * _F: 0.2, FAN_BLADES * _F: 0.4, BELT_ORDER: 0.15},
                            {}, 0.03),
    ("F-201", "fan NDE A"): ({1: 0.2, 2 * _F: 0.3, FAN_BLADES * _F: 0.25}, {}, 0.03),
    ("B-301", "motor DE H"): ({1: 0.9, 2: 0.3, BLOWER_BLADES: 0.15}, {100.0: 0.08}, 0.025),
    ("B-301", "blower DE H"): ({1: 0.9, 2: 0.35, BLOWER_BLADES: 0.35, 2 * BLOWER_BLADES: 0.1},
                               {}, 0.03),
    ("B-301", "blower DE A"): ({1: 0.5, 2: 0.3, BLOWER_BLADES: 0.15}, {}, 0.03),
    ("G-401", "motor DE H"): ({1: 0.85, 2: 0.3}, {100.0: 0.12}, 0.025),
    ("G-401", "gearbox input V"): ({1: 0.6, 2: 0.2, _R: 0.25}, {}, 0.03),
    ("G-401", "gearbox output H"): ({1: 0.3, _R: 0.6, 2 * _R: 0.25}, {}, 0.03),
    ("M-501", "motor DE H"): ({1: 0.8, 2: 0.3}, {100.0: 0.1}, 0.025),
    ("M-501", "mixer DE H"): ({1: 0.9, 2: 0.25, 3: 0.1, MIXER_BLADES: 0.2}, {}, 0.03),
    ("M-501", "mixer DE A"): ({1: 0.5, 2: 0.2, MIXER_BLADES: 0.15}, {}, 0.03),
}
# G-401 gear mesh per point: (mesh g peak, 2× mesh g peak, share of the sidebands).
_MESH = {"motor DE H": (0.15, 0.04, 0.3), "gearbox input V": (0.5, 0.15, 1.0),
         "gearbox output H": (0.4, 0.1, 0.8)}
# Share (in amplitude) of a defect or imbalance seen at each point, from its source.
_P102_SHARE = {"pump DE H": 1.0, "pump DE V": 0.75, "motor DE H": 0.3}
_FAN_SHARE = {"fan DE H": 1.0, "fan NDE A": 0.5, "motor DE H": 0.35}


def _seed(*parts) -> int:
    """A stable 63-bit seed from the parts' text (Python's hash() changes per process)."""
    digest = hashlib.blake2b("|".join(map(str, parts)).encode(), digest_size=8).digest()
    return int.from_bytes(digest, "little") >> 1


def _g_peak(v_rms_mm_s: float, f_hz: float) -> float:
    """Acceleration amplitude in g peak of a sinusoid of ``v_rms_mm_s`` at ``f_hz``."""
    return v_rms_mm_s * math.sqrt(2.0) * 1e-3 * _TWO_PI * f_hz / STANDARD_GRAVITY


def _smoothstep(w: float, start: float, end: float) -> float:
    r = min(max((w - start) / (end - start), 0.0), 1.0)
    return r * r * (3.0 - 2.0 * r)


def _band_velocity_ms(band: tuple[float, float], fs_hz: float) -> float:
    """Mean-square velocity in the overall band, (mm/s)², of 1 g RMS band noise."""
    sos, unit_rms = band_noise_filter(band, fs_hz)
    f = np.geomspace(OVERALL_BAND_HZ[0], min(OVERALL_BAND_HZ[1], 0.45 * fs_hz), 4000)
    _, h = sosfreqz(sos, worN=f, fs=fs_hz)
    psd = (2.0 / fs_hz) * np.abs(h) ** 2 / unit_rms ** 2 * (STANDARD_GRAVITY * 1e3 / _TWO_PI) ** 2
    y = psd / f ** 2
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(f)))


def expected_velocity_mm_s(signal: MachineSignal, *, fs_hz: float = 25600.0,
                           band_hz: tuple[float, float] = OVERALL_BAND_HZ) -> float:
    """Overall velocity RMS a signal will show at constant speed, mm/s (analytic).

    Each sinusoid of ``A`` g peak at ``f`` Hz in the band adds ``(A g_n / 2πf)² / 2``
    to the mean-square velocity; white noise of ``σ`` g RMS adds
    ``σ² (2/fs) (g_n/2π)² (1/f_lo − 1/f_hi)``; band noise adds the integral of its
    density over ``1/(2πf)²``; an impact train of rate ``R`` and amplitude ``a`` adds
    lines of ``2 a R / fs · |H(f)|`` at multiples of ``R`` (and at ± the modulating
    order when modulated), ``H`` being the impact filter.  Impact jitter is neglected.

    Parameters
    ----------
    signal : MachineSignal
    fs_hz : float, keyword-only
        Sample rate it will be rendered at, Hz (sets the white-noise density).
    band_hz : (low, high), keyword-only
        Band of the overall level, Hz.

    Returns
    -------
    float
        Velocity RMS in mm/s.
    """
    lo, hi = band_hz[0], min(band_hz[1], 0.5 * fs_hz)
    f_shaft = signal.rpm / 60.0
    lines = [(f, a) for f, a in signal.fixed_tones_hz.items()]
    for k, (amp, _) in signal.orders.items():
        gain = np.prod([abs(r.gain(k * f_shaft)) for r in signal.resonances])
        lines.append((k * f_shaft, amp * float(gain)))
    mesh = signal.gear_mesh
    if mesh is not None:
        lines.append((mesh.teeth * f_shaft, mesh.amplitude_g))
        lines += [((mesh.teeth + s * j * mesh.sideband_order) * f_shaft,
                   mesh.sideband_amplitude_g / j)
                  for j in range(1, mesh.sideband_pairs + 1) for s in (-1, 1)]
    for imp in signal.bearing_impacts:
        rate = imp.order * f_shaft
        b, a_f = impact_filter(imp.resonance_hz, imp.damping, fs_hz)
        mod = imp.modulation_depth if imp.modulation_order > 0 else 0.0
        for m in range(0, int(hi / rate) + 2):  # m = 0 holds the modulation line itself
            for df, scale in ((0.0, 1.0), (-1.0, 0.5 * mod), (1.0, 0.5 * mod)):
                f = m * rate + df * imp.modulation_order * f_shaft
                if scale > 0.0 and f > 0.0:
                    z = np.exp(-1j * _TWO_PI * f / fs_hz)
                    h = abs(b[1] * z / (1.0 + a_f[1] * z + a_f[2] * z * z))
                    lines.append((f, 2.0 * imp.amplitude_g * scale * rate / fs_hz * h))
    ms = sum(0.5 * (a * STANDARD_GRAVITY * 1e3 / (_TWO_PI * f)) ** 2
             for f, a in lines if lo <= f <= hi)
    ms += (signal.noise_g_rms ** 2 * 2.0 / fs_hz * (STANDARD_GRAVITY * 1e3 / _TWO_PI) ** 2
           * (1.0 / lo - 1.0 / hi))
    ms += sum(rms ** 2 * _band_velocity_ms(band, fs_hz)
              for band, rms in signal.noise_bands.items())
    return math.sqrt(ms)


class _Run:
    """Builds one run's MachineSignal: velocities per order, converted to g at the end."""

    def __init__(self, machine: DemoMachine, point: DemoPoint, week: int, fs_hz: float):
        self.machine, self.point, self.week, self.fs_hz = machine, point, week, fs_hz
        self.seed = _seed(machine.tag, point.name, week)
        self.rng = np.random.default_rng(self.seed)
        speed_rng = np.random.default_rng(_seed(machine.tag, "speed", week))
        self.rpm = machine.nominal_rpm * (1.0 + 0.003 * speed_rng.uniform(-1.0, 1.0))
        group = "pump" if machine.tag in ("P-101", "P-102") else machine.tag
        orders, tones, noise = _BASELINE[(group, point.name)]
        self.v_orders = {k: v * self.jitter() for k, v in orders.items()}
        self.v_tones = {f: v * self.jitter() for f, v in tones.items()}
        self.g_orders: dict[float, float] = {}
        self.noise, self.noise_bands = noise * self.jitter(), {}
        self.impacts, self.mesh, self.resonances = [], None, []
        self.convert_rpm = None  # speed at which velocities are defined (default: rpm)

    def jitter(self, spread: float = 0.03) -> float:
        return 1.0 + spread * self.rng.uniform(-1.0, 1.0)

    def phase(self, order: float) -> float:
        """The phase of an order at this point: fixed over the weeks, with a little
        week-to-week scatter."""
        fixed = np.random.default_rng(_seed(self.machine.tag, self.point.name, f"{order:.5f}"))
        return float(fixed.uniform(0.0, _TWO_PI) + 0.05 * self.rng.standard_normal())

    def signal(self) -> MachineSignal:
        f_shaft = (self.convert_rpm or self.rpm) / 60.0
        orders = {k: (_g_peak(v, k * f_shaft), self.phase(k)) for k, v in self.v_orders.items()}
        for k, g in self.g_orders.items():
            orders[k] = (g, self.phase(k))
        return MachineSignal(
            rpm=self.rpm, speed_wobble=0.002, orders=orders,
            fixed_tones_hz={f: _g_peak(v, f) for f, v in self.v_tones.items()},
            bearing_impacts=self.impacts, gear_mesh=self.mesh, noise_g_rms=self.noise,
            resonances=self.resonances, seed=self.seed, noise_bands=self.noise_bands)


def _p102_target(week: float, v0: float) -> float:
    """Designed overall velocity of P-102 "pump DE H", mm/s: v0 until week 7, then
    rising so that it passes 2.8 mm/s at week 11.5 (≈ 4.5 mm/s at week 14.5)."""
    k = 0.127
    c = (2.8 - v0) / math.expm1(k * 4.5)
    return v0 + c * math.expm1(k * max(week - 7.0, 0.0))


def _baseline_velocity(group: str, point_name: str, rpm: float, fs_hz: float) -> float:
    """Overall velocity, mm/s, of a point's nominal healthy baseline."""
    orders, tones, noise = _BASELINE[(group, point_name)]
    return expected_velocity_mm_s(MachineSignal(
        rpm=rpm, speed_wobble=0.0, noise_g_rms=noise,
        orders={k: (_g_peak(v, k * rpm / 60.0), 0.0) for k, v in orders.items()},
        fixed_tones_hz={f: _g_peak(v, f) for f, v in tones.items()}), fs_hz=fs_hz)


def _p102_fault(run: _Run) -> None:
    w, share = run.week, _P102_SHARE[run.point.name]
    if w < DEFECT_WEEK:
        return
    bpfo = defect_orders(BEARING_B).bpfo
    v0 = _baseline_velocity("pump", "pump DE H", run.machine.nominal_rpm, run.fs_hz)
    energy = share ** 2 * (_p102_target(w, v0) ** 2 - v0 ** 2)
    run.impacts = [Impacts(order=bpfo, amplitude_g=share * 0.5 * math.exp(0.22 * (w - 8)),
                           resonance_hz=3150.0, damping=0.04, slip=0.012, modulation_order=1.0,
                           modulation_depth=0.6 * _smoothstep(w, 12.0, 15.0))]
    alone = MachineSignal(rpm=run.rpm, speed_wobble=0.0, bearing_impacts=run.impacts)
    energy = max(energy - expected_velocity_mm_s(alone, fs_hz=run.fs_hz) ** 2, 0.0)
    # Shares of the remaining energy: BPFO lines first, then the broadband rise, then 1×
    # and the 1× sidebands of BPFO; slow ramps keep every part growing.
    weights = (1.0, 1.0 * _smoothstep(w, 10.0, 13.0), 1.5 * _smoothstep(w, 12.0, 15.5))
    e_lines, e_noise, e_1x = (energy * x / sum(weights) for x in weights)
    for m, part in ((1, 0.6), (2, 0.28), (3, 0.12)):
        run.v_orders[m * bpfo] = math.sqrt(part * e_lines)
    if e_noise > 0.0:
        band = (20.0, 1000.0)
        run.noise_bands = {band: math.sqrt(e_noise / _band_velocity_ms(band, run.fs_hz))}
    run.v_orders[1] = math.sqrt(run.v_orders[1] ** 2 + 0.6 * e_1x)
    run.v_orders[bpfo - 1.0] = math.sqrt(0.2 * e_1x)
    run.v_orders[bpfo + 1.0] = math.sqrt(0.2 * e_1x)


def _f201_fan(run: _Run) -> None:
    # Fan 1× at "fan DE H" is set so that the point's overall follows 1.5 → 4.0 mm/s
    # linearly over the survey (steady build-up); other points see a share of it.
    target = 1.5 + 2.5 * (run.week - 1) / (PLANT.weeks - 1)
    v_other = _baseline_velocity("F-201", "fan DE H", run.machine.nominal_rpm, run.fs_hz)
    fan_1x = math.sqrt(max(target ** 2 - v_other ** 2, 0.0))
    run.v_orders[FAN_RATIO] = _FAN_SHARE[run.point.name] * fan_1x * run.jitter(0.01)


def _b301_coupling(run: _Run) -> None:
    if run.week >= MOTOR_CHANGE_WEEK:
        run.rpm *= 2981.0 / 2975.0  # the new motor slips a little less
        axial = run.point.direction == "A"
        run.v_orders[2] *= 4.0 if axial else 3.5
        run.v_orders[1] *= 1.3 if axial else 1.1


def _g401_mesh(run: _Run) -> None:
    mesh_g, mesh2_g, sb_share = _MESH[run.point.name]
    wear = (run.week - 1) / (PLANT.weeks - 1)
    sb_in = sb_share * (0.03 + 0.04 * wear) * run.jitter(0.02)
    run.mesh = GearMesh(PINION_TEETH, mesh_g * run.jitter(), 1.0, sb_in, 2)
    run.g_orders[2.0 * PINION_TEETH] = mesh2_g * run.jitter()
    sb_out = sb_share * (0.02 + 0.03 * wear) * run.jitter(0.02)
    for side in (-1.0, 1.0):
        run.g_orders[PINION_TEETH + side * OUTPUT_RATIO] = sb_out


def _m501_speed(run: _Run) -> None:
    run.rpm = run.machine.nominal_rpm * (1.0 + 0.015 * run.rng.uniform(-1.0, 1.0))
    run.convert_rpm = run.machine.nominal_rpm  # amplitudes stay fixed in g over speed
    run.resonances = [MIXER_RESONANCE]


_STORIES = {"P-102": _p102_fault, "F-201": _f201_fan, "B-301": _b301_coupling,
            "G-401": _g401_mesh, "M-501": _m501_speed}


def demo_signal(machine_tag: str, point_name: str, week: int, *,
                fs_hz: float = 25600.0) -> tuple[MachineSignal, dict]:
    """The signal of one demo run and what is known about the run.

    Parameters
    ----------
    machine_tag : str
        One of the tags of :data:`PLANT` ("P-101", …, "M-501").
    point_name : str
        A point of that machine, for example "pump DE H".
    week : int
        Survey week, 1 … ``PLANT.weeks``.
    fs_hz : float, keyword-only
        Sample rate the run will be rendered at, Hz (the designed overall levels
        include white noise, whose in-band part depends on it).

    Returns
    -------
    signal : MachineSignal
        Reference shaft = the motor shaft.
    info : dict
        ``machine``, ``point``, ``week``, ``direction``, ``seed``; ``rpm`` (motor shaft,
        rev/min; ``None`` for the run-up); ``shaft_rpm`` (the point's shaft); ``taken``
        (UTC datetime); ``tach_ppr`` (1 for M-501, else ``None``); ``rpm_profile``
        (``(t_s, rpm)`` for the run-up, else ``None``); ``fixed_duration_s`` (the run-up's
        own length in s, else ``None``); ``expected_velocity_mm_s`` (analytic overall,
        10–1000 Hz, at constant speed).

    Raises
    ------
    InputError
        For an unknown machine or point or a week out of range.
    """
    machine = PLANT.machine(machine_tag)
    point = machine.point(point_name)
    w = _check_week(PLANT, week)
    run = _Run(machine, point, w, float(fs_hz))
    if machine.tag in _STORIES:
        _STORIES[machine.tag](run)
    signal = run.signal()
    runup = machine.tag == "M-501" and w == RUNUP_WEEK
    info = {
        "machine": machine.tag, "point": point.name, "week": w,
        "direction": point.direction, "seed": run.seed,
        "rpm": None if runup else run.rpm,
        "shaft_rpm": None if runup else run.rpm * machine.shaft_ratio(point.shaft),
        "taken": PLANT.taken(machine.tag, point.name, w),
        "tach_ppr": 1 if machine.tag == "M-501" else None,
        "rpm_profile": (np.array(RUNUP_PROFILE[0]), np.array(RUNUP_PROFILE[1]))
        if runup else None,
        "fixed_duration_s": RUNUP_PROFILE[0][-1] if runup else None,
        "expected_velocity_mm_s": expected_velocity_mm_s(signal, fs_hz=float(fs_hz)),
    }
    return signal, info


def demo_recording(machine_tag: str, point_name: str, week: int, *,
                   fs_hz: float = 25600.0, duration_s: float = 2.0) -> Recording:
    """A demo run as a Recording (channel 0 in g, M-501 with a tach channel).

    ``duration_s`` sets the length of steady runs; the week-16 run-up of M-501 lasts
    its own ``info["fixed_duration_s"]`` (10 s).  See :func:`demo_signal` for the
    parameters.
    """
    signal, info = demo_signal(machine_tag, point_name, week, fs_hz=fs_hz)
    rec = synthesize(signal, fs_hz=fs_hz, duration_s=info["fixed_duration_s"] or duration_s,
                     rpm_profile=info["rpm_profile"], tach_ppr=info["tach_ppr"])
    vib = rec.channels[0]
    channels = [Channel(vib.samples, "g", name=info["point"], direction=info["direction"])]
    channels += rec.channels[1:]
    return Recording(fs_hz=rec.fs_hz, channels=channels,
                     source=f"{PLANT.site}/{info['machine']}/{info['point']}/week {info['week']}",
                     rpm=info["rpm"], taken=info["taken"], tach_channel=rec.tach_channel)
