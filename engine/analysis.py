"""The analysis of one run at one point: spectra, values, labelled peaks and findings.

This is the process → assess part of the chain for a stored run.  The same function
runs on import, in the batch engine (``engine.batch``) and from the app, so that a run
analysed anywhere gives the same results.

What it computes (units in the value names, see ``engine.results.STANDARD_VALUES``):

* the velocity spectrum in mm/s RMS with the point's settings (Fmax, lines, window,
  averages, overlap), its 40 largest peaks labelled with the machine's sources
  (``engine.kinematics``), and the 0.5×, 1×, 2×, 3× amplitudes of the point's shaft;
* the overall levels (ISO 20816-1 broadband velocity, acceleration RMS/peak, crest
  factor, kurtosis) from the waveform;
* for an acceleration channel, the envelope spectrum (g RMS) of the band the fast
  kurtogram picks (Antoni 2007), and the amplitude at each defect frequency of the
  bearings on the point's shaft, within ±2 % for slip (Randall & Antoni 2011);
* the findings of ``engine.findings.diagnose``;
* the value of every band of the point's alarm plan (``band:<name>``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .bearings import FAMILIES
from .errors import EngineError, InputError
from .peaks import find_peaks
from .recording import Recording
from .results import STANDARD_VALUES, RunResults, band_value_name
from .spectrum import SpectrumSettings, compute_spectrum
from .units import unit as unit_of

#: Envelope spectrum: Fmax (Hz) and the line counts tried, most first; the first whose
#: frame fits the record is used (a 2 s run at 25.6 kHz gets 400 lines).
ENVELOPE_FMAX_HZ = 500.0
ENVELOPE_LINES = (1600, 800, 400, 200)
#: Half-width of the window around k× in which the order amplitude is read: the larger
#: of 2 lines and this fraction of the frequency (speed uncertainty, common practice).
ORDER_WINDOW = 0.02
#: Slip allowance for defect frequencies in the envelope (Randall & Antoni 2011: 1–2 %).
DEFECT_WINDOW = 0.02


@dataclass
class PointSetup:
    """What the analysis needs to know about a point and its machine.

    ``rpm`` in :func:`analyse_recording` is the machine's reference shaft speed (as
    stored with the run); the point's shaft turns at ``rpm × ratio``.
    """

    path: str
    props: dict
    model: object | None = None          # engine.kinematics.MachineModel
    shaft: str = ""
    ratio: float = 1.0
    zone_limits_mm_s: tuple[float, float, float] | None = None
    plan: object | None = None           # engine.alarms.plan.AlarmPlan
    settings: dict = field(default_factory=dict)

    def spectrum_settings(self) -> SpectrumSettings:
        p = {**self.props, **self.settings}
        fmax = p.get("fmax_hz")
        avg = int(p.get("averages") or 0)
        return SpectrumSettings(
            fmax_hz=None if fmax is None or (isinstance(fmax, float) and math.isnan(fmax))
            else float(fmax), lines=int(p.get("lines") or 1600),
            window=str(p.get("window") or "hann"), averages=avg or None,
            overlap=float(p.get("overlap", 0.5)), scale="rms")


def channel_index(rec: Recording, props: dict) -> int:
    """The channel a point's analysis uses: its ``channel`` property, else the first
    channel that is not the tachometer."""
    ch = int(props.get("channel", -1))
    if ch >= 0:
        if ch >= len(rec.channels):
            raise InputError(f"point channel {ch} does not exist (the run has "
                             f"{len(rec.channels)} channels)")
        return ch
    for i in range(len(rec.channels)):
        if i != rec.tach_channel:
            return i
    raise InputError("the run has no vibration channel (only a tachometer)")


def _order_amplitude(spec, f_hz: float) -> float:
    if not (f_hz > 0) or f_hz > spec.fmax_hz:
        return math.nan
    half = max(2.0 * spec.resolution_hz, ORDER_WINDOW * f_hz)
    sel = (spec.frequency_hz >= f_hz - half) & (spec.frequency_hz <= f_hz + half)
    if not sel.any():
        return math.nan
    # Sum of the lines of the tone (within the window's main lobe) over the ENBW gives
    # the tone's RMS whatever the window (Heinzel et al. 2002, eq. for band power).
    i = int(np.flatnonzero(sel)[np.argmax(spec.amplitude[sel])])
    lo, hi = max(i - 2, 0), min(i + 3, spec.amplitude.size)
    power = float(spec.mean_square[lo:hi].sum()) * spec.resolution_hz / spec.enbw_hz
    return math.sqrt(power)


def _envelope_line(env, f_hz: float) -> float:
    if env is None or not (f_hz > 0) or f_hz * (1 + DEFECT_WINDOW) > env.fmax_hz:
        return math.nan
    sel = np.abs(env.frequency_hz - f_hz) <= max(DEFECT_WINDOW * f_hz, env.resolution_hz)
    return float(env.amplitude[sel].max()) if sel.any() else math.nan


def _envelope(x_g: np.ndarray, fs: float, source: str):
    from .envelope import envelope_spectrum

    for lines in ENVELOPE_LINES:
        if lines / ENVELOPE_FMAX_HZ * fs <= x_g.size:   # one frame, in samples at fs
            settings = SpectrumSettings(fmax_hz=ENVELOPE_FMAX_HZ, lines=lines, window="hann",
                                        scale="rms")
            try:
                return envelope_spectrum(x_g, fs, settings=settings, unit="g", source=source)
            except InputError:
                return None
    return None


def _defect_hz(setup: PointSetup, shaft_rpm: float) -> dict[str, float]:
    """Defect frequencies of the bearings on the point's shaft; the bearing at the
    point's location first (its keys plain ``bpfo`` …, the others prefixed)."""
    from .bearings import defect_frequencies_hz

    model = setup.model
    if model is None or not setup.shaft or not (shaft_rpm > 0):
        return {}
    loc = setup.props.get("location", "")
    on_shaft = [b for b in model.bearings if b.shaft == setup.shaft]
    on_shaft.sort(key=lambda b: b.label != loc)
    out: dict[str, float] = {}
    for i, b in enumerate(on_shaft):
        f = defect_frequencies_hz(b.geometry, shaft_rpm)
        for k, v in f.items():
            out[k if i == 0 else f"{b.label} {k}"] = float(v)
    return out


