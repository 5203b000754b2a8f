"""Band-limited inverse transform: a waveform with only one band kept, or one removed.

The record's DFT has the lines outside (or inside) the band set to zero and is
transformed back.  This is an ideal ("brick-wall") filter for a record treated as
periodic; the inverse of :func:`numpy.fft.rfft` is exact, so keeping the whole band
returns the waveform unchanged to rounding.
"""

from __future__ import annotations

import numpy as np
import scipy.fft

from .errors import InputError
from .validate import as_signal, require_positive


def band_waveform(
    samples: np.ndarray,
    fs_hz: float,
    band_hz: tuple[float, float],
    *,
    keep: bool = True,
    source: str = "",
) -> np.ndarray:
    """Keep only (``keep=True``) or remove (``keep=False``) a band of a waveform.

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    band_hz : (low, high)
        Band edges, Hz, inclusive; ``0 ≤ low < high``.

    Returns
    -------
    ndarray, shape (n,)
        Same unit as ``samples``.
    """
    x = as_signal(samples, source=source, min_size=2)
    fs = require_positive(fs_hz, "sample rate", source=source)
    lo, hi = float(band_hz[0]), float(band_hz[1])
    if not 0.0 <= lo < hi:
        raise InputError(f"{source + ': ' if source else ''}band {lo:g}–{hi:g} Hz must "
                         "have 0 ≤ low < high")
    spec = scipy.fft.rfft(x)
    f = np.arange(spec.size) * (fs / x.size)
    inside = (f >= lo) & (f <= hi)
    spec[~inside if keep else inside] = 0.0
    return scipy.fft.irfft(spec, x.size)
