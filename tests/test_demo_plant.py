"""The demo plant: its machines, and each run's story checked from first principles."""

from datetime import timedelta

import numpy as np
import pytest

from engine.bearings import BearingGeometry, defect_orders
from engine.demo_plant import (BEARING_B, FAN_RATIO, PINION_TEETH, PLANT, RUNUP_PROFILE,
                               demo_recording, demo_signal, expected_velocity_mm_s)
from engine.errors import InputError
from engine.recording import DIRECTIONS, Recording

FS = 25600.0
G_N = 9.80665  # standard gravity, m/s² (CGPM 1901, ISO 80000-3)


def velocity_rms_mm_s(x_g: np.ndarray, fs: float, band=(10.0, 1000.0)) -> float:
    """Overall velocity RMS in a band, mm/s, by frequency-domain integration.

    First principles: a line a·e^{jωt} of acceleration is a/(jω) of velocity; with
    numpy.fft's unnormalised rfft, Parseval gives RMS² = 2 Σ|X_k|² / N² over the
    one-sided lines k (none at DC or Nyquist here).  Band 10–1000 Hz: ISO 20816-1
    broadband for machines above 600 rpm (from memory).
    """
    spec = np.fft.rfft(x_g * G_N)
    f = np.fft.rfftfreq(x_g.size, 1 / fs)
    keep = (f >= band[0]) & (f <= band[1])
    v = spec[keep] / (2j * np.pi * f[keep])
    return float(np.sqrt(2 * np.sum(np.abs(v) ** 2)) / x_g.size * 1e3)


def line_amplitude(x: np.ndarray, fs: float, f_hz: float) -> float:
    """Peak amplitude of a sinusoid at ``f_hz``: Hann-windowed DFT evaluated at that
    exact frequency, divided by the window's coherent gain sum(w)/2 (Harris 1978)."""
    w = np.hanning(x.size)
    n = np.arange(x.size)
    return float(2 * np.abs(np.sum(w * x * np.exp(-2j * np.pi * f_hz * n / fs))) / w.sum())


def band_rms(x: np.ndarray, fs: float, lo: float, hi: float) -> float:
    """RMS of the lines between lo and hi, Hz (Parseval with numpy.fft)."""
    spec = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size, 1 / fs)
    keep = (f >= lo) & (f <= hi)
    return float(np.sqrt(2 * np.sum(np.abs(spec[keep]) ** 2)) / x.size)


def test_plant_has_the_machines_and_points_of_the_brief():
    assert PLANT.site == "Demo Works"
    assert [m.tag for m in PLANT.machines] == ["P-101", "P-102", "F-201", "B-301", "G-401",
                                               "M-501"]
    assert PLANT.weeks == 16
    for m in PLANT.machines:
        assert 2 <= len(m.points) <= 3
        assert m.foundation in ("rigid", "flexible") and m.iso_group in (1, 2)
        shafts = dict(m.shafts)
        assert shafts["motor"] == 1.0
        for p in m.points:
            assert p.name == f"{p.location} {p.direction}"
            assert p.direction in DIRECTIONS and p.shaft in shafts
            assert p.bearing is None or (isinstance(p.bearing, BearingGeometry)
                                         and p.bearing.label.startswith("bearing "))
    fan = PLANT.machine("F-201")
    assert fan.shaft_ratio("fan") * fan.nominal_rpm == pytest.approx(890.0)
    assert PLANT.machine("P-101").power_kw == 75.0


def test_every_point_gives_a_recording_of_the_expected_length():
    for m in PLANT.machines:
        for p in m.points:
            rec = demo_recording(m.tag, p.name, 3, fs_hz=FS, duration_s=0.5)
            assert isinstance(rec, Recording)
            assert rec.n_samples == int(0.5 * FS) and rec.fs_hz == FS
            assert rec.channel(0).unit == "g" and rec.channel(0).direction == p.direction
            assert np.all(np.isfinite(rec.channel(0).samples))
            assert rec.rpm == pytest.approx(m.nominal_rpm, rel=0.02)
            assert (rec.tach_channel == 1) == (m.tag == "M-501")


