"""Findings rules on simulated machines with known faults, and on the demo plant."""

import json
import math

import numpy as np
import pytest

from engine.bandfilter import band_waveform
from engine.bearings import BearingGeometry, defect_frequencies_hz, defect_orders
from engine.demo_plant import (BEARING_B, MIXER_RESONANCE, PLANT, demo_recording,
                               demo_signal)
from engine.errors import InputError
from engine.findings import (SEVERITIES, RunEvidence, baseline_values, diagnose,
                             resonance_from_order_cut, resonance_from_runs)
from engine.kinematics import GearPair, MachineModel, Shaft, model_from_demo
from engine.levels import overall_levels
from engine.peaks import Peak, find_peaks
from engine.simulate import GearMesh, Impacts, MachineSignal, Resonance, synthesize
from engine.spectrum import SpectrumSettings, compute_spectrum
from engine.units import STANDARD_GRAVITY, convert_waveform

FS = 25600.0
RPM = 1480.0
F1 = RPM / 60.0
VELOCITY_SETTINGS = SpectrumSettings(fmax_hz=1000.0, lines=1600)
ENVELOPE_SETTINGS = SpectrumSettings(fmax_hz=500.0, lines=800)
#: Demodulation band around the simulated bearing resonance (3150 Hz), wider than twice
#: the envelope Fmax as envelope analysis needs (Randall & Antoni 2011).
ENVELOPE_BAND_HZ = (2000.0, 5000.0)
BEARING = BearingGeometry("test bearing", 9, 17.5, 80.0)
BPFO = defect_orders(BEARING).bpfo


def g_peak(v_rms_mm_s: float, f_hz: float) -> float:
    """g peak of a sinusoid of ``v_rms_mm_s`` at ``f_hz``: a = √2 · v · 2πf / g_n
    (first principles; g_n = 9.80665 m/s², CGPM 1901)."""
    return v_rms_mm_s * math.sqrt(2.0) * 1e-3 * 2.0 * math.pi * f_hz / STANDARD_GRAVITY


def envelope(x: np.ndarray, fs: float):
    """Envelope spectrum in g: engine.envelope when it is there, otherwise band-pass,
    magnitude of the analytic signal (scipy.signal.hilbert) and its spectrum."""
    try:
        from engine.envelope import envelope_spectrum
    except ImportError:
        from scipy.signal import hilbert
        env = np.abs(hilbert(band_waveform(x, fs, ENVELOPE_BAND_HZ)))
        return compute_spectrum(env - env.mean(), fs, unit_in="g", settings=ENVELOPE_SETTINGS)
    return envelope_spectrum(x, fs, band_hz=ENVELOPE_BAND_HZ, settings=ENVELOPE_SETTINGS).spectrum


def evidence_of(x, fs, rpm, *, direction="H", shaft="pump", model=None, defect_hz=None,
                baseline=None, axial=None, with_envelope=True) -> RunEvidence:
    spec = compute_spectrum(x, fs, unit_in="g", unit_out="mm/s", settings=VELOCITY_SETTINGS)
    env = envelope(x, fs) if with_envelope else None
    return RunEvidence(
        spectrum_velocity=spec, peaks=find_peaks(spec, count=40, rpm=rpm), rpm=rpm,
        direction=direction, overall_velocity_mm_s=overall_levels(x, fs, rpm=rpm).velocity_rms_mm_s,
        model=model, shaft=shaft, defect_hz=defect_hz or {}, baseline=baseline,
        axial_companion=axial,
        envelope_peaks=None if env is None else find_peaks(env, count=20),
        envelope_floor_g=None if env is None else float(np.median(env.amplitude)))


def simulated(orders_mm_s: dict, *, seed=1, noise=0.02, rpm=RPM, **extra) -> np.ndarray:
    """Waveform in g of a machine whose orders have the given velocities (mm/s RMS)."""
    orders = {k: (g_peak(v, k * rpm / 60.0), 0.7 * k) for k, v in orders_mm_s.items()}
    orders.update(extra.pop("orders_g", {}))
    sig = MachineSignal(rpm=rpm, orders=orders, noise_g_rms=noise, seed=seed, **extra)
    return synthesize(sig, fs_hz=FS, duration_s=4.0).channels[0].samples


