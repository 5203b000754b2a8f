"""Findings: rules that turn a run's evidence into plain, graded indications.

Each rule looks for a pattern the trade ties to a fault and returns a :class:`Finding`
with the peaks that support it, a severity and a recommendation worded as an indication
for a qualified person.  The rules and the source of every threshold:

* **imbalance** — 1× holds at least half of the overall velocity energy, 2× and 3×
  below half of 1× (common practice).
* **misalignment** — 2× at least half of the radial 1×, radially or axially (common
  practice).  A high axial 1× alone is listed as support only: the imbalance of an
  overhung rotor shows it too (common practice).
* **mechanical looseness** — at least four of 1× … 10×, or two of 0.5×, 1.5×, 2.5×,
  clearly above the floor and not explained by another source (common practice).
* **bearing defect**, staged in the language of Randall & Antoni ([1]_): stage 1 —
  envelope peaks at ≥ 2 harmonics of a defect frequency within 2 % (slip, [1]_);
  stage 2 — plus a broadband rise of the velocity floor; stage 3 — plus sidebands
  (±1× around BPFI and BPFO, ±FTF around BSF) and defect lines in the velocity
  spectrum; later signs imply the earlier stages (thresholds marked below).
* **gear wear** — mesh with shaft-rate sidebands; the sidebands' sum over the mesh
  amplitude, and its rise over a baseline (common practice).
* **resonance** — a peak fixed in Hz across speeds (:func:`resonance_from_runs`), or a
  bump in an order cut (:func:`resonance_from_order_cut`).

Velocity patterns are graded by the level of the components that make them, read
against zone boundaries (default ISO 20816-3, group 2, rigid foundation: 1.4, 2.8 and
4.5 mm/s, from memory): zone A → info, B → watch, C → warning, D → serious; a rise of
6 dB (×2) over a baseline raises the grade one step (common practice).

References
----------
.. [1] R. B. Randall, J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   Mechanical Systems and Signal Processing 25:485–520, 2011.
.. [2] ISO 20816-3, Mechanical vibration — Part 3: Industrial machines above 15 kW.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace

import numpy as np
from scipy.signal import find_peaks as _local_maxima

from .bearings import defect_frequencies_hz
from .errors import InputError
from .kinematics import MachineModel, sources
from .peaks import Peak
from .recording import DIRECTIONS
from .spectrum import Spectrum
from .units import VELOCITY, quantity_of, scale_factor

SEVERITIES = ("info", "watch", "warning", "serious")
#: ISO 20816-3 group 2, rigid: zone boundaries A/B, B/C, C/D, mm/s RMS (from memory, [2]).
DEFAULT_ZONE_LIMITS_MM_S = (1.4, 2.8, 4.5)
IMBALANCE_ENERGY_SHARE = 0.5      # 1×² / overall² (common practice: 50–80 %)
HARMONIC_RATIO = 0.5              # 2× / 1×: misalignment above, imbalance below (common practice)
LOOSENESS_HARMONICS, LOOSENESS_HALF_ORDERS = 4, 2   # common practice
LOOSENESS_SHARE = 0.05            # a harmonic counts from 5 % of 1× (our choice)
HALF_ORDERS = (0.5, 1.5, 2.5)
ORDER_TOLERANCE = 0.01            # 1 % of the frequency: speed uncertainty (common practice)
FLOOR_FACTOR = 3.0                # a peak counts ≈ 10 dB above the median line (our choice)
ENVELOPE_FLOOR_FACTOR = 4.0       # envelope peaks 12 dB above the envelope floor (our choice)
DEFECT_TOLERANCE = 0.02           # 1–2 % slip of rolling elements ([1])
DEFECT_HARMONICS, MIN_DEFECT_HARMONICS = 5, 2
SIDEBAND_SHARE, MIN_SIDEBANDS = 0.1, 2  # sideband ≥ 10 % of its line, two of them (our choice)
BROADBAND_RISE = 2.0              # floor 6 dB over its baseline (common practice)
BROADBAND_SHARE = 0.08            # floor ≥ 8 % of the overall without a baseline (our choice)
TREND_RISE = 2.0                  # 6 dB over the baseline raises the grade (common practice)
GEAR_RATIO_LEVELS = (0.3, 0.6)    # sideband sum / mesh: watch, warning (our choice)
GEAR_GROWTH_LEVELS = (1.25, 1.5, 2.0)  # over the baseline ratio: watch, warning, serious
BROADBAND_BAND_HZ = (10.0, 1000.0)  # ISO 20816-1 broadband range (from memory)
MIN_SPEED_SPREAD = 0.05           # speeds 5 % apart tell fixed from speed-locked (our choice)
#: Keys of RunEvidence.baseline the rules read (:func:`baseline_values` makes them).
BASELINE_KEYS = ("overall_velocity_mm_s", "velocity_1x_mm_s", "velocity_2x_mm_s",
                 "broadband_velocity_mm_s", "gear_sideband_ratio")
_V, _FIXED_KINDS = "mm/s RMS", ("blade_pass", "gear_mesh", "line", "belt")
_SCALE_TO_RMS = {"rms": 1.0, "peak": 1.0 / math.sqrt(2.0), "pp": 1.0 / (2.0 * math.sqrt(2.0))}


@dataclass(frozen=True)
class Evidence:
    """One piece of evidence: a peak or a level, and the source it was matched to."""

    description: str
    frequency_hz: float | None
    amplitude: float | None
    unit: str
    source_name: str | None = None

    def as_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class Finding:
    """A plain finding.

    ``kind`` is ``imbalance``, ``misalignment``, ``looseness``, ``bearing``,
    ``gear_wear`` or ``resonance``; ``severity`` one of :data:`SEVERITIES`;
    ``recommendation`` an indication for a qualified person, never an order to run or
    stop; ``stage`` the bearing defect stage 1 … 3; ``values`` the numbers the rule
    decided on (ratios, shares, rpm …).
    """

    kind: str
    title: str
    severity: str
    evidence: list[Evidence]
    recommendation: str
    stage: int | None = None
    values: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        return asdict(self)  # the evidence becomes a list of dicts


@dataclass(kw_only=True)
class RunEvidence:
    """Everything the rules read about one run at one point.

    Attributes
    ----------
    spectrum_velocity : Spectrum
        Velocity (mm/s or in/s, amplitude scale); read as mm/s RMS.
    peaks : list of Peak
        Its peaks (20–40, so that sidebands are among them).
    rpm, direction, overall_velocity_mm_s : float, str, float
        Speed of the point's shaft (rev/min); H, V, A or R; overall velocity RMS (mm/s,
        ISO 20816 broadband).
    model, shaft : MachineModel (optional), str
        The machine and the point's shaft (one of ``model``'s when given).
    envelope_peaks, envelope_floor_g : list of Peak, float, optional
        Envelope spectrum peaks and its median line, g; ``None`` when not measured.
    defect_hz : dict of str to float
        Bearing defect frequencies on the shaft, Hz, keyed ``ftf``, ``bsf``, ``bsf2``,
        ``bpfo``, ``bpfi`` (or prefixed: ``"pump DE bpfo"``); empty: from the model.
    baseline : dict of str to float, optional
        Values of a healthy reference run (:data:`BASELINE_KEYS`).
    axial_companion : dict, optional
        ``{"1x": …, "2x": …}`` in mm/s RMS at the same machine's axial point.
    """

    spectrum_velocity: Spectrum
    peaks: list[Peak]
    rpm: float
    direction: str
    overall_velocity_mm_s: float
    model: MachineModel | None = None
    shaft: str = ""
    envelope_peaks: list[Peak] | None = None
    envelope_floor_g: float | None = None
    defect_hz: dict[str, float] = field(default_factory=dict)
    baseline: dict[str, float] | None = None
    axial_companion: dict[str, float] | None = None


def broadband_velocity_mm_s(spectrum: Spectrum, *,
                            band_hz: tuple[float, float] = BROADBAND_BAND_HZ) -> float:
    """Broadband (floor) level of a velocity spectrum, mm/s RMS.

    The RMS a flat floor at the spectrum's median line would carry over ``band_hz``:
    ``sqrt(median(RMS²) · lines / ENBW_bins)``.  The median ignores the discrete lines,
    so the value follows the noise floor, not the peaks.
    """
    f = spectrum.frequency_hz
    sel = (f >= band_hz[0]) & (f <= min(band_hz[1], spectrum.fmax_hz))
    if not sel.any():
        raise InputError(f"broadband level: the spectrum has no line in {band_hz[0]:g}–"
                         f"{band_hz[1]:g} Hz")
    ms = spectrum.mean_square[sel] * scale_factor(spectrum.unit, "mm/s") ** 2
    return float(np.sqrt(np.median(ms) * sel.sum() / spectrum.enbw_bins))


class _Run:
    """The evidence, checked and read in mm/s RMS, with what the rules share."""

    def __init__(self, ev: RunEvidence, zone_limits: tuple[float, float, float]):
        if not isinstance(ev, RunEvidence):
            raise InputError(f"diagnose: expected RunEvidence, got {type(ev).__name__}")
        spec, bad = ev.spectrum_velocity, None
        if not isinstance(spec, Spectrum) or quantity_of(spec.unit) != VELOCITY \
                or spec.scale not in _SCALE_TO_RMS:
            bad = "spectrum_velocity must be a velocity Spectrum in rms, peak or pp scale"
        for name in ("rpm", "overall_velocity_mm_s"):
            v = getattr(ev, name)
            if not isinstance(v, (int, float, np.integer, np.floating)) or not 0 < v < math.inf:
                bad = f"{name} must be a positive number, got {v!r}"
        if ev.direction not in DIRECTIONS:
            bad = f"direction must be one of {', '.join(DIRECTIONS)}, got {ev.direction!r}"
        if ev.model is not None and ev.shaft not in ev.model.ratios:
            bad = f"shaft {ev.shaft!r} is not one of the model's ({', '.join(ev.model.ratios)})"
        if len(zone_limits) != 3 or not 0 < zone_limits[0] < zone_limits[1] < zone_limits[2]:
            bad = f"zone_limits_mm_s must be three rising positive levels, got {zone_limits!r}"
        if bad:
            raise InputError(f"run evidence: {bad}")
        self.ev, self.zones = ev, tuple(float(z) for z in zone_limits)
        to_mm_s = scale_factor(spec.unit, "mm/s")
        self.peaks = [replace(p, amplitude=p.amplitude * to_mm_s * _SCALE_TO_RMS[spec.scale])
                      for p in ev.peaks]
        self.line_rms = np.sqrt(spec.mean_square) * to_mm_s
        self.freq, self.df, self.shaft_hz = spec.frequency_hz, spec.resolution_hz, ev.rpm / 60.0
        self.shaft, self.overall = ev.shaft or "shaft", float(ev.overall_velocity_mm_s)
        self.baseline = dict(ev.baseline or {})
        ref_hz = self.shaft_hz / ev.model.ratio(ev.shaft) if ev.model is not None else 0.0
        self.sources = sources(ev.model, ref_hz * 60.0, harmonics=3, sidebands=1) if ref_hz else []
        # Lines that explain a peak better than an order: the model's other sources, and
        # every bearing line with its ±1× sidebands (an outer race's too, [1]).
        self.explainers = [(s.name, s.frequency_hz, s.kind) for s in self.sources
                           if not (s.kind == "order" and s.shaft == ev.shaft)]
        self.explainers += [(f"{s.name}{m:+d}×", s.frequency_hz + m * ev.model.ratio(s.shaft)
                             * ref_hz, "bearing")
                            for s in self.sources if s.kind == "bearing" for m in (-1, 1)]
        self.explainers += [(f"{h}×{name}{m:+d}×", h * f_d + m * self.shaft_hz, "bearing")
                            for name, f_d in ev.defect_hz.items()
                            for h in range(1, DEFECT_HARMONICS + 1) for m in (-1, 0, 1)]

    def tol(self, f_hz: float, rel: float = ORDER_TOLERANCE) -> float:
        return max(rel * f_hz, 0.5 * self.df)

    def at(self, f_hz: float, rel: float = ORDER_TOLERANCE):
        """(amplitude, peak) at ``f_hz``: the nearest peak within tolerance, or the
        spectrum's own level there and None when there is no peak."""
        p = _nearest(self.peaks, f_hz, self.tol(f_hz, rel))
        if p is not None:
            return p.amplitude, p
        k = int(round(f_hz / self.df))
        return float(self.line_rms[max(k - 1, 0):k + 2].max(initial=0.0)), None

    def order(self, k: float):
        return self.at(k * self.shaft_hz)

    def above_floor(self, peak: Peak | None) -> bool:
        """Whether ``peak`` stands FLOOR_FACTOR over the local floor (the median line
        within ±max(10 %, 20 lines) of it)."""
        if peak is None:
            return False
        f, w = peak.frequency_hz, max(0.1 * peak.frequency_hz, 20 * self.df)
        lo, hi = np.searchsorted(self.freq, [f - w, f + w])
        return peak.amplitude >= FLOOR_FACTOR * np.median(self.line_rms[max(lo, 1):max(hi, lo + 2)])

    def grade(self, level: float, key: str | None = None, value: float = 0.0,
              evidence: list | None = None) -> str:
        """Zone grade of ``level``, one step up when ``value`` is 6 dB over baseline[key]."""
        severity = SEVERITIES[int(np.searchsorted(self.zones, level, side="right"))]
        ref = self.baseline.get(key) if key else None
        if ref and value >= TREND_RISE * ref:
            evidence.append(Evidence(f"{key} has risen {value / ref:.1f}-fold over the "
                                     f"baseline ({ref:.3g})", None, value, _V, "baseline"))
            severity = SEVERITIES[min(SEVERITIES.index(severity) + 1, 3)]
        return severity


