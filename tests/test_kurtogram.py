"""Fast kurtogram against the properties of spectral kurtosis published by Antoni."""

import numpy as np
import pytest
import scipy.stats

from engine.errors import InputError
from engine.kurtogram import (MIN_BAND_SAMPLES, THIRD_OFFSET, fast_kurtogram, max_level,
                              spectral_kurtosis)
from engine.simulate import Impacts, MachineSignal, synthesize

FS = 25600.0


def test_sk_of_a_real_sequence_matches_scipy_kurtosis(rng):
    # For a real sequence E|c|⁴/(E|c|²)² − 2 is the Pearson kurtosis minus 2, i.e.
    # scipy.stats.kurtosis (Fisher, = Pearson − 3) plus 1 (scipy.stats as reference).
    x = rng.standard_exponential(5000)
    ref = scipy.stats.kurtosis(x, fisher=True, bias=True) + 1.0
    assert spectral_kurtosis(x.astype(complex)[None, :])[0] == pytest.approx(ref, rel=1e-12)


def test_sk_of_complex_gaussian_noise_is_zero_and_of_a_tone_minus_one(rng):
    # Antoni (2006), MSSP 20:282–307: SK = 0 for stationary (circular) Gaussian noise
    # and −1 for a constant-amplitude sinusoid (|c| constant: 1 − 2).
    n = 200_000
    c = rng.standard_normal(n) + 1j * rng.standard_normal(n)
    assert abs(spectral_kurtosis(c[None, :])[0]) < 0.03  # std of the estimate ≈ 2/√n
    tone = np.exp(2j * np.pi * 0.01 * np.arange(n))
    assert spectral_kurtosis(tone[None, :])[0] == pytest.approx(-1.0, abs=1e-9)


def test_tree_layout_follows_the_one_third_binary_tree(rng):
    # Antoni (2007), MSSP 21:108–124: levels 0, 1, 1.6, 2, 2.6, …; level k
    # has 2**k bands of fs/2**(k+1), level k + log2(3) − 1 has 3·2**k bands.
    x = rng.standard_normal(2 ** 15)
    k = fast_kurtogram(x, FS, levels=5)
    expected = [0.0, 1.0, 1 + THIRD_OFFSET, 2.0, 2 + THIRD_OFFSET, 3.0, 3 + THIRD_OFFSET,
                4.0, 4 + THIRD_OFFSET, 5.0]
    np.testing.assert_allclose(k.levels, expected)
    counts = [k.band_count(r) for r in range(k.levels.size)]
    assert counts == [1, 2, 3, 4, 6, 8, 12, 16, 24, 32]
    for r, level in enumerate(k.levels):
        assert k.bandwidth_hz(r) == pytest.approx(FS / 2 ** (level + 1), rel=1e-9)
    assert k.kurtosis.shape == (10, 32)
    assert np.isnan(k.kurtosis[0, 1:]).all() and not np.isnan(k.kurtosis[0, 0])
    img = k.image()
    assert img.shape == (10, 96) and not np.isnan(img).any()


def test_white_noise_has_sk_near_zero_in_every_band(rng):
    # Antoni (2006): SK of stationary Gaussian noise is 0 in every band; the estimate
    # from M band samples scatters by about 2/√M (the deepest level here has 2**9
    # samples per band, half of them independent: ±0.13), so 0.5 is a wide margin.
    x = rng.standard_normal(2 ** 16)
    k = fast_kurtogram(x, FS, levels=7)
    sk = k.kurtosis[~np.isnan(k.kurtosis)]
    assert np.abs(sk).max() < 0.5
    assert abs(sk.mean()) < 0.05


def test_a_tone_marks_its_own_band_at_every_level(rng):
    # A tone has SK −1 (Antoni 2006); bands must stay in frequency order at every
    # level, so the tone at 0.2·fs (never near a band edge of this tree) gives the
    # lowest SK in band floor(0.4 · bands) of each row.
    t = np.arange(2 ** 16) / FS
    x = np.cos(2 * np.pi * 0.2 * FS * t) + 0.01 * rng.standard_normal(t.size)
    k = fast_kurtogram(x, FS, levels=7)
    for r in range(1, k.levels.size):
        nb = k.band_count(r)
        row = k.kurtosis[r, :nb]
        assert int(np.argmin(row)) == int(0.4 * nb), k.levels[r]
        assert row.min() == pytest.approx(-1.0, abs=0.05)


def test_best_band_holds_the_resonance_the_impacts_ring():
    # Antoni (2007): the kurtogram's maximum marks the band of the impulsive
    # component.  Impacts (engine.simulate, the model of Randall & Antoni 2011, 1 %
    # slip) ring a 5 kHz resonance under a strong 1× and white noise.
    imp = Impacts(order=4.7, amplitude_g=1.0, resonance_hz=5000.0, damping=0.04, slip=0.01)

    def record(impacts):
        sig = MachineSignal(rpm=1200.0, orders={1.0: (3.0, 0.0)}, bearing_impacts=impacts,
                            noise_g_rms=0.6, seed=7)
        return synthesize(sig, fs_hz=FS, duration_s=4.0).channels[0].samples

    k = fast_kurtogram(record([imp]), FS)
    lo, hi = k.best_band_hz
    assert lo <= 5000.0 <= hi
    row = int(np.flatnonzero(k.levels == k.best_level)[0])
    assert np.nanmax(k.kurtosis) == k.best_kurtosis
    # The same record without the impacts: that cell falls back to the noise's SK ≈ 0.
    col = int(np.floor(lo / k.bandwidth_hz(row) + 0.5))
    quiet = fast_kurtogram(record([]), FS).kurtosis[row, col]
    assert abs(quiet) < 0.15 and k.best_kurtosis > quiet + 0.2


def test_levels_follow_the_record_length():
    # Antoni's published fast-kurtogram program allows at most log2(N) − 7 levels, so
    # bands keep 128 samples.
    assert MIN_BAND_SAMPLES == 128
    assert max_level(2 ** 14) == 7 and max_level(2 ** 12) == 5
    x = np.random.default_rng(3).standard_normal(2 ** 12)
    assert fast_kurtogram(x, FS).levels.max() == 5.0


def test_errors_name_the_field():
    x = np.random.default_rng(4).standard_normal(2 ** 12)
    with pytest.raises(InputError, match="levels 6 need bands"):
        fast_kurtogram(x, FS, levels=6)
    with pytest.raises(InputError, match="at least 256 samples"):
        fast_kurtogram(x[:200], FS)
    with pytest.raises(InputError, match="levels must be a whole number"):
        fast_kurtogram(x, FS, levels=0)
    with pytest.raises(InputError, match="NaN"):
        fast_kurtogram(np.full(4096, np.nan), FS)