def kinds(findings) -> set[str]:
    return {f.kind for f in findings}


def only(findings, kind):
    hits = [f for f in findings if f.kind == kind]
    assert len(hits) == 1, [(f.kind, f.title) for f in findings]
    return hits[0]


def test_pure_1x_is_imbalance_and_not_misalignment():
    found = diagnose(evidence_of(simulated({1: 4.0}), FS, RPM))
    assert "misalignment" not in kinds(found)
    f = only(found, "imbalance")
    # 4 mm/s is in zone C (2.8–4.5 mm/s) of ISO 20816-3 group 2, rigid (from memory).
    assert f.severity == "warning"
    assert f.values["share_1x"] > 0.95
    one_x = f.evidence[0]
    assert one_x.frequency_hz == pytest.approx(F1, rel=1e-3)
    assert one_x.amplitude == pytest.approx(4.0, rel=0.02)  # g_peak's inverse, first principles
    assert "qualified person" in f.recommendation
    json.dumps([x.as_dict() for x in found])


def test_strong_2x_with_axial_companion_is_misalignment():
    x = simulated({1: 2.0, 2: 1.6})
    f = only(diagnose(evidence_of(x, FS, RPM, axial={"1x": 1.2, "2x": 1.8})), "misalignment")
    assert f.values["ratio_2x"] == pytest.approx(0.8, rel=0.03)
    assert f.values["axial_ratio_2x"] == pytest.approx(0.9, rel=0.03)
    assert f.severity == "watch"  # √(2² + 1.6²) = 2.56 mm/s: zone B (common practice grading)
    assert "imbalance" not in kinds(diagnose(evidence_of(x, FS, RPM)))


def test_axial_2x_alone_makes_the_misalignment_not_axial_1x_alone():
    # Common practice: axial 2× at half the radial 1× points to misalignment; a high axial
    # 1× with little 2× also fits an overhung rotor's imbalance, so it is not enough.
    x = simulated({1: 2.0, 2: 0.4})
    assert "misalignment" not in kinds(diagnose(evidence_of(x, FS, RPM)))
    assert "misalignment" not in kinds(diagnose(evidence_of(
        x, FS, RPM, axial={"1x": 1.6, "2x": 0.2})))
    assert "misalignment" in kinds(diagnose(evidence_of(x, FS, RPM, axial={"1x": 1.0, "2x": 1.5})))


def test_many_harmonics_and_half_orders_are_looseness():
    orders = {1: 2.0, 2: 1.0, 3: 0.8, 4: 0.6, 5: 0.5, 6: 0.4, 7: 0.3, 8: 0.25,
              0.5: 0.4, 1.5: 0.5, 2.5: 0.4}
    f = only(diagnose(evidence_of(simulated(orders), FS, RPM)), "looseness")
    assert f.values["harmonics"] >= 4 and f.values["half_orders"] == 3
    assert {e.source_name for e in f.evidence} >= {"pump 0.5×", "pump 1.5×", "pump 2.5×"}
    assert "looseness" not in kinds(diagnose(evidence_of(simulated({1: 2.0, 2: 0.5}), FS, RPM)))


BASE = {1: 1.0, 2: 0.3}
IMPACTS = Impacts(order=BPFO, amplitude_g=0.5, resonance_hz=3150.0, damping=0.04, slip=0.012)
BROADBAND = {(20.0, 1000.0): 0.3}  # g RMS of band noise: a worn bearing's rise


def bearing_run(**extra):
    x = simulated(BASE, noise=0.03, **extra)
    return diagnose(evidence_of(x, FS, RPM, defect_hz=defect_frequencies_hz(BEARING, RPM)))


def test_envelope_lines_at_bpfo_are_a_stage_1_bearing_defect():
    f = only(bearing_run(bearing_impacts=[IMPACTS]), "bearing")
    assert f.stage == 1 and f.severity == "watch" and "BPFO" in f.title
    lines = [e for e in f.evidence if e.description.startswith("envelope line")]
    assert len(lines) >= 2
    for e in lines:  # each harmonic h within 2 % of h × BPFO (slip, Randall & Antoni 2011)
        h = round(e.frequency_hz / (BPFO * F1))
        assert e.frequency_hz == pytest.approx(h * BPFO * F1, rel=0.02)


