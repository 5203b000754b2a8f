"""The simulated machine against analytic answers, numpy.fft and scipy."""

import threading
import time

import numpy as np
import pytest
import scipy.stats
from scipy.signal import hilbert

from engine.errors import InputError
from engine.simulate import (GearMesh, Impacts, MachineSignal, Resonance, SimulatedStream,
                             synthesize)

FS = 25600.0


def rising_edges(tach: np.ndarray) -> np.ndarray:
    """Sample indices where the tach goes high (a record that starts high counts)."""
    high = tach > 2.5
    return np.flatnonzero(high & ~np.concatenate(([False], high[:-1])))


def busy_signal(seed: int = 7) -> MachineSignal:
    return MachineSignal(
        rpm=1480.0, orders={1.0: (0.05, 0.3), 2.0: (0.02, 1.0), 5.0: (0.03, 2.0)},
        fixed_tones_hz={100.0: 0.01},
        bearing_impacts=[Impacts(3.58, 1.0, 3000.0, modulation_order=1.0,
                                 modulation_depth=0.4)],
        gear_mesh=(23, 0.2, 1.0, 0.03), noise_g_rms=0.05,
        noise_bands={(20.0, 1000.0): 0.05}, seed=seed)


def test_one_order_has_rms_a_over_root_two():
    # First principles: the mean of A² cos² over whole cycles is A²/2.
    a = 0.7
    x = synthesize(MachineSignal(rpm=1500.0, speed_wobble=0.0, orders={1.0: (a, 0.4)}),
                   fs_hz=FS, duration_s=4.0).channels[0].samples
    assert np.sqrt(np.mean(x ** 2)) == pytest.approx(a / np.sqrt(2), rel=5e-3)
    # Still so with the default slow wobble and a speed that gives no whole number of
    # cycles (the leftover part-cycle changes the mean square by < 1/(2π · cycles)).
    y = synthesize(MachineSignal(rpm=1481.0, orders={3.0: (a, 0.0)}), fs_hz=FS,
                   duration_s=4.0).channels[0].samples
    assert np.sqrt(np.mean(y ** 2)) == pytest.approx(a / np.sqrt(2), rel=5e-3)


def test_dft_peak_sits_at_order_times_speed():
    # numpy.fft as the reference: a cosine of amplitude A on a bin reads 2|X|/N = A.
    sig = MachineSignal(rpm=1500.0, speed_wobble=0.0, orders={3.0: (0.25, 1.1)})
    x = synthesize(sig, fs_hz=FS, duration_s=4.0).channels[0].samples
    spec = np.abs(np.fft.rfft(x)) * 2 / x.size
    f = np.fft.rfftfreq(x.size, 1 / FS)
    k = int(np.argmax(spec))
    assert f[k] == pytest.approx(3.0 * 1500.0 / 60.0)
    assert spec[k] == pytest.approx(0.25, rel=1e-9)
    # Phase too: cos(2π k θ + φ) with θ = 0 at the first sample.
    assert np.angle(np.fft.rfft(x)[k]) == pytest.approx(1.1, abs=1e-6)


def test_fixed_tone_and_gear_mesh_land_on_their_frequencies():
    # numpy.fft as the reference; the mesh is teeth × shaft speed with sidebands at
    # ± the sideband order (gear kinematics, common practice).
    sig = MachineSignal(rpm=1500.0, speed_wobble=0.0, fixed_tones_hz={100.0: 0.1},
                        gear_mesh=GearMesh(20, 0.3, 1.0, 0.06, 2))
    x = synthesize(sig, fs_hz=FS, duration_s=4.0).channels[0].samples
    spec = np.abs(np.fft.rfft(x)) * 2 / x.size
    f = np.fft.rfftfreq(x.size, 1 / FS)

    def at(hz):
        return spec[int(round(hz / (f[1] - f[0])))]

    assert at(100.0) == pytest.approx(0.1, rel=1e-6)
    assert at(500.0) == pytest.approx(0.3, rel=1e-6)
    assert at(475.0) == pytest.approx(0.06, rel=1e-6)
    assert at(550.0) == pytest.approx(0.03, rel=1e-6)


def test_tach_pulses_count_revolutions_times_ppr():
    # 1500 rpm for 4 s is 100 revolutions (first principles).
    rec = synthesize(MachineSignal(rpm=1500.0, speed_wobble=0.0), fs_hz=FS, duration_s=4.0,
                     tach_ppr=2)
    assert rec.tach_channel == 1
    tach = rec.channel(1)
    assert tach.unit == "V" and tach.name == "tach"
    assert set(np.unique(tach.samples)) == {0.0, 5.0}
    assert rising_edges(tach.samples).size == 100 * 2


