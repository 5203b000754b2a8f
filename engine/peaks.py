"""Spectrum peaks with window-aware interpolation of frequency and amplitude.

A tone between two lines shows in both; the ratio of the two largest lines fixes where
the tone lies between them, given the shape of the window's main lobe (the window's
transform, sampled by :func:`engine.windows.kernel`).  The tone's amplitude is then the
largest line divided by the main lobe's height at that offset, which removes the
scalloping loss ([1], section IV).  This is exact for an isolated stationary tone with
any of our windows; the classic parabolic fit is an approximation of it.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
   Fourier transform", Proc. IEEE 66(1):51–83, 1978.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.signal import find_peaks as _find_peaks

from .errors import InputError
from .spectrum import Spectrum
from .windows import kernel


@dataclass(frozen=True)
class Peak:
    """One spectrum peak.

    Attributes
    ----------
    frequency_hz : float
        Interpolated frequency of the tone, Hz.
    amplitude : float
        Interpolated amplitude in the spectrum's unit and scale.
    line : int
        Index of the largest line of the peak.
    prominence_db : float
        Height above the surrounding floor, dB.
    order : float or None
        Frequency in multiples of shaft speed, when a speed was given.
    """

    frequency_hz: float
    amplitude: float
    line: int
    prominence_db: float
    order: float | None = None

    def as_dict(self) -> dict:
        d = {"frequency_hz": self.frequency_hz, "amplitude": self.amplitude,
             "line": self.line, "prominence_db": self.prominence_db}
        if self.order is not None:
            d["order"] = self.order
        return d


def _interpolate(a: np.ndarray, k: int, window: str) -> tuple[float, float]:
    """Offset (in lines, signed) and amplitude correction factor at line ``k``."""
    nu, shape = kernel(window)
    left = a[k - 1] if k > 0 else 0.0
    right = a[k + 1] if k + 1 < a.size else 0.0
    side = 1.0 if right >= left else -1.0
    ratio = (right if side > 0 else left) / a[k] if a[k] > 0 else 0.0
    # r(δ) = K(1 − δ)/K(δ) rises monotonically over δ ∈ [0, 0.5] for our windows.
    delta = np.linspace(0.0, 0.5, 129)
    r = np.interp(1.0 - delta, nu, shape) / np.interp(delta, nu, shape)
    d = float(np.interp(min(ratio, 1.0), r, delta))
    return side * d, float(np.interp(d, nu, shape))


def find_peaks(
    spectrum: Spectrum,
    *,
    count: int = 10,
    min_prominence_db: float = 6.0,
    rpm: float | None = None,
    min_frequency_hz: float | None = None,
) -> list[Peak]:
    """The largest peaks of an amplitude spectrum, interpolated, largest first.

    Parameters
    ----------
    spectrum : Spectrum
        In an amplitude scale (peak, rms, pp); psd/asd spectra are interpolated on the
        square root of their density.
    count : int, keyword-only
        Most peaks returned.
    min_prominence_db : float
        Smallest height above the neighbouring floor, dB (6 dB: common practice).
    rpm : float, optional
        Shaft speed; gives each peak its order (frequency / (rpm/60)).
    min_frequency_hz : float, optional
        Ignore lines below this (default: the first three lines, to skip the DC lobe).

    Returns
    -------
    list of Peak
    """
    if count < 1:
        raise InputError(f"peak count must be at least 1, got {count}")
    if rpm is not None and not rpm > 0:
        raise InputError(f"speed must be a positive number of rpm, got {rpm}")
    a = np.asarray(spectrum.amplitude, dtype=float)
    if spectrum.scale == "psd":
        a = np.sqrt(a)
    lo = (min_frequency_hz if min_frequency_hz is not None
          else 3 * spectrum.resolution_hz)
    floor = max(float(a.max()) * 1e-12, np.finfo(float).tiny)
    level_db = 20.0 * np.log10(np.maximum(a, floor))
    idx, props = _find_peaks(level_db, prominence=min_prominence_db)
    keep = spectrum.frequency_hz[idx] >= lo
    idx, prom = idx[keep], props["prominences"][keep]
    order = np.argsort(a[idx])[::-1][:count]
    out = []
    for i in order:
        k = int(idx[i])
        offset, height = _interpolate(a, k, spectrum.window)
        f = (k + offset) * spectrum.resolution_hz
        amp = a[k] / height
        if spectrum.scale == "psd":
            amp = amp * amp
        out.append(Peak(frequency_hz=float(f), amplitude=float(amp), line=k,
                        prominence_db=float(prom[i]),
                        order=None if rpm is None else float(f / (rpm / 60.0))))
    return out
