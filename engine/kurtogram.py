"""The fast kurtogram: spectral kurtosis of a signal over a tree of frequency bands.

Spectral kurtosis (SK) measures how impulsive a signal is inside one frequency band
([1]_): for the complex envelope ``c(t)`` of the band,

    SK = E|c|⁴ / (E|c|²)² − 2,

which is 0 for stationary Gaussian noise, −1 for a pure tone and large for the short
bursts a bearing defect rings a structural resonance with.  The kurtogram ([2]_) maps
SK over a grid of bands — centre frequency against bandwidth — so the band where the
defect shows best can be picked for envelope analysis.

The fast algorithm ([2]_) is a 1/3-binary tree of filters:

* **Binary levels** 1, 2, 3, …: every band of level ``k`` is split into a lower and
  an upper half by two quasi-analytic FIR filters (a 17-tap low-pass prototype —
  order 16, cut-off 0.4 of Nyquist, as in the author's published program — shifted
  to ``+1/8`` and ``+3/8`` of the band's sample rate), each followed by decimation
  by 2.  Level ``k`` has ``2**k`` bands of width ``fs / 2**(k+1)``.
* **One-third levels** 1.6, 2.6, … (exactly ``k + log2(3) − 1``): every band of
  level ``k`` is split into three by a 25-tap prototype (order 24, cut-off 2/3 of
  the binary one) shifted to ``1/12``, ``3/12`` and ``5/12`` of the band's rate, and
  decimated by 3: ``3 · 2**k`` bands of width ``fs / (3 · 2**(k+1))``.
* **Level 0** is the whole band 0 … fs/2, whose complex envelope is the analytic
  signal (by FFT).

Each branch's output is a complex signal whose spectrum lies in the positive half of
its own rate; the upper branch, which decimation leaves in the negative half, is
moved back by ``(−1)**m`` (a frequency shift by half the rate, not a mirror), so the
bands of every level stay in frequency order.  Each level costs a fixed number of
operations per input sample, so ``L`` levels cost ``O(L · N)``, with ``L ≤ log2 N``:
no worse than ``N log N``.

Levels go up to 7 by default, and never so far that a band holds fewer than 128
samples (``log2(N) − 7``, the limit the author's program uses), below which the
SK estimate is too noisy to rank bands.

References
----------
.. [1] J. Antoni, "The spectral kurtosis: a useful tool for characterising
   non-stationary signals", Mechanical Systems and Signal Processing 20:282–307, 2006.
.. [2] J. Antoni, "Fast computation of the kurtogram for the detection of transient
   faults", Mechanical Systems and Signal Processing 21:108–124, 2007.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import scipy.fft
from scipy.signal import firwin, upfirdn

from .errors import InputError
from .validate import as_signal, require_positive

#: Default deepest binary level.
DEFAULT_LEVELS = 7
#: Fewest samples a band of the deepest level must hold (at most log2(N) − 7 levels,
#: as in the author's program).
MIN_BAND_SAMPLES = 128
#: The one-third levels sit log2(3) − 1 ≈ 0.585 above the binary level they split.
THIRD_OFFSET = float(np.log2(3.0) - 1.0)
_BINARY_TAPS, _BINARY_CUTOFF = 17, 0.4  # order 16, cut-off 0.4 × Nyquist (as in [2])
_THIRD_TAPS, _THIRD_CUTOFF = 25, 0.4 * 2.0 / 3.0  # order 24, 2/3 of the above (as in [2])
# Samples of each band left out of its SK at both ends: the record's edges are steps
# to the zeros the filters see beyond them, whose start-up reaches about 8 samples
# into every band (4 from the last split plus half the parent's); twice that is safe.
_EDGE = 16


@dataclass(frozen=True)
class Kurtogram:
    """Spectral kurtosis over the bands of the 1/3-binary tree.

    Attributes
    ----------
    levels : ndarray of float, shape (n_rows,)
        Level of each row: 0, 1, 1.585, 2, 2.585, …, ``max_level`` (one-third levels
        are exactly ``k + log2(3) − 1``; shown rounded as 1.6, 2.6, …).
    kurtosis : ndarray of float, shape (n_rows, n_columns)
        SK of band ``j`` of each row (dimensionless, 0 for Gaussian noise); row ``r``
        has ``band_count(r)`` bands from 0 Hz up, the rest of the row is NaN.
    best_band_hz : (float, float)
        Edges of the band of largest SK, Hz.
    best_level : float
    best_kurtosis : float
    fs_hz : float
        Sample rate of the analysed signal, Hz (bands cover 0 … fs/2).
    """

    levels: np.ndarray
    kurtosis: np.ndarray
    best_band_hz: tuple[float, float]
    best_level: float
    best_kurtosis: float
    fs_hz: float

    def band_count(self, row: int) -> int:
        """Number of bands in row ``row``."""
        return int(np.count_nonzero(~np.isnan(self.kurtosis[row])))

    def bandwidth_hz(self, row: int) -> float:
        """Width of every band of row ``row``, Hz."""
        return 0.5 * self.fs_hz / self.band_count(row)

    def band_edges_hz(self, row: int) -> np.ndarray:
        """Band edges of row ``row``, Hz, shape (band_count + 1,), 0 … fs/2."""
        return np.linspace(0.0, 0.5 * self.fs_hz, self.band_count(row) + 1)

    def image(self, columns: int | None = None) -> np.ndarray:
        """The kurtogram on a common frequency grid, for drawing as an image.

        Each band's SK is repeated over the columns it covers, so every row spans
        0 … fs/2; ``columns`` defaults to the widest row's band count times 3 (a
        multiple of every row's count).

        Returns
        -------
        ndarray, shape (n_rows, columns)
            Row ``r``, column ``j`` covers ``j · fs / (2 · columns)`` Hz onwards.
        """
        cols = int(columns) if columns is not None else 3 * self.kurtosis.shape[1]
        if cols < 1:
            raise InputError(f"kurtogram image: columns must be at least 1, got {columns!r}")
        centre = (np.arange(cols) + 0.5) / cols  # fraction of fs/2
        out = np.empty((self.levels.size, cols))
        for r in range(self.levels.size):
            nb = self.band_count(r)
            out[r] = self.kurtosis[r, np.minimum((centre * nb).astype(int), nb - 1)]
        return out

    def as_dict(self) -> dict:
        return {"levels": self.levels.tolist(),
                "kurtosis": [[None if np.isnan(v) else float(v) for v in row]
                             for row in self.kurtosis],
                "best_band_hz": list(self.best_band_hz), "best_level": self.best_level,
                "best_kurtosis": self.best_kurtosis, "fs_hz": self.fs_hz}


@lru_cache(maxsize=4)
def _filters() -> tuple[np.ndarray, np.ndarray, tuple[np.ndarray, ...]]:
    """Quasi-analytic filters of the tree ([2])."""
    n2 = np.arange(_BINARY_TAPS)
    proto2 = firwin(_BINARY_TAPS, _BINARY_CUTOFF)
    low = proto2 * np.exp(2j * np.pi * n2 / 8.0)  # band 0 … 1/4 of the rate
    high = proto2 * np.exp(2j * np.pi * 3.0 * n2 / 8.0)  # band 1/4 … 1/2
    n3 = np.arange(_THIRD_TAPS)
    proto3 = firwin(_THIRD_TAPS, _THIRD_CUTOFF)
    thirds = tuple(proto3 * np.exp(2j * np.pi * c * n3 / 12.0) for c in (1.0, 3.0, 5.0))
    return low, high, thirds


def spectral_kurtosis(c: np.ndarray, *, edge: int = 0) -> np.ndarray:
    """SK of complex envelopes: E|c|⁴ / (E|c|²)² − 2 along the last axis ([1]).

    Each row's mean is removed first.  A row of zeros gives 0.

    Parameters
    ----------
    c : ndarray of complex, shape (..., n)
    edge : int, keyword-only
        Samples left out at each end (the filters' start-up and run-out).

    Returns
    -------
    ndarray of float, shape (...)
    """
    if edge and c.shape[-1] > 4 * edge:
        c = c[..., edge:-edge]
    c = c - c.mean(axis=-1, keepdims=True)
    p = c.real * c.real + c.imag * c.imag
    m2 = p.mean(axis=-1)
    m4 = np.einsum("...i,...i->...", p, p) / p.shape[-1]
    with np.errstate(divide="ignore", invalid="ignore"):
        sk = m4 / (m2 * m2) - 2.0
    return np.where(m2 > 0, sk, 0.0)


def _split(nodes: np.ndarray, h: np.ndarray, down: int, keep: int) -> np.ndarray:
    """Filter every row by ``h`` and keep every ``down``-th output, time-aligned."""
    delay = (h.size - 1) // 2 // down  # the filter's group delay, in output samples
    return upfirdn(h, nodes, down=down, axis=-1)[:, delay:delay + keep]


def max_level(n_samples: int) -> int:
    """Deepest binary level a record of ``n_samples`` supports (≥ 0)."""
    return max(0, int(np.floor(np.log2(max(n_samples, 1) / MIN_BAND_SAMPLES))))


def fast_kurtogram(
    samples: np.ndarray,
    fs_hz: float,
    *,
    levels: int | None = None,
    source: str = "",
) -> Kurtogram:
    """The fast kurtogram of a waveform ([2]).

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Waveform in any unit (SK is dimensionless).
    fs_hz : float
        Sample rate, Hz.
    levels : int, keyword-only
        Deepest binary level (≥ 1); default :data:`DEFAULT_LEVELS` or the deepest the
        record supports (every band of the deepest level keeps at least
        :data:`MIN_BAND_SAMPLES` samples), whichever is smaller.
    source : str
        Named in messages.

    Returns
    -------
    Kurtogram
        Rows 0, 1, 1.585, 2, …, ``levels`` (``2 · levels`` rows).

    Raises
    ------
    InputError
        A record too short for level 1, or more levels than it supports.

    Notes
    -----
    The mean is removed first.  The record is cut to a multiple of ``2**levels``
    samples (at most ``2**levels − 1`` dropped from the end) so that every band of a
    level has the same length.  Cost: ``O(levels · n)``.

    Examples
    --------
    White noise has SK near 0 in every band:

    >>> x = np.random.default_rng(0).standard_normal(2 ** 16)
    >>> k = fast_kurtogram(x, 1000.0, levels=4)
    >>> bool(np.nanmax(np.abs(k.kurtosis)) < 0.3)
    True
    """
    x = as_signal(samples, "samples", source=source)
    fs = require_positive(fs_hz, "sample rate", source=source)
    pre = f"{source}: " if source else ""
    deepest = max_level(x.size)
    if deepest < 1:
        raise InputError(f"{pre}the kurtogram needs at least {2 * MIN_BAND_SAMPLES} samples, "
                         f"got {x.size}")
    if levels is None:
        n_levels = min(DEFAULT_LEVELS, deepest)
    else:
        if isinstance(levels, bool) or not isinstance(levels, (int, np.integer)) or levels < 1:
            raise InputError(f"{pre}kurtogram levels must be a whole number of at least 1, "
                             f"got {levels!r}")
        if levels > deepest:
            raise InputError(f"{pre}kurtogram levels {levels} need bands of at least "
                             f"{MIN_BAND_SAMPLES} samples; this record of {x.size} samples "
                             f"supports at most {deepest}")
        n_levels = int(levels)
    n = (x.size // 2 ** n_levels) * 2 ** n_levels
    x = x[:n] - x[:n].mean()
    low, high, thirds = _filters()

    rows: dict[float, np.ndarray] = {}
    spec = scipy.fft.rfft(x)
    gain = np.zeros(n)  # analytic signal: double the positive lines, keep DC and Nyquist
    gain[0] = 1.0
    gain[1:(n + 1) // 2] = 2.0
    if n % 2 == 0:
        gain[n // 2] = 1.0
    full = np.zeros(n, complex)
    full[: spec.size] = spec
    rows[0.0] = spectral_kurtosis(scipy.fft.ifft(full * gain)[None, :], edge=_EDGE)

    nodes = x[None, :].astype(complex)
    for k in range(n_levels):
        m = nodes.shape[1]
        if k <= n_levels - 2:  # one-third level k + 1.585 from the bands of level k
            third = np.empty((3 * nodes.shape[0], m // 3), complex)
            for j, h in enumerate(thirds):
                third[j::3] = _split(nodes, h, 3, m // 3)
            rows[k + 1 + THIRD_OFFSET] = spectral_kurtosis(third, edge=_EDGE)
        children = np.empty((2 * nodes.shape[0], m // 2), complex)
        children[0::2] = _split(nodes, low, 2, m // 2)
        upper = _split(nodes, high, 2, m // 2)
        upper[:, 1::2] *= -1.0  # shift by half the new rate into the positive half
        children[1::2] = upper
        nodes = children
        rows[float(k + 1)] = spectral_kurtosis(nodes, edge=_EDGE)

    level_list = sorted(rows)
    width = max(r.size for r in rows.values())
    table = np.full((len(level_list), width), np.nan)
    for i, lev in enumerate(level_list):
        table[i, : rows[lev].size] = rows[lev]
    r_best, j_best = np.unravel_index(int(np.nanargmax(table)), table.shape)
    bw = 0.5 * fs / rows[level_list[r_best]].size
    return Kurtogram(levels=np.array(level_list), kurtosis=table,
                     best_band_hz=(float(j_best * bw), float((j_best + 1) * bw)),
                     best_level=float(level_list[r_best]),
                     best_kurtosis=float(table[r_best, j_best]), fs_hz=fs)