def test_a_broadband_rise_makes_it_stage_2():
    f = only(bearing_run(bearing_impacts=[IMPACTS], noise_bands=BROADBAND), "bearing")
    assert f.stage == 2 and f.severity == "warning"
    assert any(e.source_name == "broadband" for e in f.evidence)


def test_sidebands_and_velocity_lines_make_it_stage_3():
    modulated = Impacts(order=BPFO, amplitude_g=1.0, resonance_hz=3150.0, damping=0.04,
                        slip=0.012, modulation_order=1.0, modulation_depth=0.6)
    lines = {BPFO: (g_peak(1.5, BPFO * F1), 0.0), BPFO - 1: (g_peak(0.8, (BPFO - 1) * F1), 0.0),
             BPFO + 1: (g_peak(0.8, (BPFO + 1) * F1), 0.0)}
    f = only(bearing_run(bearing_impacts=[modulated], noise_bands=BROADBAND, orders_g=lines),
             "bearing")
    assert f.stage == 3 and f.severity == "serious"
    sidebands = [e for e in f.evidence if e.description.startswith("sideband")]
    assert len(sidebands) >= 2
    for e in sidebands:  # at h × BPFO ± 1× (Randall & Antoni 2011: load-zone modulation)
        assert min(abs(e.frequency_hz - (h * BPFO + m) * F1) for h in (1, 2, 3)
                   for m in (-1, 1)) <= 0.02 * e.frequency_hz


def test_a_healthy_bearing_gives_no_bearing_finding():
    assert "bearing" not in kinds(bearing_run())


def test_defect_lines_are_matched_within_slip_and_not_beyond():
    # Randall & Antoni (2011): rolling elements slip 1–2 %, so lines 1 % low still belong
    # to BPFO and lines 5 % off do not.
    x = simulated({1: 1.0}, noise=0.01)
    ev = evidence_of(x, FS, RPM, defect_hz={"bpfo": BPFO * F1}, with_envelope=False)

    def peaks(scale):
        return [Peak(h * BPFO * F1 * scale, 0.1 / h, 0, 30.0) for h in (1, 2, 3)]

    ev.envelope_peaks, ev.envelope_floor_g = peaks(0.99), 1e-3
    assert only(diagnose(ev), "bearing").stage == 1
    ev.envelope_peaks = peaks(0.95)
    assert "bearing" not in kinds(diagnose(ev))
    ev.envelope_floor_g = 0.1  # the same lines, now inside the envelope floor
    ev.envelope_peaks = peaks(1.0)
    assert "bearing" not in kinds(diagnose(ev))


GEARBOX = MachineModel((Shaft("input", 1.0), Shaft("output")),
                       gears=(GearPair("input", "output", 23, 67),))


def gear_run(sideband_g: float, seed: int) -> RunEvidence:
    x = simulated({1: 0.6}, seed=seed, noise=0.01,
                  gear_mesh=GearMesh(23, 0.5, 1.0, sideband_g, 2))
    return evidence_of(x, FS, RPM, shaft="input", model=GEARBOX, with_envelope=False)


def expected_ratio(sideband_g: float) -> float:
    """Sideband sum over mesh in velocity: each line a (g) at f reads a/(2πf) (first
    principles); the simulator puts pair n at 1/n of the first (engine.simulate)."""
    mesh = 23 * F1
    total = sum(sideband_g / abs(j) / ((23 + j) * F1) for j in (-2, -1, 1, 2))
    return total / (0.5 / mesh)


def test_gear_mesh_with_growing_sidebands_is_gear_wear():
    base = baseline_values(gear_run(0.03, seed=5))
    ratio0 = base["gear_sideband_ratio input–output"]
    assert ratio0 == pytest.approx(expected_ratio(0.03), rel=0.05)
    worn = gear_run(0.09, seed=6)
    f = only(diagnose(worn), "gear_wear")
    assert f.values["mesh_hz"] == pytest.approx(23 * F1, rel=1e-9)  # teeth × shaft speed
    assert f.values["sideband_ratio"] == pytest.approx(expected_ratio(0.09), rel=0.05)
    worn.baseline = base
    grown = only(diagnose(worn), "gear_wear")
    assert grown.values["growth"] == pytest.approx(3.0, rel=0.08)
    assert grown.severity == "serious"
    assert SEVERITIES.index(grown.severity) > SEVERITIES.index(f.severity)
    assert only(diagnose(gear_run(0.03, seed=7)), "gear_wear").severity == "info"


