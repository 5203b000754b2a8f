"""Computed order tracking against run-ups built from first principles
(engine.simulate: orders are cos(2π k θ(t) + φ) with θ the integrated speed)."""

import numpy as np
import pytest

from engine.errors import InputError
from engine.orders import (order_cut, order_spectrum, resample_to_angle, speed_waterfall,
                           time_synchronous_average)
from engine.simulate import MachineSignal, Resonance, synthesize
from engine.tach import detect_pulses

FS = 25600.0
ORDERS = {1.0: (1.0, 0.3), 2.0: (0.5, 1.1), 4.3: (0.2, 2.0)}
TONE_HZ, TONE_G = 800.0, 1.0


def run_up(t):
    """600 → 3600 rpm in 10 s, linear."""
    return 600.0 + 300.0 * np.clip(t, 0.0, 10.0)


@pytest.fixture(scope="module")
def run_up_record():
    sig = MachineSignal(rpm=600.0, speed_wobble=0.0, orders=ORDERS,
                        fixed_tones_hz={TONE_HZ: TONE_G}, noise_g_rms=0.05, seed=4)
    rec = synthesize(sig, fs_hz=FS, duration_s=10.0, rpm_profile=run_up, tach_ppr=1)
    tach = detect_pulses(rec.channels[1].samples, FS)
    return rec.channels[0].samples, tach


def test_order_spectrum_of_a_run_up(run_up_record):
    # Fyfe & Munck (1997): after angular resampling the speed-locked components are
    # lines at their orders with their amplitudes (here the orders and peak
    # amplitudes given to engine.simulate): within 0.02 orders and 3 %.
    x, tach = run_up_record
    s = order_spectrum(x, FS, tach, max_order=20.0, order_resolution=0.05)
    assert s.warnings == [] and s.scale == "peak" and s.unit == "g"
    assert s.order_resolution == pytest.approx(0.05)
    assert s.order[-1] == pytest.approx(20.0)
    assert 600.0 < s.rpm_min < 700.0 and 3500.0 < s.rpm_max <= 3600.0
    assert s.revolutions == pytest.approx(349.0, abs=1.0)  # ∫ 10 + 5t dt over 10 s
    for order, (amp, _) in ORDERS.items():
        near = np.flatnonzero(np.abs(s.order - order) <= 0.1)
        k = near[np.argmax(s.amplitude[near])]
        assert s.order[k] == pytest.approx(order, abs=0.02)
        assert s.amplitude[k] == pytest.approx(amp, rel=0.03)
    # The 800 Hz tone is not speed-locked: in orders it sweeps from 80 down to 13.3
    # and smears over many lines, so no line away from the three orders reaches 15 %
    # of the tone's own amplitude (a speed-locked component of that amplitude reads
    # 100 %, as the orders above do).
    away = (s.order > 0.2) & np.all([np.abs(s.order - o) > 0.2 for o in ORDERS], axis=0)
    assert s.amplitude[away].max() < 0.15 * TONE_G


def test_high_order_at_the_pass_edge_keeps_its_amplitude():
    # At steady speed order 20 sits right at the anti-alias filter's pass edge and at
    # 12.5 samples per cycle for the cubic interpolation (Fyfe & Munck 1997 on the
    # interpolation error): its amplitude must still read within 0.5 %.
    sig = MachineSignal(rpm=3000.0, speed_wobble=0.002, orders={20.0: (1.0, 0.0)}, seed=2)
    rec = synthesize(sig, fs_hz=FS, duration_s=4.0, tach_ppr=1)
    tach = detect_pulses(rec.channels[1].samples, FS)
    s = order_spectrum(rec.channels[0].samples, FS, tach, max_order=20.0, order_resolution=0.25)
    assert s.amplitude[-1] == pytest.approx(1.0, rel=5e-3)


def test_order_cut_through_a_resonance():
    # A single-degree-of-freedom resonance at 30 Hz, Q = 10 (Thomson, Theory of
    # Vibration: gain 1/(1 − r² + j r/Q), largest at r = √(1 − 1/(2Q²)) with
    # |H| = Q/√(1 − 1/(4Q²))) shapes 1× of a run-up through 1800 rpm.
    q, fn = 10.0, 30.0
    sig = MachineSignal(rpm=600.0, speed_wobble=0.0, orders={1.0: (1.0, 0.3)},
                        resonances=[Resonance(fn, q=q)], noise_g_rms=0.02, seed=4)
    rec = synthesize(sig, fs_hz=FS, duration_s=10.0, rpm_profile=run_up, tach_ppr=1)
    tach = detect_pulses(rec.channels[1].samples, FS)
    rpm, amp = order_cut(rec.channels[0].samples, FS, tach, 1.0)
    assert rpm.size > 300 and np.all(np.diff(rpm) > 0)
    gain = np.abs(Resonance(fn, q=q).gain(rpm / 60.0))
    r_peak = np.sqrt(1.0 - 1.0 / (2 * q * q))
    assert rpm[np.argmax(amp)] == pytest.approx(60.0 * fn * r_peak, rel=0.01)
    # The 8-revolution frames average the gain over about 1.3 Hz of the sweep, a
    # little below the sharp peak.
    assert amp.max() == pytest.approx(q / np.sqrt(1.0 - 1.0 / (4 * q * q)), rel=0.05)
    far = np.abs(rpm - 1800.0) > 300.0
    np.testing.assert_allclose(amp[far], gain[far], rtol=0.02)


