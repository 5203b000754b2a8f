"""Overall levels of a waveform: the numbers that are trended and alarmed.

* Overall velocity RMS over ISO 20816-1's broadband range — 10–1000 Hz for machines
  running above 600 rpm, 2–1000 Hz for 120–600 rpm ([1]; from memory of the
  standard's text) — computed by integrating in the frequency domain.
* Acceleration RMS and peak (g), peak-to-peak displacement (µm), crest factor,
  kurtosis (Pearson's, 3 for a Gaussian signal) and skewness of the waveform.

The mean is removed first: accelerometers are AC-coupled and a DC part is a sensor
bias, not vibration (common practice).

References
----------
.. [1] ISO 20816-1:2016, Mechanical vibration — Measurement and evaluation of machine
   vibration — Part 1: General guidelines.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import scipy.fft

from .errors import InputError
from .units import ACCELERATION, VOLTAGE, convert_waveform, frequency_gain, quantity_of, unit
from .validate import as_signal, require_positive

#: ISO 20816-1 broadband range for machines above 600 rpm, Hz.
BROADBAND_HZ = (10.0, 1000.0)
#: ISO 20816-1 broadband range for slow machines (120–600 rpm), Hz.
SLOW_BROADBAND_HZ = (2.0, 1000.0)


def velocity_band_for(rpm: float | None) -> tuple[float, float]:
    """ISO 20816-1 broadband range for a machine speed (10–1000 Hz when unknown)."""
    if rpm is not None and rpm <= 600.0:
        return SLOW_BROADBAND_HZ
    return BROADBAND_HZ


@dataclass(frozen=True)
class WaveformStats:
    """Statistics of a waveform in its own unit (mean removed)."""

    rms: float
    peak: float
    peak_to_peak: float
    crest_factor: float
    kurtosis: float
    skewness: float
    mean: float


def waveform_stats(samples: np.ndarray, *, source: str = "") -> WaveformStats:
    """RMS, peak, peak-to-peak, crest factor, kurtosis and skewness.

    Kurtosis is Pearson's (fourth standardised moment: 3 for Gaussian noise, 1.5 for a
    sine); it equals ``scipy.stats.kurtosis(x, fisher=False)``.
    """
    x = as_signal(samples, source=source, min_size=2)
    mean = float(x.mean())
    d = x - mean
    m2 = float(np.mean(d * d))
    rms = np.sqrt(m2)
    peak = float(np.max(np.abs(d)))
    if m2 > 0:
        skew = float(np.mean(d**3) / m2**1.5)
        kurt = float(np.mean(d**4) / m2**2)
    else:
        skew, kurt = 0.0, 0.0
    return WaveformStats(rms=float(rms), peak=peak, peak_to_peak=float(d.max() - d.min()),
                         crest_factor=float(peak / rms) if rms > 0 else 0.0,
                         kurtosis=kurt, skewness=skew, mean=mean)


def band_rms_fft(samples: np.ndarray, fs_hz: float, band_hz: tuple[float, float], *,
                 unit_in: str, unit_out: str, source: str = "") -> float:
    """RMS of the waveform within a band, converted to ``unit_out``, by Parseval.

    The whole record is one DFT (no window: the band is brick-wall and the record is
    treated as periodic); each line is converted with :func:`engine.units.frequency_gain`
    and the RMS is ``sqrt(Σ 2|X_k|²·G_k²) / N`` over the lines in the band.
    """
    x = as_signal(samples, source=source, min_size=2)
    require_positive(fs_hz, "sample rate", source=source)
    lo, hi = band_hz
    if not 0 <= lo < hi:
        raise InputError(f"{source + ': ' if source else ''}band {band_hz} must have "
                         "0 ≤ low < high")
    n = x.size
    spec = scipy.fft.rfft(x - x.mean())
    f = np.arange(spec.size) * (fs_hz / n)
    sel = (f >= lo) & (f <= hi) & (f > 0)
    gain = frequency_gain(f[sel], unit_in, unit_out, low_cut_hz=0.0)
    power = (spec[sel].real ** 2 + spec[sel].imag ** 2) * gain**2
    weight = np.where((n % 2 == 0) & (np.flatnonzero(sel) == n // 2), 1.0, 2.0)
    return float(np.sqrt(np.sum(weight * power)) / n)


@dataclass(frozen=True)
class Levels:
    """Overall levels of one channel (see module notes for the definitions)."""

    velocity_rms_mm_s: float
    velocity_band_hz: tuple[float, float]
    acceleration_rms_g: float
    acceleration_peak_g: float
    displacement_pp_um: float
    crest_factor: float
    kurtosis: float
    skewness: float

    def as_dict(self) -> dict:
        d = asdict(self)
        d["velocity_band_hz"] = list(self.velocity_band_hz)
        return d


def overall_levels(
    samples: np.ndarray,
    fs_hz: float,
    *,
    unit_in: str = "g",
    rpm: float | None = None,
    velocity_band_hz: tuple[float, float] | None = None,
    source: str = "",
) -> Levels:
    """Overall levels of a vibration waveform.

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Waveform in ``unit_in`` (acceleration, velocity or displacement).
    fs_hz : float
        Sample rate, Hz.
    unit_in : str, keyword-only
    rpm : float, optional
        Machine speed, to pick the ISO 20816-1 broadband range.
    velocity_band_hz : (low, high), optional
        Overrides the broadband range, Hz.  Also used for the displacement level.

    Returns
    -------
    Levels
        Velocity RMS in mm/s, acceleration RMS and peak in g, displacement
        peak-to-peak in µm; crest factor, kurtosis and skewness of the acceleration.
    """
    x = as_signal(samples, source=source, min_size=16)
    fs = require_positive(fs_hz, "sample rate", source=source)
    if quantity_of(unit_in) == VOLTAGE:
        raise InputError(f"{source + ': ' if source else ''}levels need engineering units; "
                         "the channel is in volts — give the sensor sensitivity")
    band = tuple(velocity_band_hz) if velocity_band_hz else velocity_band_for(rpm)
    if band[1] > fs / 2:
        raise InputError(
            f"{source + ': ' if source else ''}the velocity band {band[0]:g}–{band[1]:g} Hz "
            f"reaches above half the sample rate ({fs / 2:g} Hz)")
    velocity = band_rms_fft(x, fs, band, unit_in=unit_in, unit_out="mm/s", source=source)
    # Acceleration waveform in g (differentiating when the sensor gives velocity).
    if quantity_of(unit_in) == ACCELERATION:
        accel = x * (unit(unit_in).to_si / unit("g").to_si)
    else:
        accel = convert_waveform(x, fs, unit_in, "g", band_hz=(0.0, fs / 2))
    stats = waveform_stats(accel, source=source)
    disp = convert_waveform(x, fs, unit_in, "um", band_hz=band)
    return Levels(
        velocity_rms_mm_s=velocity, velocity_band_hz=(float(band[0]), float(band[1])),
        acceleration_rms_g=stats.rms, acceleration_peak_g=stats.peak,
        displacement_pp_um=float(disp.max() - disp.min()),
        crest_factor=float(stats.crest_factor), kurtosis=stats.kurtosis, skewness=stats.skewness,
    )