def fixed_tone_runs(speeds):
    runs = []
    for rpm in speeds:
        sig = MachineSignal(rpm=rpm, orders={1: (0.05, 0.0), 2: (0.03, 1.0), 3: (0.02, 2.0)},
                            fixed_tones_hz={800.0: 0.2}, noise_g_rms=0.01, seed=int(rpm))
        x = synthesize(sig, fs_hz=12800.0, duration_s=4.0).channels[0].samples
        spec = compute_spectrum(x, 12800.0, unit_out="mm/s", settings=VELOCITY_SETTINGS)
        runs.append((rpm, find_peaks(spec, count=20, rpm=rpm)))
    return runs


def test_a_peak_fixed_at_800_hz_across_three_speeds_is_a_resonance():
    runs = fixed_tone_runs((1200.0, 1500.0, 1800.0))
    (f,) = resonance_from_runs(runs)
    assert f.kind == "resonance"
    assert f.values["frequency_hz"] == pytest.approx(800.0, abs=0.5)
    # First principles: a fixed 800 Hz line is 40×, 32× and 26.7× at these speeds.
    assert f.values["orders"] == pytest.approx([40.0, 32.0, 80.0 / 3.0], rel=1e-3)
    assert resonance_from_runs(runs, exclude_hz=(800.0,)) == []
    assert resonance_from_runs(fixed_tone_runs((1500.0, 1510.0))) == []
    with pytest.raises(InputError, match="at least two"):
        resonance_from_runs(runs[:1])


def test_order_cut_bump_is_a_resonance_at_the_right_rpm(rng):
    # Thomson, Theory of Vibration: a single-degree-of-freedom response |1/(1 − r² + jr/Q)|
    # peaks at r = √(1 − 2ζ²), ζ = 1/(2Q): 15 Hz, Q = 10 → 897.75 rpm.
    rpm = np.arange(300.0, 1500.0, 2.0)
    res = Resonance(15.0, 10.0)
    # A little noise makes many small local maxima, which must not count.
    amp = np.abs(res.gain(rpm / 60.0)) * (1.0 + 1e-4 * rng.standard_normal(rpm.size))
    expected = 60.0 * 15.0 * math.sqrt(1.0 - 2.0 * (1.0 / 20.0) ** 2)
    (f,) = resonance_from_order_cut(rpm[::-1], amp[::-1])  # any order of speeds
    assert f.values["rpm"] == pytest.approx(expected, abs=2.0)
    assert f.values["frequency_hz"] == pytest.approx(f.values["rpm"] / 60.0)
    assert f.values["ratio"] > 5.0
    (f2,) = resonance_from_order_cut(rpm, amp, order=2.0)
    assert f2.values["frequency_hz"] == pytest.approx(2.0 * f.values["rpm"] / 60.0)
    assert resonance_from_order_cut(rpm, 1000.0 / rpm) == []
    noisy = (1000.0 / rpm) * (1.0 + 0.05 * rng.standard_normal(rpm.size))
    assert resonance_from_order_cut(rpm, noisy) == []  # 5 % scatter is not a 6 dB bump
    with pytest.raises(InputError, match="same length"):
        resonance_from_order_cut(rpm, amp[:-1])