def _nearest(peaks, f_hz: float, tol: float) -> Peak | None:
    """The peak nearest ``f_hz`` within ``tol`` Hz, or None."""
    best, err = None, tol
    for p in peaks or ():
        if abs(p.frequency_hz - f_hz) <= err:
            best, err = p, abs(p.frequency_hz - f_hz)
    return best


def _peak_ev(text: str, p: Peak | None, amp: float, f_hz: float, source: str, unit: str = _V):
    return (Evidence(text, p.frequency_hz, amp, unit, source) if p is not None
            else Evidence(f"{text} (no peak; level there)", f_hz, amp, unit, source))


def _finding(kind: str, title: str, severity: str, ev: list, text: str, **values) -> Finding:
    if severity == "info":
        text += " The level is low; no action is indicated beyond keeping the trend."
    return Finding(kind, title, severity, ev, text, values=values)


def _imbalance(run: _Run) -> Finding | None:
    (a1, p1), (a2, p2), (a3, p3) = run.order(1), run.order(2), run.order(3)
    share = a1 * a1 / run.overall ** 2
    if not run.above_floor(p1) or share < IMBALANCE_ENERGY_SHARE \
            or max(a2, a3) >= HARMONIC_RATIO * a1:
        return None
    s, axial = run.shaft, run.ev.direction == "A"
    ev = [_peak_ev(f"1× holds {share:.0%} of the overall energy", p1, a1, run.shaft_hz,
                   f"{s} 1×"),
          _peak_ev(f"2× is {a2 / a1:.0%} of 1×", p2, a2, 2 * run.shaft_hz, f"{s} 2×"),
          _peak_ev(f"3× is {a3 / a1:.0%} of 1×", p3, a3, 3 * run.shaft_hz, f"{s} 3×"),
          Evidence("overall velocity", None, run.overall, _V, "overall")]
    severity = run.grade(a1, "velocity_1x_mm_s", a1, ev)
    text = (f"Indicates imbalance of the {s} rotor; a qualified person should check for "
            "build-up, wear or loose parts and balance it if confirmed."
            + (" A dominant axial 1× also fits an overhung rotor or angular misalignment; "
               "compare phase across the coupling." if axial else ""))
    return _finding("imbalance", f"Imbalance: 1× dominant {'axially' if axial else 'radially'}",
                    severity, ev, text, share_1x=share, ratio_2x=a2 / a1, ratio_3x=a3 / a1)


