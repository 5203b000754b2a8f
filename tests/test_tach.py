"""Tachometer pulses against analytic pulse trains (engine.simulate's tach channel)."""

import numpy as np
import pytest

from engine.errors import InputError
from engine.simulate import TACH_DUTY, MachineSignal, synthesize
from engine.tach import detect_pulses, speed_profile

FS = 25600.0


def run_up(t):
    """600 → 3600 rpm in 10 s, linear."""
    return 600.0 + 300.0 * np.clip(t, 0.0, 10.0)


def _tach(ppr, profile=run_up, seconds=10.0):
    sig = MachineSignal(rpm=600.0, speed_wobble=0.0, orders={1.0: (1.0, 0.0)})
    rec = synthesize(sig, fs_hz=FS, duration_s=seconds, rpm_profile=profile, tach_ppr=ppr)
    return rec.channels[rec.tach_channel].samples


def _true_rise_times(ppr, seconds=10.0):
    """Times at which θ · ppr passes a whole number for the linear run-up
    (θ = 10 t + 2.5 t² rev, engine.simulate's integral of the speed)."""
    k = np.arange(1, int((10 * seconds + 2.5 * seconds ** 2) * ppr))
    theta = k / ppr
    return (-10.0 + np.sqrt(100.0 + 10.0 * theta)) / 5.0


@pytest.mark.parametrize("ppr", [1, 4])
def test_rpm_follows_the_true_run_up(ppr):
    # The speed over whole revolutions, placed at the middle of the span, equals the
    # instantaneous speed there for a linear ramp (mean value of a linear function):
    # within 0.1 % of the profile given to engine.simulate.
    r = detect_pulses(_tach(ppr), FS, pulses_per_rev=ppr)
    assert r.warnings == [] and r.pulses_per_rev == ppr
    np.testing.assert_allclose(r.rpm, run_up(r.rpm_times_s), rtol=1e-3)
    # Pulse times against the analytic rising edges (engine.simulate's tach rises
    # when θ · ppr passes a whole number): within one sample.
    true = _true_rise_times(ppr)
    assert r.pulse_times_s.size == true.size
    np.testing.assert_allclose(r.pulse_times_s, true, atol=1.0 / FS)
    t, rpm = speed_profile(r)
    np.testing.assert_array_equal(rpm, r.rpm)
    np.testing.assert_array_equal(t, r.rpm_times_s)


def test_falling_edges_lag_by_the_duty_cycle():
    # engine.simulate's pulse is high for TACH_DUTY of each period: at a steady
    # 1500 rpm with 4 pulses per rev the falling edge follows the rising one by
    # TACH_DUTY / (4 × 25 Hz).
    tach = _tach(4, profile=lambda t: np.full_like(t, 1500.0), seconds=2.0)
    rise = detect_pulses(tach, FS, pulses_per_rev=4)
    fall = detect_pulses(tach, FS, pulses_per_rev=4, edge="falling")
    lag = TACH_DUTY / (4 * 25.0)
    # The record starts high (on a pulse), so the first falling edge belongs to the
    # pulse at t = 0, whose rise is not in the record.
    assert fall.pulse_times_s[0] == pytest.approx(lag, abs=1.0 / FS)
    n = rise.pulse_times_s.size
    np.testing.assert_allclose(fall.pulse_times_s[1:n + 1], rise.pulse_times_s + lag,
                               atol=1.0 / FS)
    np.testing.assert_allclose(fall.rpm, 1500.0, rtol=1e-3)


def test_sub_sample_timing_of_an_analog_edge():
    # A sine tach crosses zero upwards at t = k / f exactly (analytic zero
    # crossings); a sine has no curvature at its zero crossing, so linear
    # interpolation between the samples around it is exact to well under a
    # thousandth of a sample (7.3 Hz sampled at 1 kHz: 0.046 rad per sample).
    fs, f = 1000.0, 7.3
    t = np.arange(int(fs * 5)) / fs
    x = np.sin(2 * np.pi * f * t)
    r = detect_pulses(x, fs, threshold=0.0)
    np.testing.assert_allclose(r.pulse_times_s, np.arange(1, r.pulse_times_s.size + 1) / f,
                               atol=1e-3 / fs)
    np.testing.assert_allclose(r.rpm, 60 * f, rtol=1e-6)
    # The automatic threshold: mid-way between the medians of the two halves.
    assert detect_pulses(x, fs).threshold == pytest.approx(0.0, abs=0.01)