def test_demo_mixer_run_up_crosses_its_resonance():
    # Order cut of 1× through the demo run-up by demodulating at the shaft angle of the
    # speed profile (first principles: θ = ∫ f dt); the demo's resonance is 15 Hz.
    rec = demo_recording("M-501", "mixer DE H", 16)
    _, info = demo_signal("M-501", "mixer DE H", 16)
    fs = rec.fs_hz
    v = convert_waveform(rec.channels[0].samples, fs, "g", "mm/s", band_hz=(2.0, 1000.0))
    t = np.arange(v.size) / fs
    rpm_t = np.interp(t, *info["rpm_profile"])
    theta = np.concatenate(([0.0], np.cumsum(0.5 * (rpm_t[1:] + rpm_t[:-1]) / 60.0 / fs)))
    n = int(0.5 * fs)
    w = np.hanning(n)
    starts = range(0, v.size - n, n // 2)
    rpm = np.array([rpm_t[i:i + n].mean() for i in starts])
    amp = np.array([2 * abs(np.sum(w * v[i:i + n] * np.exp(-2j * np.pi * theta[i:i + n])))
                    / w.sum() for i in starts])
    keep = rpm > 350.0  # the first second sits at 300 rpm
    (f,) = resonance_from_order_cut(rpm[keep], amp[keep])
    assert f.values["frequency_hz"] == pytest.approx(MIXER_RESONANCE.frequency_hz, rel=0.05)


def test_a_healthy_machine_gives_nothing_above_info():
    found = diagnose(evidence_of(simulated({1: 0.8}, noise=0.02), FS, RPM,
                                 defect_hz=defect_frequencies_hz(BEARING, RPM)))
    assert all(f.severity == "info" for f in found), [(f.kind, f.severity) for f in found]


def test_bad_evidence_raises_input_error_naming_the_field():
    ev = evidence_of(simulated({1: 1.0}), FS, RPM, with_envelope=False)
    ev.direction = "X"
    with pytest.raises(InputError, match="direction"):
        diagnose(ev)
    ev.direction, ev.model, ev.shaft = "H", GEARBOX, "pump"
    with pytest.raises(InputError, match="shaft 'pump'"):
        diagnose(ev)
    ev.model, ev.spectrum_velocity = None, ev.spectrum_velocity.converted("um")
    with pytest.raises(InputError, match="spectrum_velocity"):
        diagnose(ev)


# ---- the demo plant through a small pipeline -------------------------------------------

def demo_evidence(tag: str, point_name: str, week: int, axial_point: str | None = None):
    machine = PLANT.machine(tag)
    point = machine.point(point_name)
    rec = demo_recording(tag, point_name, week, duration_s=4.0)
    rpm = rec.rpm * machine.shaft_ratio(point.shaft)
    ev = evidence_of(rec.channels[0].samples, rec.fs_hz, rpm, direction=point.direction,
                     shaft=point.shaft, model=model_from_demo(machine))
    if axial_point is not None:
        ax = demo_evidence(tag, axial_point, week)
        ev.axial_companion = {"1x": _order(ax, 1), "2x": _order(ax, 2)}
    return ev


def _order(ev: RunEvidence, k: int) -> float:
    p = min(ev.peaks, key=lambda p: abs(p.frequency_hz - k * ev.rpm / 60.0))
    assert p.frequency_hz == pytest.approx(k * ev.rpm / 60.0, rel=0.01)
    return p.amplitude


@pytest.mark.parametrize("point", ["fan DE H", "fan NDE A"])
def test_demo_fan_at_week_16_shows_imbalance(point):
    found = diagnose(demo_evidence("F-201", point, 16))
    f = only(found, "imbalance")
    assert f.evidence[0].source_name == "fan 1×"
    assert f.severity in ("watch", "warning")
    assert "misalignment" not in kinds(found)


def test_demo_blower_at_week_12_shows_misalignment():
    f = only(diagnose(demo_evidence("B-301", "blower DE H", 12, axial_point="blower DE A")),
             "misalignment")
    assert f.values["ratio_2x"] > 1.0 and f.values["axial_ratio_2x"] > 0.5
    before = diagnose(demo_evidence("B-301", "blower DE H", 9))
    assert "misalignment" not in kinds(before)


def test_demo_pump_p102_drive_end_at_week_15_has_a_staged_bearing_defect():
    ev = demo_evidence("P-102", "pump DE H", 15)
    f = only(diagnose(ev), "bearing")
    assert f.stage >= 2 and "BPFO" in f.title
    assert f.values["defect_hz"] == pytest.approx(defect_orders(BEARING_B).bpfo * ev.rpm / 60)


@pytest.mark.parametrize("point", ["motor DE H", "pump DE H", "pump DE V"])
def test_demo_pump_p101_at_week_15_has_nothing_above_info(point):
    found = diagnose(demo_evidence("P-101", point, 15))
    assert all(f.severity == "info" for f in found), [(f.kind, f.severity) for f in found]