def _misalignment(run: _Run) -> Finding | None:
    (a1, p1), (a2, p2) = run.order(1), run.order(2)
    if not (run.above_floor(p1) and run.above_floor(p2)):
        return None
    s, axial, comp = run.shaft, run.ev.direction == "A", run.ev.axial_companion
    ev = [_peak_ev("1×", p1, a1, run.shaft_hz, f"{s} 1×"),
          _peak_ev(f"2× is {a2 / a1:.0%} of 1×", p2, a2, 2 * run.shaft_hz, f"{s} 2×")]
    fired, values = a2 >= HARMONIC_RATIO * a1, {"ratio_2x": a2 / a1}
    if comp and not axial:
        x1, x2 = float(comp.get("1x", 0.0)), float(comp.get("2x", 0.0))
        values.update(axial_ratio_1x=x1 / a1, axial_ratio_2x=x2 / a1)
        ev += [Evidence(f"axial {k}× is {x / a1:.0%} of radial 1×", k * run.shaft_hz, x, _V,
                        f"{s} {k}× axial") for k, x in ((1, x1), (2, x2))]
        fired = fired or x2 >= HARMONIC_RATIO * a1
    if not fired:
        return None
    severity = run.grade(math.hypot(a1, a2), "velocity_2x_mm_s", a2, ev)
    text = (f"Indicates misalignment at the coupling of the {s} shaft; a qualified person should "
            "check the alignment (and soft foot and pipe strain) and correct it if confirmed.")
    return _finding("misalignment", f"Misalignment: high 2× {'axially' if axial else 'radially'}",
                    severity, ev, text, **values)