def test_speed_waterfall_keeps_orders_on_rays_and_the_tone_fixed(run_up_record):
    # Campbell diagram: 1× lies at rpm/60 Hz at every speed, the fixed 800 Hz tone
    # stays at 800 Hz with its amplitude (Hann on a line: no scalloping).
    x, tach = run_up_record
    rpm, freq, amp = speed_waterfall(x, FS, tach, fmax_hz=1000.0, lines=400, rpm_step=100.0)
    assert amp.shape == (rpm.size, 401) and freq[-1] == pytest.approx(1000.0)
    assert rpm[0] == 700.0 and rpm[-1] == 3500.0 and np.all(np.diff(rpm) == 100.0)
    df = freq[1]
    low = freq < 100.0
    one_x = freq[np.argmax(np.where(low, amp, 0.0), axis=1)]
    np.testing.assert_allclose(one_x, rpm / 60.0, atol=df)
    k = int(round(TONE_HZ / df))
    np.testing.assert_allclose(amp[:, k], TONE_G, rtol=0.02)


def test_time_synchronous_average_recovers_the_shaft_waveform():
    # Time-domain averaging (Braun 1975, Acustica 32:69–77, from memory): the mean
    # over revolutions keeps the speed-locked waveform Σ A cos(2π k α + φ) (angle α
    # from the tach edge at θ = whole revolutions, engine.simulate) and averages out
    # a non-synchronous tone and noise, even with a slowly varying speed.
    orders = {1.0: (0.5, 0.2), 3.0: (0.3, 1.0), 11.0: (0.2, -0.7)}
    sig = MachineSignal(rpm=1500.0, speed_wobble=0.003, orders=orders,
                        fixed_tones_hz={777.7: 1.0}, noise_g_rms=0.3, seed=2)
    rec = synthesize(sig, fs_hz=FS, duration_s=10.0, tach_ppr=1)
    tach = detect_pulses(rec.channels[1].samples, FS)
    angle, wave = time_synchronous_average(rec.channels[0].samples, FS, tach,
                                           samples_per_rev=256)
    assert angle.size == 256 and angle[0] == 0.0 and angle[-1] == pytest.approx(360 - 360 / 256)
    alpha = angle / 360.0
    expected = sum(a * np.cos(2 * np.pi * k * alpha + ph) for k, (a, ph) in orders.items())
    # Residual: the noise over ~250 revolutions (0.3/√250 ≈ 0.02) and the tone's
    # incoherent remainder.
    assert np.sqrt(np.mean((wave - expected) ** 2)) < 0.04
    default_angle, _ = time_synchronous_average(rec.channels[0].samples, FS, tach)
    assert default_angle.size == 1024  # 25.6 kHz / 25 rev/s, as a power of 2


def test_angle_resampling_limits_are_reported(run_up_record):
    x, tach = run_up_record
    # A fixed 64 samples/rev cannot keep order 20 at 3600 rpm without aliasing at
    # 600 rpm ((64/2) · 10 Hz = 320 Hz): the filter is narrowed and the result says so.
    ang = resample_to_angle(x, FS, tach, max_order=20.0, samples_per_rev=64)
    assert ang.stop_hz <= 0.5 * 64 * ang.rpm_min / 60.0 + 1e-9
    assert any("attenuated" in w for w in ang.warnings)
    auto = resample_to_angle(x, FS, tach, max_order=20.0)
    assert auto.samples_per_rev == 512 and auto.warnings == []
    assert auto.pass_hz >= 20.0 * auto.rpm_max / 60.0 * (1 - 1e-9)
    with pytest.raises(InputError, match="2.56 × max_order"):
        resample_to_angle(x, FS, tach, max_order=20.0, samples_per_rev=32)
    with pytest.raises(InputError, match="lasts"):
        order_spectrum(x[: x.size // 2], FS, tach)
    with pytest.raises(InputError, match="revolutions"):
        order_spectrum(x, FS, tach, order_resolution=0.001)
    with pytest.raises(InputError, match="scale"):
        order_spectrum(x, FS, tach, scale="psd")
    with pytest.raises(InputError, match="TachResult"):
        order_spectrum(x, FS, tach.pulse_times_s)