def analyse_recording(rec: Recording, setup: PointSetup, *, run_id: str, taken_s: float,
                      rpm: float, quality: str = "ok",
                      axial_companion: dict | None = None) -> RunResults:
    """Analyse one run (see the module notes); ``rpm`` is the reference shaft speed.

    Raises InputError when the run cannot be analysed at the point's settings (the
    message names the point and the problem).
    """
    from .findings import RunEvidence, diagnose
    from .kinematics import label_peaks, sources
    from .levels import overall_levels

    src = f"{setup.path} run {run_id}"
    ch = rec.channels[channel_index(rec, setup.props)]
    fs = float(rec.fs_hz)
    x = np.asarray(ch.samples, dtype=np.float64)
    u = unit_of(ch.unit, source=src, field="unit")
    if u.quantity not in ("acceleration", "velocity", "displacement"):
        raise InputError(f"{src}: channel {ch.name!r} is in {ch.unit}, not a vibration unit")
    ref_rpm = float(rpm) if rpm is not None and rpm > 0 else math.nan
    shaft_rpm = ref_rpm * setup.ratio
    settings = setup.spectrum_settings()
    try:
        spec = compute_spectrum(x, fs, unit_in=u.symbol, unit_out="mm/s", settings=settings)
        lv = overall_levels(x, fs, unit_in=u.symbol,
                            rpm=None if math.isnan(shaft_rpm) else shaft_rpm, source=src)
    except InputError as exc:
        raise InputError(f"{src}: {exc}") from None
    f1 = shaft_rpm / 60.0
    values = dict.fromkeys(STANDARD_VALUES, math.nan)
    values.update(overall_velocity_mm_s=lv.velocity_rms_mm_s,
                  acceleration_rms_g=lv.acceleration_rms_g,
                  acceleration_peak_g=lv.acceleration_peak_g,
                  crest_factor=lv.crest_factor, kurtosis=lv.kurtosis, rpm=shaft_rpm)
    for name, k in (("half_x_mm_s", 0.5), ("1x_mm_s", 1), ("2x_mm_s", 2), ("3x_mm_s", 3)):
        values[name] = _order_amplitude(spec, k * f1)
    peaks = find_peaks(spec, count=40, rpm=None if math.isnan(shaft_rpm) else shaft_rpm,
                       min_frequency_hz=3.0 * spec.resolution_hz)
    srcs = sources(setup.model, ref_rpm) if setup.model is not None and ref_rpm > 0 else []
    labelled = label_peaks(peaks, srcs, tolerance_hz=spec.resolution_hz)
    env_res = None
    if u.quantity == "acceleration":
        x_g = x * (u.to_si / unit_of("g").to_si)
        env_res = _envelope(x_g, fs, src)
    env = None if env_res is None else env_res.spectrum
    defect_hz = _defect_hz(setup, shaft_rpm)
    env_peaks = []
    if env is not None:
        values["envelope_rms_g"] = math.sqrt(float(env.mean_square[1:].sum()))
        for k in ("ftf", "bsf", "bpfo", "bpfi"):
            values[f"{k}_g"] = _envelope_line(env, defect_hz.get(k, math.nan))
        epk = find_peaks(env, count=20, min_frequency_hz=2.0 * env.resolution_hz)
        env_peaks = [_peak_dict(lp, shaft_rpm) for lp in label_peaks(
            epk, [s for s in srcs if s.kind in ("order", "bearing")
                  or (s.kind == "sideband" and s.family in FAMILIES)],
            tolerance_hz=env.resolution_hz, tolerance_pct=2.0)]
    findings = []
    if not math.isnan(shaft_rpm):
        ev = RunEvidence(
            spectrum_velocity=spec, peaks=peaks, rpm=shaft_rpm,
            direction=str(setup.props.get("direction") or "R"),
            overall_velocity_mm_s=lv.velocity_rms_mm_s, model=setup.model,
            shaft=setup.shaft if setup.model is not None else "",
            envelope_peaks=None if env is None else find_peaks(env, count=20),
            envelope_floor_g=None if env is None else float(np.median(env.amplitude)),
            defect_hz={k: v for k, v in defect_hz.items() if " " not in k},
            axial_companion=axial_companion)
        try:
            kw = {} if setup.zone_limits_mm_s is None else {
                "zone_limits_mm_s": setup.zone_limits_mm_s}
            findings = [f.as_dict() for f in diagnose(ev, **kw)]
        except EngineError as exc:
            findings = [{"kind": "note", "title": "findings not evaluated", "severity": "info",
                         "evidence": [], "recommendation": str(exc), "stage": None,
                         "values": {}}]
    if setup.plan is not None:
        from .alarms.measure import MeasureInput, measure_plan

        acc = compute_spectrum(x, fs, unit_in=u.symbol, unit_out="g", settings=settings) \
            if any(unit_of(b.unit).quantity == "acceleration" for b in setup.plan.bands
                   if b.unit not in ("", "1")) else None
        inp = MeasureInput(velocity=spec, envelope=env,
                           overall_velocity_mm_s=lv.velocity_rms_mm_s,
                           crest_factor=lv.crest_factor, kurtosis=lv.kurtosis, rpm=shaft_rpm,
                           defect_hz=defect_hz, acceleration=acc)
        for name, v in measure_plan(setup.plan, inp).items():
            values[band_value_name(name)] = float(v)
    return RunResults(
        run_id=run_id, point=setup.path, taken_s=float(taken_s), rpm=shaft_rpm,
        settings={"spectrum": {"fmax_hz": spec.fmax_hz, "lines": spec.lines,
                               "window": spec.window, "averages": spec.averages,
                               "overlap": spec.overlap},
                  "envelope": None if env is None else {"fmax_hz": env.fmax_hz,
                                                        "lines": env.lines,
                                                        "auto_band": env_res.auto}},
        spectrum=spec, envelope=env,
        envelope_band_hz=None if env_res is None else tuple(map(float, env_res.band_hz)),
        values=values, labelled_peaks=[_peak_dict(lp, shaft_rpm) for lp in labelled],
        envelope_peaks=env_peaks, findings=findings, quality=quality,
        plan_digest="" if setup.plan is None else setup.plan.digest())


def _peak_dict(lp, shaft_rpm: float) -> dict:
    p = lp.peak
    order = p.frequency_hz / (shaft_rpm / 60.0) if shaft_rpm > 0 else None
    return {"frequency_hz": float(p.frequency_hz), "amplitude": float(p.amplitude),
            "order": order,
            "sources": [{"name": s.name, "kind": s.kind, "frequency_hz": float(s.frequency_hz),
                         "error_hz": float(e)} for s, e in lp.matches]}