def _explained(run: _Run, f_hz: float, target_hz: float) -> bool:
    """Whether another line explains a peak at ``f_hz`` better than the order at
    ``target_hz``: closer, or as close and of a kind in _FIXED_KINDS."""
    own = abs(f_hz - target_hz)
    return any(abs(f_hz - f) < own - 1e-9 or (kind in _FIXED_KINDS and abs(f_hz - f) <= own + 1e-9)
               for _, f, kind in run.explainers)


def _looseness(run: _Run) -> Finding | None:
    s, ev, counts = run.shaft, [], {True: 0, False: 0}
    least = LOOSENESS_SHARE * run.order(1)[0]
    for k in [float(k) for k in range(1, 11)] + list(HALF_ORDERS):
        amp, p = run.order(k)
        if run.above_floor(p) and amp >= least and not _explained(run, p.frequency_hz,
                                                                   k * run.shaft_hz):
            counts[k == int(k)] += 1
            ev.append(_peak_ev(f"{k:g}× above the floor", p, amp, k * run.shaft_hz,
                               f"{s} {k:g}×"))
    n_h, n_half = counts[True], counts[False]
    if n_h < LOOSENESS_HARMONICS and n_half < LOOSENESS_HALF_ORDERS:
        return None
    level = math.sqrt(sum(e.amplitude ** 2 for e in ev if e.source_name != f"{s} 1×"))
    text = ("Indicates mechanical looseness (mounting, bearing fit or structure); a qualified "
            "person should check the fasteners, the base and the bearing fits.")
    return _finding("looseness", f"Looseness: {n_h} harmonics, {n_half} half orders",
                    run.grade(level), ev, text, harmonics=n_h, half_orders=n_half)