def test_taken_follows_the_weekly_survey():
    first = demo_signal("P-101", "motor DE H", 1)[1]["taken"]
    assert first == PLANT.start
    later = demo_signal("P-102", "pump DE V", 5)[1]["taken"]
    assert later - PLANT.start > timedelta(days=28)
    assert later - PLANT.start < timedelta(days=28, hours=2)
    assert later.tzinfo is not None


def test_p102_overall_rises_through_alert_and_danger():
    # Overall velocity from first principles (velocity_rms_mm_s).  2.8 and 4.5 mm/s are
    # the ISO 20816-3 group 2, rigid foundation zone B/C and C/D boundaries (from
    # memory); the demo is designed to cross them in weeks 11–12 and 14–15.
    weeks = range(9, 17)
    v = [velocity_rms_mm_s(demo_recording("P-102", "pump DE H", w).channel(0).samples, FS)
         for w in weeks]
    assert v[0] < 2.8 and v[-1] > 4.5
    assert all(b > a for a, b in zip(v, v[1:]))
    first_alert = next(w for w, x in zip(weeks, v) if x >= 2.8)
    first_danger = next(w for w, x in zip(weeks, v) if x >= 4.5)
    assert first_alert in (11, 12) and first_danger in (14, 15)
    early = velocity_rms_mm_s(demo_recording("P-102", "pump DE H", 2).channel(0).samples, FS)
    assert 1.0 < early < 1.4
    # The analytic design value agrees with the measured one (noise makes the
    # difference; 10 % allowed).
    sig, info = demo_signal("P-102", "pump DE H", 13)
    assert info["expected_velocity_mm_s"] == pytest.approx(v[13 - 9], rel=0.1)
    assert expected_velocity_mm_s(sig) == info["expected_velocity_mm_s"]


def test_p102_envelope_shows_bpfo_from_week_8():
    # Randall & Antoni (2011): an outer-race defect shows in the envelope spectrum at
    # BPFO.  Envelope: squared magnitude of the analytic signal of the resonance band.
    def envelope_peak(week):
        rec = demo_recording("P-102", "pump DE H", week)
        x = rec.channel(0).samples
        spec = np.fft.fft(x)
        f = np.fft.fftfreq(x.size, 1 / FS)
        spec[(f < 2500) | (f > 3800)] = 0.0  # one-sided band 2.5–3.8 kHz: analytic signal
        env = np.abs(np.fft.ifft(spec)) ** 2
        e = np.abs(np.fft.rfft(env - env.mean()))
        fe = np.fft.rfftfreq(env.size, 1 / FS)
        bpfo_hz = defect_orders(BEARING_B).bpfo * rec.rpm / 60.0
        near = np.abs(fe - bpfo_hz) < 1.0
        floor = np.median(e[(fe > 5) & (fe < 300)])
        return fe[near][np.argmax(e[near])], bpfo_hz, np.max(e[near]) / floor

    peak, bpfo_hz, contrast = envelope_peak(8)
    assert peak == pytest.approx(bpfo_hz, abs=0.5) and contrast > 20
    _, _, contrast_before = envelope_peak(6)
    assert contrast_before < 5


def test_p101_stays_healthy():
    # Below the ISO 20816-3 group 2 rigid B/C boundary, 2.8 mm/s (from memory).
    for w in range(1, PLANT.weeks + 1):
        x = demo_recording("P-101", "pump DE H", w, duration_s=1.0).channel(0).samples
        assert 1.0 < velocity_rms_mm_s(x, FS) < 2.8


def test_b301_two_times_jumps_after_the_motor_change():
    for point in ("motor DE H", "blower DE H", "blower DE A"):
        amps = {}
        for w in (9, 11):
            rec = demo_recording("B-301", point, w, duration_s=4.0)
            amps[w] = line_amplitude(rec.channel(0).samples, FS, 2 * rec.rpm / 60.0)
        assert amps[11] >= 2.5 * amps[9], point