def test_missing_and_extra_pulses_are_reported_and_repaired():
    tach = _tach(4)
    good = detect_pulses(tach, FS, pulses_per_rev=4)
    p = good.pulse_times_s
    broken = tach.copy()
    # Remove the whole pulse at about 3 s (its high part lasts TACH_DUTY of a period).
    k = int(np.searchsorted(p, 3.0))
    a = int(np.ceil(p[k] * FS))
    broken[a - 1:a + int(0.6 * (p[k + 1] - p[k]) * FS)] = 0.0
    # A glitch half-way between two pulses at about 6 s, one just after a pulse at 8 s.
    k2 = int(np.searchsorted(p, 6.0))
    g1 = int(0.5 * (p[k2] + p[k2 + 1]) * FS) + 20
    k3 = int(np.searchsorted(p, 8.0))
    g2 = int((p[k3] + 0.3 * (p[k3 + 1] - p[k3])) * FS)
    for g in (g1, g2):
        broken[g:g + 3] = 5.0
    r = detect_pulses(broken, FS, pulses_per_rev=4)
    missing = [w for w in r.warnings if "missing" in w]
    extra = [w for w in r.warnings if "extra" in w]
    assert len(missing) == 1 and "after 2.99" in missing[0]
    assert len(extra) == 2 and "6.01" in extra[0] and "8.00" in extra[1]
    np.testing.assert_allclose(r.extra_times_s, [g1 / FS, g2 / FS], atol=2.0 / FS)
    assert r.missing_times_s.size == 1
    # The filled pulse lands on the true one (interpolated from its neighbours).
    assert r.missing_times_s[0] == pytest.approx(p[k], abs=2.0 / FS)
    assert r.pulse_times_s.size == p.size
    np.testing.assert_allclose(r.pulse_times_s, p, atol=2.0 / FS)
    np.testing.assert_allclose(r.rpm, run_up(r.rpm_times_s), rtol=1e-3)


def test_levels_threshold_and_hysteresis_on_a_noisy_offset_tach(rng):
    # 0.5 V low, 4.5 V high with noise: the automatic threshold is mid-way (2.5 V);
    # slow edges with noise do not trigger twice thanks to the hysteresis.
    fs, f = 10000.0, 20.0
    t = np.arange(int(fs * 3)) / fs
    square = np.where(np.mod(t * f, 1.0) < 0.3, 4.5, 0.5)
    slow = np.convolve(square, np.ones(25) / 25, mode="same")  # 2.5 ms edges
    x = slow + 0.05 * rng.standard_normal(t.size)
    r = detect_pulses(x, fs)
    assert r.threshold == pytest.approx(2.5, abs=0.05)
    assert r.warnings == []
    np.testing.assert_allclose(np.diff(r.pulse_times_s), 1.0 / f, atol=3.0 / fs)
    bare = detect_pulses(x, fs, hysteresis=0.0)
    assert bare.extra_times_s.size > 0  # without hysteresis noise adds edges
    assert bare.pulse_times_s.size == r.pulse_times_s.size  # …which are then dropped


def test_narrow_keyphasor_notch_is_found():
    # A once-per-rev mark of 3 samples in 1000 (0.3 % of the time, under the 0.5 %
    # the percentiles see): the levels fall back to the extremes, every pulse is kept.
    x = np.zeros(100_000)
    for start in range(500, x.size - 3, 1000):
        x[start:start + 3] = 4.0
    r = detect_pulses(x, 100_000.0)
    assert r.threshold == pytest.approx(2.0)
    assert r.pulse_times_s.size == 100 and r.warnings == []
    np.testing.assert_allclose(r.rpm, 6000.0, rtol=1e-12)


def test_errors_name_the_field():
    with pytest.raises(InputError, match="flat"):
        detect_pulses(np.ones(1000), FS)
    with pytest.raises(InputError, match="edge 'up'"):
        detect_pulses(_tach(1, seconds=1.0), FS, edge="up")
    with pytest.raises(InputError, match="pulses_per_rev"):
        detect_pulses(_tach(1, seconds=1.0), FS, pulses_per_rev=0)
    with pytest.raises(InputError, match="threshold"):
        detect_pulses(_tach(1, seconds=1.0), FS, threshold=9.0)
    with pytest.raises(InputError, match="at least 2 are needed"):
        detect_pulses(np.r_[np.zeros(100), np.full(100, 5.0)], FS)
    with pytest.raises(InputError, match="TachResult"):
        speed_profile((np.zeros(3), np.zeros(3)))