def _defect_lines(f_d: float, peaks, ok):
    """Harmonics of ``f_d`` among ``peaks`` that pass ``ok(peak)``: list of (h, peak)."""
    found = [(h, _nearest(peaks, h * f_d, DEFECT_TOLERANCE * h * f_d))
             for h in range(1, DEFECT_HARMONICS + 1)]
    return [(h, p) for h, p in found if p is not None and ok(p)]


def _sidebands(run: _Run, lines, peaks, mod_hz: float | None, ok) -> list[tuple[int, int, Peak]]:
    """Sidebands (m = ±1, h, peak) at ±``mod_hz`` around the found lines that pass ``ok``,
    reach SIDEBAND_SHARE of the strongest line and sit on no order of the shaft and no
    blade pass, gear mesh, belt or electrical line."""
    out, least = [], SIDEBAND_SHARE * max((p.amplitude for _, p in lines), default=0.0)
    for h, line in (lines if mod_hz else ()):
        for m in (-1, 1):
            f = line.frequency_hz + m * mod_hz
            p = _nearest(peaks, f, DEFECT_TOLERANCE * f)
            if p is None or p is line or p.amplitude < least or not ok(p):
                continue
            f, tol = p.frequency_hz, run.tol(p.frequency_hz)
            k = round(f / run.shaft_hz)
            if not (k >= 1 and abs(f - k * run.shaft_hz) <= tol) and not any(
                    s.kind in _FIXED_KINDS and abs(f - s.frequency_hz) <= tol for s in run.sources):
                out.append((m, h, p))
    return out


def _defect_table(run: _Run) -> dict[str, float]:
    table = dict(run.ev.defect_hz)
    if not table and run.ev.model is not None:
        mine = [b for b in run.ev.model.bearings if b.shaft == run.ev.shaft]
        for b in mine:
            for fam, f in defect_frequencies_hz(b.geometry, run.ev.rpm).items():
                table[f"{b.label} {fam}" if len(mine) > 1 else fam] = f
    # 2×BSF is the second harmonic of BSF: check it on its own only without BSF.
    return {k: v for k, v in table.items() if not (k.lower().endswith("bsf2") and k[:-1] in table)}


