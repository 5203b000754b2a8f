"""Speed without a tachometer, against the speeds given to engine.simulate."""

import numpy as np
import pytest
import scipy.signal

from engine.errors import InputError
from engine.simulate import MachineSignal, synthesize
from engine.speed import estimate_speed, short_time_spectra, track_speed

FS = 25600.0
ORDERS = {1.0: (1.0, 0.3), 2.0: (0.5, 1.1), 4.3: (0.2, 2.0)}


def profile(t):
    """600 → 3600 rpm in 10 s, then 2 s steady at 3600 rpm."""
    return 600.0 + 300.0 * np.clip(t, 0.0, 10.0)


@pytest.fixture(scope="module")
def run_up():
    sig = MachineSignal(rpm=600.0, speed_wobble=0.0, orders=ORDERS,
                        fixed_tones_hz={800.0: 1.0}, noise_g_rms=0.05, seed=4)
    return synthesize(sig, fs_hz=FS, duration_s=12.0, rpm_profile=profile).channels[0].samples


def test_short_time_spectra_match_scipy_stft(rng):
    # scipy.signal.stft (scaling "spectrum": 1/sum(window)) as reference; a peak
    # amplitude spectrum is twice its magnitude on lines ≥ 1, with each frame's mean
    # removed (detrend="constant").
    x = rng.standard_normal(8192)
    n, step = 1024, 256
    starts = np.arange(0, x.size - n + 1, step)
    ours = short_time_spectra(x, FS, frame_length=n, starts=starts)
    _, _, z = scipy.signal.stft(x, FS, window="hann", nperseg=n, noverlap=n - step,
                                boundary=None, padded=False, detrend="constant")
    np.testing.assert_allclose(ours[:, 1:], 2.0 * np.abs(z.T[:, 1:]), rtol=1e-10, atol=1e-12)


def test_estimate_speed_on_the_steady_segment(run_up):
    # The last 2 s run at 3600 rpm (the profile given to engine.simulate): within 0.5 %.
    seg = run_up[int(10.2 * FS):]
    est = estimate_speed(seg, FS)
    assert est.rpm == pytest.approx(3600.0, rel=0.005)
    assert est.confidence > 0.8
    assert "harmonic sum" in est.method
    near = estimate_speed(seg, FS, near_rpm=3000.0)
    assert near.rpm == pytest.approx(3600.0, rel=0.005)


def test_track_speed_follows_the_run_up(run_up):
    # Every frame within 0.5 % of the profile at the frame's centre.
    t, rpm, conf = track_speed(run_up, FS)
    assert t.size > 30 and np.all(np.diff(t) > 0)
    np.testing.assert_allclose(rpm, profile(t), rtol=0.005)
    assert conf.min() > 0.5


def test_blade_pass_order_gives_shaft_speed():
    # A fan whose 7-blade pass (order 7) is its only line: the shaft speed is the
    # line's frequency / 7 (common practice).
    sig = MachineSignal(rpm=1470.0, speed_wobble=0.0, orders={7.0: (1.0, 0.0)},
                        noise_g_rms=0.05, seed=1)
    x = synthesize(sig, fs_hz=FS, duration_s=3.0).channels[0].samples
    est = estimate_speed(x, FS, order=7.0, harmonics=2, search_rpm=(1000.0, 2000.0))
    assert est.rpm == pytest.approx(1470.0, rel=0.002)


def test_noise_alone_gives_low_confidence(rng):
    est = estimate_speed(rng.standard_normal(int(FS * 2)), FS)
    assert est.confidence < 0.3


def test_errors_name_the_field(rng):
    x = rng.standard_normal(int(FS))
    with pytest.raises(InputError, match="search range"):
        estimate_speed(x, FS, search_rpm=(3000.0, 1000.0))
    with pytest.raises(InputError, match="at least"):
        estimate_speed(x[:5000], FS, search_rpm=(60.0, 120.0))
    with pytest.raises(InputError, match="harmonics"):
        estimate_speed(x, FS, harmonics=0)
    with pytest.raises(InputError, match="frames of"):
        track_speed(x, FS, frame_s=2.0)
    with pytest.raises(InputError, match="do not fit"):
        short_time_spectra(x, FS, frame_length=1024, starts=np.array([x.size - 10]))
