"""Overall levels from first principles and scipy.stats."""

import numpy as np
import pytest
import scipy.stats

from engine.bandfilter import band_waveform
from engine.errors import InputError
from engine.levels import overall_levels, velocity_band_for, waveform_stats

FS = 25600.0


def sine(f, amp=1.0, seconds=4.0):
    t = np.arange(int(FS * seconds)) / FS
    return amp * np.sin(2 * np.pi * f * t)


def test_velocity_of_one_g_at_100_hz():
    # From first principles (g_n = 9.80665 m/s², CGPM): 1 g peak at 100 Hz is
    # 11.04 mm/s RMS; displacement 2·a/ω² = 49.68 µm peak-to-peak.
    lv = overall_levels(sine(100.0), FS)
    assert lv.velocity_rms_mm_s == pytest.approx(9806.65 / (2 * np.pi * 100) / np.sqrt(2),
                                                 rel=1e-9)
    assert lv.displacement_pp_um == pytest.approx(2 * 9.80665e6 / (2 * np.pi * 100) ** 2,
                                                  rel=1e-6)
    assert lv.acceleration_rms_g == pytest.approx(1 / np.sqrt(2), rel=1e-12)
    assert lv.acceleration_peak_g == pytest.approx(1.0, rel=1e-9)
    assert lv.crest_factor == pytest.approx(np.sqrt(2), rel=1e-9)
    assert lv.kurtosis == pytest.approx(1.5, rel=1e-6)  # sine: 3/2 (first principles)


def test_broadband_excludes_out_of_band_tones():
    # ISO 20816-1: broadband 10–1000 Hz for machines above 600 rpm (from memory).
    lv = overall_levels(sine(100.0) + sine(5.0) + sine(2000.0), FS, rpm=1480)
    assert lv.velocity_band_hz == (10.0, 1000.0)
    assert lv.velocity_rms_mm_s == pytest.approx(11.036, rel=1e-3)
    slow = overall_levels(sine(100.0) + sine(5.0), FS, rpm=300)
    assert slow.velocity_band_hz == (2.0, 1000.0)
    assert slow.velocity_rms_mm_s > lv.velocity_rms_mm_s
    assert velocity_band_for(None) == (10.0, 1000.0)


def test_velocity_input_is_differentiated_for_acceleration():
    # 10 mm/s peak at 50 Hz → a = v·ω = 3.1416 m/s² peak = 0.3204 g peak.
    lv = overall_levels(sine(50.0, amp=10.0), FS, unit_in="mm/s")
    assert lv.velocity_rms_mm_s == pytest.approx(10 / np.sqrt(2), rel=1e-9)
    assert lv.acceleration_peak_g == pytest.approx(0.01 * 2 * np.pi * 50 / 9.80665, rel=1e-6)


def test_stats_match_scipy(rng):
    # scipy.stats as reference for kurtosis (Pearson) and skewness.
    x = rng.gamma(2.0, size=20000)
    st = waveform_stats(x)
    assert st.kurtosis == pytest.approx(scipy.stats.kurtosis(x, fisher=False), rel=1e-10)
    assert st.skewness == pytest.approx(scipy.stats.skew(x), rel=1e-10)
    assert st.rms == pytest.approx(np.std(x), rel=1e-12)


def test_gaussian_noise_kurtosis_three(rng):
    # A Gaussian signal has kurtosis 3 (first principles).
    assert waveform_stats(rng.standard_normal(400000)).kurtosis == pytest.approx(3.0, abs=0.03)


def test_band_waveform_keep_and_remove(rng):
    x = rng.standard_normal(8192)
    kept = band_waveform(x, 1000.0, (0.0, 500.0))
    np.testing.assert_allclose(kept, x, atol=1e-12)   # whole band: identity
    lo = band_waveform(x, 1000.0, (100.0, 200.0))
    rest = band_waveform(x, 1000.0, (100.0, 200.0), keep=False)
    np.testing.assert_allclose(lo + rest, x, atol=1e-12)
    s = sine(120.0) + sine(700.0)
    only = band_waveform(s, FS, (600.0, 800.0))
    np.testing.assert_allclose(only, sine(700.0), atol=1e-9)


def test_bad_input():
    with pytest.raises(InputError, match="NaN"):
        overall_levels(np.array([0.0, np.nan] * 20), FS, source="x.csv")
    with pytest.raises(InputError, match="volts"):
        overall_levels(sine(10.0), FS, unit_in="V")
    with pytest.raises(InputError, match="half the sample rate"):
        overall_levels(sine(10.0), 1000.0)
    with pytest.raises(InputError):
        band_waveform(sine(10.0), FS, (200.0, 100.0))