def _bearing(run: _Run) -> list[Finding]:
    table, env, out = _defect_table(run), run.ev.envelope_peaks, []
    ftf = next((v for k, v in table.items() if k.lower().endswith("ftf")), None)
    bb = broadband_velocity_mm_s(run.ev.spectrum_velocity) if table else 0.0
    ref = run.baseline.get("broadband_velocity_mm_s")
    broadband = bb >= BROADBAND_RISE * ref if ref else bb >= BROADBAND_SHARE * run.overall
    env_min = ENVELOPE_FLOOR_FACTOR * (run.ev.envelope_floor_g or 0.0)

    def env_ok(p):
        return p.amplitude >= env_min
    for key, f_d in table.items():
        family = key.split()[-1].upper()
        name = key[:len(key) - len(family)] + family  # "BPFO" or "pump DE BPFO"
        mod = {"BPFI": run.shaft_hz, "BPFO": run.shaft_hz, "BSF": ftf, "BSF2": ftf}.get(family)
        v_lines = _defect_lines(f_d, run.peaks, run.above_floor)
        e_lines = _defect_lines(f_d, env, env_ok) if env is not None else []
        if len(e_lines if env is not None else v_lines) < MIN_DEFECT_HARMONICS:
            continue
        ev = [Evidence(f"{where} line at {h}×{family}", p.frequency_hz, p.amplitude, unit,
                       name if h == 1 else f"{h}×{name}")
              for where, unit, lines in (("envelope", "g", e_lines), ("velocity", _V, v_lines))
              for h, p in lines]
        mod_name = "FTF" if family.startswith("BSF") else "1×"
        bands = [(m, h, p, unit) for peaks, lines, ok, unit in
                 ((env, e_lines, env_ok, "g"), (run.peaks, v_lines, run.above_floor, _V))
                 for m, h, p in _sidebands(run, lines, peaks, mod, ok)]
        ev += [Evidence(f"sideband {'+' if m > 0 else '−'}{mod_name} of {h}×{family}",
                        p.frequency_hz, p.amplitude, unit,
                        f"{'' if h == 1 else f'{h}×'}{name}{'+' if m > 0 else '−'}{mod_name}")
               for m, h, p, unit in bands]
        if broadband:
            ev.append(Evidence("broadband rise of the velocity floor" + (
                f" ({bb / ref:.1f}× the baseline)" if ref else
                f" ({bb / run.overall:.0%} of the overall)"), None, bb, _V, "broadband"))
        if env is None:
            stage, severity = None, "watch"
            text = (f"Defect lines at {family} in the velocity spectrum indicate a bearing "
                    f"defect on the {run.shaft} shaft; a qualified person should measure the "
                    "envelope spectrum to stage it.")
        else:
            stage = 3 if len(bands) >= MIN_SIDEBANDS and v_lines else 2 if broadband else 1
            severity = ("watch", "warning", "serious")[stage - 1]
            text = (f"Indicates {('an early', 'a developing', 'an advanced')[stage - 1]} {family} "
                    f"defect of a bearing on the {run.shaft} shaft; a qualified person should "
                    + ("shorten the measurement interval and check lubrication.",
                       "check lubrication and plan the bearing's replacement.",
                       "plan the bearing's replacement at the earliest opportunity.")[stage - 1])
        out.append(Finding("bearing", f"Bearing defect at {name}" + (
            f", stage {stage}" if stage else ""), severity, ev, text, stage=stage,
            values={"defect_hz": f_d, "broadband_mm_s": bb, "envelope_harmonics": len(e_lines),
                    "velocity_harmonics": len(v_lines), "sidebands": len(bands)}))
    return out


def _gear_measure(run: _Run, g):
    """Mesh and sidebands of gear pair ``g``: (ratio, mesh_hz, evidence), or None when
    the mesh or two sidebands are not above the floor."""
    model = run.ev.model
    f_in, f_out = (model.ratio(x) / model.ratio(run.ev.shaft) * run.shaft_hz
                   for x in (g.driver_shaft, g.driven_shaft))
    mesh = g.driver_teeth * f_in
    # Keep the mesh's window narrower than a quarter of the closest sideband spacing.
    rel = min(ORDER_TOLERANCE, 0.25 * min(f_in, f_out) / mesh)
    a_m, p_m = run.at(mesh, rel)
    if not run.above_floor(p_m):
        return None
    stem, total = f"gear mesh {g.name}", 0.0
    ev = [_peak_ev("gear mesh", p_m, a_m, mesh, stem)]
    for shaft, f_s in ((g.driver_shaft, f_in), (g.driven_shaft, f_out)):
        for j in (-2, -1, 1, 2):
            a, p = run.at(mesh + j * f_s, rel)
            if run.above_floor(p):
                total += a
                ev.append(_peak_ev(f"sideband {j:+d}× {shaft}", p, a, mesh + j * f_s,
                                   f"{stem} {j:+d}× {shaft}"))
    return None if len(ev) < 3 else (total / a_m, mesh, ev)


