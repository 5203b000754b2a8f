"""Anti-alias resampling to the analysis rate of a spectrum.

Spectra are set up in the trade's form, Fmax and lines, with 2.56 samples per Hz of
Fmax (common practice: the extra 0.28·Fmax above Fmax up to the new Nyquist frequency
is room for the anti-alias filter's transition band).  When the recording's rate is
higher than 2.56·Fmax it is brought down to exactly 2.56·Fmax by polyphase resampling
with a Kaiser-window low-pass whose passband reaches Fmax (ripple ~1e-5, so amplitudes
stay right within 0.01 %) and whose stopband (≥ 100 dB down) starts at the new Nyquist
frequency, 1.28·Fmax, so nothing aliases into the band at all.

References
----------
.. [1] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
   function", Proc. IEEE ISCAS, 1974 (scipy.signal.kaiserord / firwin).
"""

from __future__ import annotations

from fractions import Fraction
from functools import lru_cache

import numpy as np
from scipy import signal

from .errors import InputError

#: Samples per Hz of Fmax (common practice).
SAMPLES_PER_FMAX = 2.56
#: Stopband attenuation of the anti-alias filter, dB.
STOPBAND_DB = 100.0


def analysis_rate(fmax_hz: float) -> float:
    """Sample rate used for a spectrum with this Fmax: 2.56·Fmax, Hz."""
    return SAMPLES_PER_FMAX * fmax_hz


def _ratio(fs_in: float, fs_out: float, *, source: str = "") -> tuple[int, int]:
    frac = (Fraction(fs_out).limit_denominator(100000)
            / Fraction(fs_in).limit_denominator(100000)).limit_denominator(4096)
    up, down = frac.numerator, frac.denominator
    actual = fs_in * up / down
    if abs(actual - fs_out) > 1e-9 * fs_out:
        raise InputError(
            f"{source + ': ' if source else ''}cannot resample {fs_in:g} Hz to "
            f"{fs_out:g} Hz with a ratio of small integers; choose an Fmax such that "
            "2.56·Fmax and the sample rate have a simple ratio"
        )
    return up, down


@lru_cache(maxsize=32)
def _design(up: int, down: int, fmax_out_hz: float, fs_out_hz: float) -> np.ndarray:
    """FIR low-pass for resample_poly, running at fs_in·up, unit gain at DC."""
    fs_high = fs_out_hz * down  # = fs_in * up
    pass_edge = fmax_out_hz
    stop_edge = fs_out_hz / 2.0
    width = (stop_edge - pass_edge) / (fs_high / 2.0)
    numtaps, beta = signal.kaiserord(STOPBAND_DB, width)
    numtaps |= 1  # odd length: integer group delay, which resample_poly removes
    taps = signal.firwin(numtaps, (pass_edge + stop_edge) / 2.0, window=("kaiser", beta),
                         fs=fs_high)
    return taps  # resample_poly multiplies by ``up`` itself


def resample_to_fmax(
    samples: np.ndarray, fs_hz: float, fmax_hz: float, *, source: str = ""
) -> tuple[np.ndarray, float]:
    """Bring a waveform to the analysis rate 2.56·Fmax with an anti-alias filter.

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        The recording's sample rate, Hz.
    fmax_hz : float
        The highest frequency of interest, Hz.

    Returns
    -------
    (resampled, fs_out_hz)
        The waveform at 2.56·Fmax (or unchanged when the rates are already equal).
        Half a filter length is dropped at each end (the filter's start-up).

    Raises
    ------
    InputError
        When Fmax is above fs/2.56 (no room for it in the recording).
    """
    fs_out = analysis_rate(fmax_hz)
    if fs_out > fs_hz * (1 + 1e-9):
        raise InputError(
            f"{source + ': ' if source else ''}Fmax {fmax_hz:g} Hz needs a sample rate "
            f"of at least {fs_out:g} Hz (2.56 × Fmax); the recording has {fs_hz:g} Hz, "
            f"so Fmax can be at most {fs_hz / SAMPLES_PER_FMAX:g} Hz"
        )
    if abs(fs_out - fs_hz) <= 1e-9 * fs_hz:
        return np.asarray(samples, dtype=float), fs_hz
    up, down = _ratio(fs_hz, fs_out, source=source)
    taps = _design(up, down, float(fmax_hz), float(fs_out))
    y = signal.resample_poly(np.asarray(samples, dtype=float), up, down, window=taps)
    # resample_poly pads the record with zeros; the filter's start-up and run-out at
    # the two ends would spread energy over every line, so they are dropped.
    edge = -(-(taps.size // 2) // down) + 1
    if y.size <= 2 * edge:
        raise InputError(
            f"{source + ': ' if source else ''}the recording is too short to resample "
            f"to {fs_out:g} Hz for Fmax {fmax_hz:g} Hz"
        )
    return y[edge:-edge], fs_hz * up / down