def test_f201_fan_one_times_grows_every_week():
    amps = []
    for w in range(1, PLANT.weeks + 1):
        rec = demo_recording("F-201", "fan DE H", w)
        f_fan = rec.rpm * FAN_RATIO / 60.0
        amps.append(band_rms(rec.channel(0).samples, FS, f_fan - 1.0, f_fan + 1.0))
    assert all(b > a for a, b in zip(amps, amps[1:]))
    first = velocity_rms_mm_s(demo_recording("F-201", "fan DE H", 1).channel(0).samples, FS)
    last = velocity_rms_mm_s(demo_recording("F-201", "fan DE H", 16).channel(0).samples, FS)
    assert first == pytest.approx(1.5, abs=0.3) and last == pytest.approx(4.0, abs=0.4)


def test_g401_mesh_sidebands_rise_with_wear():
    # Mesh at 23 × shaft speed, sidebands at ± 1× (gear kinematics, common practice).
    # The 0.2 % speed wobble spreads lines near 570 Hz over ±1.2 Hz, so each is read as
    # the RMS of a ±4 Hz band, times √2 for a peak amplitude.
    def line(rec, order):
        f = order * rec.rpm / 60.0
        return np.sqrt(2) * band_rms(rec.channel(0).samples, FS, f - 4.0, f + 4.0)

    early = demo_recording("G-401", "gearbox input V", 1, duration_s=4.0)
    late = demo_recording("G-401", "gearbox input V", 16, duration_s=4.0)
    assert line(early, PINION_TEETH) == pytest.approx(0.5, rel=0.1)

    def sidebands(rec):
        return line(rec, PINION_TEETH - 1) + line(rec, PINION_TEETH + 1)

    assert sidebands(late) > 1.5 * sidebands(early)


def test_m501_run_up_crosses_the_resonance():
    rec = demo_recording("M-501", "mixer DE H", 16)
    _, info = demo_signal("M-501", "mixer DE H", 16)
    t_s, rpm = RUNUP_PROFILE
    assert rec.duration_s == pytest.approx(t_s[-1]) and info["rpm"] is None
    # Revolutions = ∫ rpm/60 dt over the piecewise-linear profile (trapezoid rule, exact
    # for straight segments); the 0.2 % wobble may add or drop one pulse.
    revolutions = np.trapezoid(rpm, t_s) / 60.0
    tach = rec.channel(rec.tach_channel).samples > 2.5
    pulses = np.count_nonzero(tach & ~np.concatenate(([False], tach[:-1])))
    assert abs(pulses - revolutions) <= 1
    # 1× is largest where it crosses 15 Hz (900 rpm, at 5 s on the profile): low-pass
    # the waveform below 40 Hz (numpy.fft) and find its largest swing.
    x = rec.channel(0).samples
    spec = np.fft.rfft(x)
    spec[np.fft.rfftfreq(x.size, 1 / FS) > 40.0] = 0.0
    low = np.fft.irfft(spec, x.size)
    t_peak = np.argmax(np.abs(low)) / FS
    assert t_peak == pytest.approx(np.interp(900.0, rpm[1:3], t_s[1:3]), abs=0.4)


def test_runs_are_deterministic():
    a = demo_recording("G-401", "gearbox output H", 5, duration_s=0.5).channel(0).samples
    b = demo_recording("G-401", "gearbox output H", 5, duration_s=0.5).channel(0).samples
    c = demo_recording("G-401", "gearbox output H", 6, duration_s=0.5).channel(0).samples
    assert np.array_equal(a, b) and not np.allclose(a, c)


@pytest.mark.parametrize("args, match", [
    (("X-999", "motor DE H", 1), "X-999"),
    (("P-101", "fan DE H", 1), "fan DE H"),
    (("P-101", "motor DE H", 0), "week"),
    (("P-101", "motor DE H", 17), "week"),
])
def test_unknown_runs_are_refused(args, match):
    with pytest.raises(InputError, match=match):
        demo_signal(*args)