def _gear_wear(run: _Run) -> list[Finding]:
    out = []
    for g in (run.ev.model.gears if run.ev.model is not None else ()):
        if (measured := _gear_measure(run, g)) is None:
            continue
        (ratio, mesh, ev), ref = measured, run.baseline.get(
            f"gear_sideband_ratio {g.name}", run.baseline.get("gear_sideband_ratio"))
        severity = SEVERITIES[int(np.searchsorted(GEAR_RATIO_LEVELS, ratio, side="right"))]
        values = {"mesh_hz": mesh, "sideband_ratio": ratio, "sidebands": len(ev) - 1}
        if ref:
            values["growth"] = growth = ratio / ref
            grown = SEVERITIES[int(np.searchsorted(GEAR_GROWTH_LEVELS, growth, side="right"))]
            severity = max(severity, grown, key=SEVERITIES.index)
            ev.append(Evidence(f"sideband ratio {growth:.2f}× the baseline ({ref:.3g})", None,
                               ratio, "", "baseline"))
        text = (f"Indicates wear (or eccentricity) of the {g.name} gear pair; a qualified "
                "person should inspect the tooth contact and the oil for wear debris.")
        out.append(_finding("gear_wear", f"Gear wear: sidebands {ratio:.0%} of the mesh",
                            severity, ev, text, **values))
    return out


def diagnose(evidence: RunEvidence, *,
             zone_limits_mm_s: tuple[float, float, float] = DEFAULT_ZONE_LIMITS_MM_S,
             ) -> list[Finding]:
    """Every finding the rules make of one run, most severe first.

    ``zone_limits_mm_s`` (keyword-only) are the A/B, B/C, C/D boundaries in mm/s RMS
    that grade velocity patterns (default ISO 20816-3 group 2, rigid, from memory).
    Raises InputError when the evidence is incomplete or inconsistent (field named).
    """
    run = _Run(evidence, tuple(zone_limits_mm_s))
    found = [f for f in (_imbalance(run), _misalignment(run), _looseness(run)) if f]
    found += _bearing(run) + _gear_wear(run)
    return sorted(found, key=lambda f: -SEVERITIES.index(f.severity))


def baseline_values(evidence: RunEvidence) -> dict[str, float]:
    """The values of a (healthy) run that later runs are compared with:
    :data:`BASELINE_KEYS` in mm/s RMS, and ``gear_sideband_ratio <pair>`` for each gear
    pair whose mesh shows."""
    run = _Run(evidence, DEFAULT_ZONE_LIMITS_MM_S)
    out = {"overall_velocity_mm_s": run.overall, "velocity_1x_mm_s": run.order(1)[0],
           "velocity_2x_mm_s": run.order(2)[0],
           "broadband_velocity_mm_s": broadband_velocity_mm_s(evidence.spectrum_velocity)}
    for g in (evidence.model.gears if evidence.model is not None else ()):
        if (measured := _gear_measure(run, g)) is not None:
            out[f"gear_sideband_ratio {g.name}"] = measured[0]
    return out


def resonance_from_runs(runs, *, tolerance_pct: float = 1.0,
                        exclude_hz: tuple[float, ...] = ()) -> list[Finding]:
    """Peaks that stay at one frequency across runs at different speeds.

    A speed-locked line moves with speed; a peak that stays put in Hz is excited near a
    fixed natural frequency — a resonance (common practice) — or comes from a fixed
    source such as the supply (give those in ``exclude_hz``, Hz).  ``runs`` holds at
    least two ``(rpm, list of Peak)``; with speeds less than :data:`MIN_SPEED_SPREAD`
    apart the two cannot be told apart and the answer is empty.  A peak may move by
    ``tolerance_pct`` % and still be "the same".  Each finding's ``values`` hold its
    ``frequency_hz`` and the ``orders`` it took.
    """
    runs = list(runs)
    bad = [i for i, item in enumerate(runs) if not (isinstance(item, (tuple, list))
           and len(item) == 2 and isinstance(item[0], (int, float, np.number)) and item[0] > 0)]
    if len(runs) < 2 or bad:
        raise InputError("resonance_from_runs: runs must hold at least two (rpm > 0, list of "
                         f"Peak) pairs; got {len(runs)} run(s), bad entries {bad}")
    rpms = np.array([float(r) for r, _ in runs])
    if rpms.max() / rpms.min() - 1.0 < MIN_SPEED_SPREAD:
        return []
    rel, out, taken = tolerance_pct / 100.0, [], []
    for cand in sorted(runs[0][1], key=lambda p: -p.amplitude):
        f = cand.frequency_hz
        matches = [cand] + [_nearest(peaks, f, rel * f) for _, peaks in runs[1:]]
        if any(abs(f - x) <= rel * x for x in [*exclude_hz, *taken]) or None in matches:
            continue
        orders = [float(m.frequency_hz / (r / 60.0)) for m, r in zip(matches, rpms)]
        # Orders 1×…10× of two runs can meet at one frequency by chance (3× of one speed,
        # 2× of another): a match on a low order in two runs or more is not taken.
        if sum(round(o) <= 10 and abs(o - round(o)) <= rel * o for o in orders) >= 2:
            continue
        taken.append(f)
        ev = [Evidence(f"peak at {m.frequency_hz:.1f} Hz = {o:.2f}× at {r:.0f} rpm",
                       m.frequency_hz, m.amplitude, "", "fixed frequency")
              for m, o, r in zip(matches, orders, rpms)]
        out.append(Finding(
            "resonance", f"Resonance near {f:.0f} Hz: fixed across {len(runs)} speeds", "watch",
            ev, (f"Indicates a structural or component resonance near {f:.0f} Hz, excited at "
                 "every speed; a qualified person should confirm it with an impact test before "
                 "running near it for long."),
            values={"frequency_hz": float(np.mean([m.frequency_hz for m in matches])),
                    "orders": orders}))
    return out