def test_run_up_is_integrated_and_orders_stay_locked():
    # A linear ramp 600 → 1800 rpm in 4 s turns ∫ rpm/60 dt = 80 revolutions.
    t_s, rpm = np.array([0.0, 4.0]), np.array([600.0, 1800.0])
    sig = MachineSignal(rpm=1200.0, speed_wobble=0.0, orders={1.0: (1.0, 0.0)})
    rec = synthesize(sig, fs_hz=FS, duration_s=4.0, rpm_profile=(t_s, rpm), tach_ppr=4)
    assert rec.rpm is None
    edges = rising_edges(rec.channel(1).samples)
    assert edges.size == 80 * 4
    # cos(2π θ) is 1 wherever θ is a whole number of turns: at every 4th pulse, however
    # fast the shaft turns then (within one sample of angle: 2π · 30 Hz / fs).
    x = rec.channel(0).samples
    assert np.all(x[edges[::4]] > np.cos(2 * np.pi * 30.0 / FS))
    by_callable = synthesize(sig, fs_hz=FS, duration_s=4.0,
                             rpm_profile=lambda t: 600.0 + 300.0 * t).channel(0).samples
    assert np.allclose(by_callable, x, atol=1e-9)


def test_resonance_multiplies_the_order_by_q_when_crossed():
    # Single-degree-of-freedom response (Thomson): |H| = Q at r = 1 and the phase lags
    # by 90°; the largest |H| is Q / sqrt(1 − 1/(4Q²)).
    res = Resonance(15.0, 10.0)
    assert abs(res.gain(15.0)) == pytest.approx(10.0, rel=1e-12)
    assert np.angle(res.gain(15.0)) == pytest.approx(-np.pi / 2, rel=1e-12)
    assert abs(res.gain(0.01)) == pytest.approx(1.0, rel=1e-6)
    sig = MachineSignal(rpm=1200.0, speed_wobble=0.0, orders={1.0: (0.02, 0.0)},
                        resonances=[res])
    rec = synthesize(sig, fs_hz=2560.0, duration_s=8.0,
                     rpm_profile=(np.array([0.0, 8.0]), np.array([600.0, 1500.0])))
    x = rec.channel(0).samples
    assert np.max(np.abs(x)) == pytest.approx(0.02 * 10.0 / np.sqrt(1 - 1 / 400), rel=1e-2)
    t_peak = np.argmax(np.abs(x)) / 2560.0
    assert t_peak == pytest.approx((900.0 - 600.0) / 900.0 * 8.0, abs=0.1)  # 900 rpm = 15 Hz


def test_impacts_show_in_the_envelope_spectrum_at_their_rate():
    # Randall & Antoni (2011): the envelope of a resonance excited by impacts has its
    # spectrum peak at the impact rate, even with 1–2 % random slip.
    sig = MachineSignal(rpm=1500.0, speed_wobble=0.0, noise_g_rms=0.05,
                        bearing_impacts=[Impacts(3.58, 1.0, 4000.0, damping=0.05, slip=0.015)])
    x = synthesize(sig, fs_hz=FS, duration_s=4.0).channel(0).samples
    env = np.abs(hilbert(x))
    spec = np.abs(np.fft.rfft(env - env.mean()))
    f = np.fft.rfftfreq(env.size, 1 / FS)
    band = (f > 5) & (f < 200)
    peak = f[band][np.argmax(spec[band])]
    assert peak == pytest.approx(3.58 * 25.0, abs=0.5)
    # Impacts make the waveform impulsive: kurtosis (scipy.stats) well above a
    # Gaussian's 3.
    assert scipy.stats.kurtosis(x, fisher=False) > 6.0


def test_impact_train_count_follows_the_defect_order():
    # With no slip and no noise there is one decaying burst per 1/order revolution:
    # 100 revolutions × 3.5 = 350 bursts (first principles).
    sig = MachineSignal(rpm=1500.0, speed_wobble=0.0,
                        bearing_impacts=[Impacts(3.5, 1.0, 5000.0, damping=0.2, slip=0.0)])
    x = synthesize(sig, fs_hz=FS, duration_s=4.0).channel(0).samples
    loud = np.abs(x) > 0.3
    starts = np.flatnonzero(loud & ~np.concatenate(([False], loud[:-1])))
    bursts = starts[np.concatenate(([True], np.diff(starts) > 50))]
    assert bursts.size in (349, 350, 351)  # the record's two ends may cut one burst


def test_same_seed_gives_identical_samples():
    a = synthesize(busy_signal(7), fs_hz=FS, duration_s=1.0).channel(0).samples
    b = synthesize(busy_signal(7), fs_hz=FS, duration_s=1.0).channel(0).samples
    c = synthesize(busy_signal(8), fs_hz=FS, duration_s=1.0).channel(0).samples
    assert np.array_equal(a, b)
    assert not np.allclose(a, c)


