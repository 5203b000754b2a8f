"""Interpolated peaks: frequency and amplitude of tones between lines."""

import numpy as np
import pytest

from engine.errors import InputError
from engine.peaks import find_peaks
from engine.spectrum import SpectrumSettings, compute_spectrum

FS = 25600.0
DF = FS / 2.56 / 1600


def tone(f, amp=1.0, seconds=4.0):
    t = np.arange(int(FS * seconds)) / FS
    return amp * np.sin(2 * np.pi * f * t + 0.4)


@pytest.mark.parametrize("window", ["rectangular", "hann", "hamming", "flat-top",
                                    "blackman-harris"])
@pytest.mark.parametrize("fraction", [0.0, 0.2, 0.5, 0.8])
def test_interpolation_recovers_tone(window, fraction):
    # An isolated tone between lines: interpolation through the window's own transform
    # (Harris 1978, section IV) gives its frequency within 1 % of a line and its
    # amplitude within 0.5 %, whatever the window's scalloping loss.
    f0 = (517 + fraction) * DF
    overlap = 0.0 if window == "rectangular" else 0.5
    s = compute_spectrum(tone(f0, amp=3.0), FS,
                         settings=SpectrumSettings(lines=1600, window=window, scale="peak",
                                                   overlap=overlap))
    p = find_peaks(s, count=1)[0]
    assert p.frequency_hz == pytest.approx(f0, abs=0.01 * DF)
    assert p.amplitude == pytest.approx(3.0, rel=0.005)


def test_ranked_with_orders(rng):
    rpm = 1480.0
    f1 = rpm / 60
    x = tone(f1, 1.0) + tone(2 * f1, 0.5) + tone(4.3 * f1, 0.2) + 0.001 * rng.standard_normal(
        int(FS * 4))
    s = compute_spectrum(x, FS, settings=SpectrumSettings(fmax_hz=1000.0, lines=1600,
                                                          scale="peak"))
    peaks = find_peaks(s, count=3, rpm=rpm)
    assert [round(p.order, 2) for p in peaks] == [1.0, 2.0, 4.3]
    assert [round(p.amplitude, 2) for p in peaks] == [1.0, 0.5, 0.2]
    assert peaks[0].amplitude > peaks[1].amplitude > peaks[2].amplitude


def test_prominence_filters_noise(rng):
    s = compute_spectrum(rng.standard_normal(int(FS * 4)) * 0.01 + tone(300.0), FS,
                         settings=SpectrumSettings(lines=800))
    peaks = find_peaks(s, count=50, min_prominence_db=20.0)
    assert len(peaks) == 1 and peaks[0].frequency_hz == pytest.approx(300.0, abs=0.1)


def test_bad_arguments():
    s = compute_spectrum(tone(300.0), FS, settings=SpectrumSettings(lines=800))
    with pytest.raises(InputError):
        find_peaks(s, count=0)
    with pytest.raises(InputError):
        find_peaks(s, rpm=-3)