def resonance_from_order_cut(rpm, amplitude, *, order: float = 1.0, k: float = 2.0,
                             unit: str = "mm/s") -> list[Finding]:
    """Resonances crossed in an order cut (one order's amplitude against speed).

    Each local maximum is compared with the trend of its neighbours: the straight line,
    in log amplitude against rpm, between the lowest points on either side before a
    higher maximum (its prominence bases).  A maximum ``k`` times that trend (default
    2 = 6 dB, our choice) is a resonance crossed at that speed, at ``order × rpm / 60``
    Hz (common practice).

    ``rpm`` (rev/min, any order) and ``amplitude`` (in ``unit``) are 1-D of the same
    length ≥ 5; ``order`` is the order of the cut (1.0 for 1×), ``k`` > 1.  Each
    finding's ``values``: ``rpm``, ``frequency_hz``, ``amplitude``, ``trend``, ``ratio``.
    """
    r, a = np.asarray(rpm, dtype=float), np.asarray(amplitude, dtype=float)
    if r.ndim != 1 or r.shape != a.shape or r.size < 5 or not np.isfinite(r).all() \
            or not np.isfinite(a).all() or (r <= 0).any() or (a < 0).any():
        raise InputError(f"order cut: rpm (> 0) and amplitude (≥ 0) must be finite, 1-D and "
                         f"of the same length ≥ 5, got shapes {r.shape} and {a.shape}")
    if not (order > 0 and k > 1):
        raise InputError(f"order cut: order must be > 0 and k > 1, got {order!r} and {k!r}")
    idx = np.argsort(r, kind="stable")
    r, a = r[idx], a[idx]
    log_a = np.log(np.maximum(a, max(a.max() * 1e-12, 1e-300)))
    maxima, props = _local_maxima(log_a, prominence=0.0)
    out = []
    for i, lo, hi in zip(maxima, props["left_bases"], props["right_bases"]):
        trend = math.exp(np.interp(r[i], [r[lo], r[hi]], [log_a[lo], log_a[hi]]))
        ratio, f_hz = float(a[i] / trend), float(order * r[i] / 60.0)
        if ratio < k:
            continue
        ev = [Evidence(f"{order:g}× peaks at {r[i]:.0f} rpm, {ratio:.1f}× its neighbours' trend",
                       f_hz, float(a[i]), unit, f"{order:g}× order cut"),
              Evidence(f"trend of the neighbours ({r[lo]:.0f} and {r[hi]:.0f} rpm)", f_hz,
                       trend, unit, "trend")]
        out.append(Finding(
            "resonance", f"Resonance crossed at {r[i]:.0f} rpm ({f_hz:.1f} Hz)", "watch", ev,
            (f"Indicates a resonance near {f_hz:.1f} Hz, crossed at {r[i]:.0f} rpm; a qualified "
             "person should avoid steady running near this speed until it is confirmed "
             "(impact test) and, if needed, detuned."),
            values={"rpm": float(r[i]), "frequency_hz": f_hz, "amplitude": float(a[i]),
                    "trend": trend, "ratio": ratio}))
    return out