def test_stream_blocks_join_into_one_long_read():
    sig = busy_signal()
    n = 60000
    long_read = SimulatedStream(busy_signal(), FS).read(n)
    stream = SimulatedStream(sig, FS)
    sizes = [1, 1000, 4096, 333, 17, 20000]
    parts = [stream.read(s) for s in sizes]
    parts.append(stream.read(n - sum(sizes)))
    assert np.array_equal(np.concatenate(parts), long_read)
    whole = synthesize(busy_signal(), fs_hz=FS, duration_s=n / FS).channel(0).samples
    assert np.array_equal(whole, long_read)


def test_stream_follows_set_rpm_with_continuous_phase():
    sig = MachineSignal(rpm=1500.0, speed_wobble=0.0, orders={1.0: (1.0, 0.0)})
    stream = SimulatedStream(sig, FS, ramp_rpm_per_s=6000.0)
    before = stream.read(2560)
    worker = threading.Thread(target=stream.set_rpm, args=(2400.0,))
    worker.start()
    worker.join()
    ramp = stream.read(int(FS))  # 0.15 s of ramp, then steady at 2400 rpm
    assert stream.rpm == pytest.approx(2400.0)
    joined = np.concatenate((before, ramp))
    # A continuous phase keeps every sample-to-sample step within the slope of a unit
    # sine at the highest frequency, 2π · 40 Hz / fs (first principles).
    assert np.max(np.abs(np.diff(joined))) <= 2 * np.pi * 40.0 / FS * 1.001
    steady = stream.read(int(FS))  # 1 s at 40 Hz: the DFT peak (numpy.fft) is at 40 Hz
    f = np.fft.rfftfreq(steady.size, 1 / FS)
    assert f[np.argmax(np.abs(np.fft.rfft(steady)))] == pytest.approx(40.0)


def test_stream_fault_level_scales_the_defect():
    sig = MachineSignal(rpm=1500.0, orders={1.0: (0.05, 0.0)}, noise_g_rms=0.02)
    stream = SimulatedStream(sig, FS)
    assert stream.fault_level == 0.0
    healthy = stream.read(int(FS))
    stream.set_fault(1.0)
    faulty = stream.read(int(FS))
    # Gaussian noise plus a sinusoid has kurtosis ≤ 3; impacts raise it (scipy.stats).
    assert scipy.stats.kurtosis(healthy, fisher=False) < 3.2
    assert scipy.stats.kurtosis(faulty, fisher=False) > 5.0
    assert np.std(faulty) > 2 * np.std(healthy)
    with pytest.raises(InputError, match="fault level"):
        stream.set_fault(1.5)


def test_four_seconds_render_quickly():
    sig = busy_signal()
    best = min(_timed(sig) for _ in range(3))
    assert best < 0.2  # the brief: 4 s at 25.6 kHz well under 0.2 s


def _timed(sig):
    t0 = time.perf_counter()
    synthesize(sig, fs_hz=FS, duration_s=4.0, tach_ppr=1)
    return time.perf_counter() - t0


@pytest.mark.parametrize("kwargs, match", [
    ({"fs_hz": 0.0}, "fs_hz"),
    ({"duration_s": -1.0}, "duration_s"),
    ({"duration_s": 1e-6}, "duration_s"),
    ({"tach_ppr": 0}, "tach_ppr"),
    ({"rpm_profile": (np.array([0.0, 1.0]), np.array([100.0, -5.0]))}, "rpm"),
    ({"rpm_profile": (np.array([1.0, 0.0]), np.array([100.0, 200.0]))}, "increasing"),
    ({"fs_hz": 1000.0}, "fs/2"),
])
def test_bad_options_are_refused(kwargs, match):
    sig = MachineSignal(rpm=1500.0, orders={30.0: (0.1, 0.0)})
    with pytest.raises(InputError, match=match):
        synthesize(sig, **kwargs)


@pytest.mark.parametrize("make, match", [
    (lambda: MachineSignal(rpm=0.0), "rpm"),
    (lambda: MachineSignal(rpm=1500.0, orders={1.0: 0.1}), "orders"),
    (lambda: MachineSignal(rpm=1500.0, noise_g_rms=float("nan")), "noise_g_rms"),
    (lambda: MachineSignal(rpm=1500.0, noise_bands={(100.0, 50.0): 0.1}), "noise_bands"),
    (lambda: Impacts(3.5, 1.0, 3000.0, damping=1.5), "damping"),
    (lambda: Impacts(3.5, 1.0, 3000.0, modulation_depth=2.0), "modulation_depth"),
    (lambda: GearMesh(0, 0.1), "teeth"),
    (lambda: Resonance(-15.0), "frequency_hz"),
])
def test_bad_models_are_refused(make, match):
    with pytest.raises(InputError, match=match):
        make()


def test_impact_resonance_must_fit_below_nyquist():
    sig = MachineSignal(rpm=1500.0, bearing_impacts=[Impacts(3.5, 1.0, 6000.0)])
    with pytest.raises(InputError, match="resonance_hz"):
        synthesize(sig, fs_hz=12800.0)
