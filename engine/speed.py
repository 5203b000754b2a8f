"""Shaft speed from the vibration itself, when there is no tachometer.

A rotating machine's spectrum carries its running speed and the speed's harmonics.
:func:`estimate_speed` finds the speed that best explains a comb of harmonics in a
fine spectrum — a harmonic-sum search ([1]_): every candidate fundamental ``F`` in the
search range is scored by

    S(F) = Σ_{h=1..H} 0.84^(h−1) · E(h · F),

where ``E`` is the spectrum's amplitude above its local floor (a running median) and
the weights ``0.84^(h−1)`` fall with the harmonic number so that the subharmonic
``F/2``, which collects the same lines, scores lower than ``F`` ([1]_).  The best
candidate is refined by a weighted least-squares fit of ``h · F`` to the interpolated
frequencies of the harmonic peaks, so the estimate is as fine as the highest clear
harmonic allows.

:func:`track_speed` follows a run-up or coast-down: short-time spectra are scored the
same way, the best path through the scores from frame to frame, with a bound on how
fast the speed may change, is found by dynamic programming, and in each frame the
ridge of the chosen order is refined to its power centroid above the floor (for a
component sweeping linearly through a frame the windowed spectrum is symmetric about
the frequency at the frame's middle, so the centroid is that frequency).

Confidence (0 … 1)
------------------
Harmonic consistency: the share of the spectrum's power above its floor, from half
the lowest searched frequency up to the (H + ½)-th harmonic of the estimate, that
lies within a main lobe (±2 lines; in a sweeping frame plus half the sweep) of the
estimate's harmonics.  Near 1 when the estimate's harmonics are all the spectrum
holds, near 0 for noise or when most lines belong to something else.  It does not
tell the speed from its octaves: ``F/2`` explains the lines of ``F`` as well, which is
why the harmonic weights (not the confidence) decide between them; give ``near_rpm``
or a narrow ``search_rpm`` when 1× may be weaker than 2×.

References
----------
.. [1] D. J. Hermes, "Measurement of pitch by subharmonic summation", J. Acoust. Soc.
   Am. 83(1):257–264, 1988 (harmonic weights 0.84^(h−1), from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.fft
from scipy.ndimage import maximum_filter1d, median_filter

from .errors import InputError
from .resample import SAMPLES_PER_FMAX, resample_to_fmax
from .validate import as_signal, require_positive
from .windows import get_window, window_name

#: Search range used when neither a range nor a nearby speed is given, rev/min.
DEFAULT_SEARCH_RPM = (300.0, 6000.0)
#: Harmonic weight ratio ([1]).
HARMONIC_WEIGHT = 0.84
# Half-width of a Hann window's main lobe, in lines of the unpadded frame.
_LOBE_BINS = 2.0
_ZERO_PAD = 2  # spectra are zero-padded to twice the frame for a finer grid


@dataclass(frozen=True)
class SpeedEstimate:
    """A shaft speed estimated from vibration.

    Attributes
    ----------
    rpm : float
        Shaft speed, rev/min.
    confidence : float
        0 … 1 (see the module notes).
    method : str
        How it was found, in words.
    """

    rpm: float
    confidence: float
    method: str

    def as_dict(self) -> dict:
        return {"rpm": self.rpm, "confidence": self.confidence, "method": self.method}


def short_time_spectra(
    samples: np.ndarray,
    fs_hz: float,
    *,
    frame_length: int,
    starts: np.ndarray,
    window: str = "hann",
    scale: str = "peak",
    keep: int | None = None,
    n_fft: int | None = None,
) -> np.ndarray:
    """Amplitude spectra of frames of a waveform starting at given samples.

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz (the line spacing is ``fs_hz / n_fft``).
    frame_length : int, keyword-only
    starts : ndarray of int, keyword-only
        First sample of each frame; every frame must fit in the record.
    window : str, keyword-only
    scale : str, keyword-only
        ``peak``, ``rms`` or ``pp`` amplitude of a tone on a line.
    keep : int, optional, keyword-only
        Lines kept from 0; default all.
    n_fft : int, optional, keyword-only
        Transform length (≥ frame_length; zero-padded); default ``frame_length``.

    Returns
    -------
    ndarray, shape (len(starts), keep)
        In the unit of the samples.  Each frame's mean is removed first.
    """
    x = as_signal(samples, "samples")
    require_positive(fs_hz, "sample rate")
    n = int(frame_length)
    starts = np.asarray(starts, dtype=np.int64)
    if starts.size and (starts.min() < 0 or starts.max() + n > x.size):
        raise InputError(f"short-time spectra: frames of {n} samples starting at "
                         f"{starts.min()} … {starts.max()} do not fit in {x.size} samples")
    w = get_window(window_name(window), n)
    frames = np.lib.stride_tricks.sliding_window_view(x, n)[starts]
    frames = frames - frames.mean(axis=1, keepdims=True)
    spec = scipy.fft.rfft(frames * w, n=n_fft or n, axis=-1)
    if keep is not None:
        spec = spec[:, :keep]
    peak = 2.0 * np.abs(spec) / float(w.sum())
    peak[:, 0] *= 0.5
    if scale == "rms":
        return peak / np.sqrt(2.0)
    if scale == "pp":
        return 2.0 * peak
    if scale != "peak":
        raise InputError(f"short-time spectra: scale {scale!r} is not known; expected peak, "
                         "rms or pp")
    return peak


def _search_hz(near_rpm, search_rpm, order: float, source: str) -> tuple[float, float]:
    pre = f"{source}: " if source else ""
    if search_rpm is not None:
        try:
            lo, hi = (float(v) for v in search_rpm)
        except (TypeError, ValueError):
            raise InputError(f"{pre}search_rpm must be a pair (low, high) in rev/min, "
                             f"got {search_rpm!r}") from None
    elif near_rpm is not None:
        near = require_positive(near_rpm, "near_rpm", source=source)
        lo, hi = 0.5 * near, 1.5 * near
    else:
        lo, hi = DEFAULT_SEARCH_RPM
    if not (np.isfinite(lo) and np.isfinite(hi) and 0.0 < lo < hi):
        raise InputError(f"{pre}search range {lo:g}–{hi:g} rpm must have 0 < low < high")
    return order * lo / 60.0, order * hi / 60.0


def _prepare(x: np.ndarray, fs: float, f_hi: float, harmonics: int, source: str
             ) -> tuple[np.ndarray, float, float, int]:
    """Decimate to just cover the harmonics; the harmonics that fit, and the offset (s)
    of the first sample kept."""
    need = 1.1 * harmonics * f_hi
    factor = max(1, int(np.floor(fs / (SAMPLES_PER_FMAX * need))))
    if factor == 1:
        usable = int(np.floor(fs / SAMPLES_PER_FMAX / f_hi))
        if usable < 1:
            raise InputError(f"{source + ': ' if source else ''}the search range reaches "
                             f"{f_hi:g} Hz, above fs/2.56 = {fs / SAMPLES_PER_FMAX:g} Hz")
        return x, fs, 0.0, min(harmonics, usable)
    y, fs_y = resample_to_fmax(x, fs, fs / (SAMPLES_PER_FMAX * factor), source=source)
    return y, fs_y, (x.size / fs - y.size / fs_y) / 2.0, harmonics


def _excess(amp: np.ndarray, bins: int) -> np.ndarray:
    """Amplitude above a running-median floor (clipped at 0), along the last axis."""
    size = (max(33, bins) | 1)
    size = min(size, amp.shape[-1] | 1)
    floor = median_filter(amp, size=(1,) * (amp.ndim - 1) + (size,), mode="nearest")
    return np.maximum(amp - floor, 0.0)


def _scores(excess: np.ndarray, df: float, cand: np.ndarray, harmonics: int) -> np.ndarray:
    """Harmonic sums S(F) for candidates ``cand`` (Hz), along the last axis."""
    grid = np.arange(excess.shape[-1])
    out = np.zeros(excess.shape[:-1] + (cand.size,))
    for h in range(1, harmonics + 1):
        pos = h * cand / df
        inside = pos <= grid[-1]
        lo = np.minimum(np.floor(pos).astype(int), grid[-1] - 1)
        frac = pos - lo
        val = excess[..., lo] * (1.0 - frac) + excess[..., lo + 1] * frac
        out += HARMONIC_WEIGHT ** (h - 1) * np.where(inside, val, 0.0)
    return out


def _confidence(excess: np.ndarray, df: float, fundamental: float, harmonics: int,
                lobe_hz: float, f_lo: float) -> float:
    """Share of the excess power from ``f_lo / 2`` to ``(H + ½) · F`` that lies within
    ``lobe_hz`` of a harmonic ``h · F`` (see the module notes)."""
    f = np.arange(excess.size) * df
    top = min(f[-1], (harmonics + 0.5) * fundamental)
    band = (f >= 0.5 * f_lo) & (f <= top)
    h = np.rint(f / fundamental)
    near = (h >= 1) & (h <= harmonics) & (np.abs(f - h * fundamental) <= lobe_hz)
    p = excess * excess
    total = float(p[band].sum())
    return float(p[band & near].sum() / total) if total > 0 else 0.0


def _refine(amp: np.ndarray, df: float, fundamental: float, harmonics: int) -> float:
    """Least-squares fundamental from the interpolated harmonic peaks near h · F."""
    num = den = 0.0
    for h in range(1, harmonics + 1):
        k = int(round(h * fundamental / df))
        if k < 2 or k + 3 >= amp.size:
            continue
        j = k - 2 + int(np.argmax(amp[k - 2:k + 3]))
        a0, a1, a2 = np.log(np.maximum(amp[j - 1:j + 2], np.finfo(float).tiny))
        curv = a0 - 2.0 * a1 + a2
        off = 0.5 * (a0 - a2) / curv if curv < 0 else 0.0  # Gaussian (log-parabola) peak
        f_h = (j + np.clip(off, -0.5, 0.5)) * df
        weight = HARMONIC_WEIGHT ** (h - 1) * amp[j]
        num += weight * h * f_h
        den += weight * h * h
    return num / den if den > 0 else fundamental


def _check_common(order, harmonics, source):
    o = require_positive(order, "order", source=source)
    if isinstance(harmonics, bool) or not isinstance(harmonics, (int, np.integer)) or harmonics < 1:
        raise InputError(f"{source + ': ' if source else ''}harmonics must be a whole number "
                         f"of at least 1, got {harmonics!r}")
    return o, int(harmonics)


def estimate_speed(
    samples: np.ndarray,
    fs_hz: float,
    *,
    near_rpm: float | None = None,
    search_rpm: tuple[float, float] | None = None,
    order: float = 1.0,
    harmonics: int = 5,
    source: str = "",
) -> SpeedEstimate:
    """Shaft speed of a steady run from its vibration, by a harmonic-sum search ([1]_).

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Vibration waveform at (near) constant speed.
    fs_hz : float
        Sample rate, Hz.
    near_rpm : float, optional, keyword-only
        A rough speed; the search covers 0.5 … 1.5 times it.
    search_rpm : (low, high), optional, keyword-only
        Search range, rev/min (overrides ``near_rpm``); default 300 … 6000.
    order : float, keyword-only
        Order of the harmonic series' fundamental (1.0: running speed; the number of
        blades for a blade-pass series, …); the speed is its frequency / order.
    harmonics : int, keyword-only
        Harmonics summed.

    Returns
    -------
    SpeedEstimate
        The frequency resolution is that of one Hann frame over the whole record;
        the refinement makes the estimate much finer than it.
    """
    o, n_h = _check_common(order, harmonics, source)
    x = as_signal(samples, "samples", source=source, min_size=64)
    fs = require_positive(fs_hz, "sample rate", source=source)
    f_lo, f_hi = _search_hz(near_rpm, search_rpm, o, source)
    if x.size / fs < 4.0 / f_lo:
        raise InputError(f"{source + ': ' if source else ''}the record lasts {x.size / fs:.3g} s; "
                         f"a speed search down to {60 * f_lo / o:g} rpm needs at least "
                         f"{4.0 / f_lo:.3g} s (four cycles of the lowest frequency)")
    y, fs_y, _, n_h = _prepare(x, fs, f_hi, n_h, source)
    n = y.size
    n_fft = _ZERO_PAD * scipy.fft.next_fast_len(n)
    amp = short_time_spectra(y, fs_y, frame_length=n, starts=np.array([0]), n_fft=n_fft)[0]
    df = fs_y / n_fft
    excess = _excess(amp, int(f_lo / df))
    cand = np.arange(f_lo, f_hi, 0.25 * df / n_h)
    score = _scores(excess, df, cand, n_h)
    best = int(np.argmax(score))
    f = _refine(amp, df, float(cand[best]), n_h)
    conf = _confidence(excess, df, f, n_h, _LOBE_BINS * fs_y / n, f_lo)
    return SpeedEstimate(rpm=float(60.0 * f / o), confidence=conf,
                         method=f"harmonic sum of {n_h} harmonics of order {o:g}, "
                                f"{60 * f_lo / o:g}–{60 * f_hi / o:g} rpm, "
                                f"{fs_y * 1 / n:.3g} Hz resolution")


def track_speed(
    samples: np.ndarray,
    fs_hz: float,
    *,
    near_rpm: float | None = None,
    search_rpm: tuple[float, float] | None = None,
    order: float = 1.0,
    harmonics: int = 5,
    frame_s: float = 1.0,
    step_s: float = 0.25,
    max_rate_rpm_per_s: float | None = None,
    source: str = "",
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Shaft speed against time from vibration (run-ups, coast-downs without a tach).

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    near_rpm, search_rpm, order, harmonics : keyword-only
        As for :func:`estimate_speed`; the search range holds for the whole record.
    frame_s : float, keyword-only
        Length of each short-time spectrum, s (resolution ``1 / frame_s`` Hz).
    step_s : float, keyword-only
        Time between frames, s.
    max_rate_rpm_per_s : float, optional, keyword-only
        Fastest speed change allowed between frames, rev/min per second; default
        half the top of the search range per second.

    Returns
    -------
    (t, rpm, confidence)
        Shapes (frames,): frame-centre times (s from the first sample), speeds
        (rev/min) and the confidence of each frame (0 … 1).
    """
    o, n_h = _check_common(order, harmonics, source)
    pre = f"{source}: " if source else ""
    x = as_signal(samples, "samples", source=source, min_size=64)
    fs = require_positive(fs_hz, "sample rate", source=source)
    frame = require_positive(frame_s, "frame_s", source=source)
    hop = require_positive(step_s, "step_s", source=source)
    f_lo, f_hi = _search_hz(near_rpm, search_rpm, o, source)
    rate = (0.5 * 60.0 * f_hi / o if max_rate_rpm_per_s is None
            else require_positive(max_rate_rpm_per_s, "max_rate_rpm_per_s", source=source))
    if frame > 0.9 * x.size / fs or frame < 2.0 / f_lo:
        raise InputError(f"{pre}frames of {frame:g} s must fit in the record "
                         f"({x.size / fs:.3g} s) and hold two cycles of the lowest "
                         f"frequency searched ({2.0 / f_lo:.3g} s)")
    y, fs_y, offset, n_h = _prepare(x, fs, f_hi, n_h, source)
    n = int(round(frame * fs_y))
    step = max(1, int(round(hop * fs_y)))
    if n > y.size:
        raise InputError(f"{pre}frames of {frame:g} s do not fit in the record after "
                         f"decimation ({y.size / fs_y:.3g} s)")
    starts = np.arange(0, y.size - n + 1, step)
    n_fft = _ZERO_PAD * scipy.fft.next_fast_len(n)
    amp = short_time_spectra(y, fs_y, frame_length=n, starts=starts, n_fft=n_fft)
    df = fs_y / n_fft
    excess = _excess(amp, int(f_lo / df))
    d_cand = 0.5 * df / n_h
    cand = np.arange(f_lo, f_hi, d_cand)
    score = _scores(excess, df, cand, n_h)
    path = _best_path(score, int(np.ceil(rate / 60.0 * o * (step / fs_y) / d_cand)))
    power = amp * amp
    floor = median_filter(power, size=(1, min(max(33, int(f_lo / df)) | 1, power.shape[1] | 1)),
                          mode="nearest")
    excess_power = np.maximum(power - floor, 0.0)
    f_path = cand[path]
    sweep = np.abs(np.gradient(f_path)) * (n / step) if f_path.size > 1 else np.zeros(1)
    rpm = np.empty(starts.size)
    conf = np.empty(starts.size)
    for i, f0 in enumerate(f_path):
        half = 3.0 * fs_y / n + 0.6 * sweep[i]  # main lobe plus the sweep in one frame
        lo = max(1, int(np.floor((f0 - half) / df)))
        hi = min(power.shape[1] - 1, int(np.ceil((f0 + half) / df)))
        p = excess_power[i, lo:hi + 1]
        f = (np.arange(lo, hi + 1) * df @ p) / p.sum() if p.sum() > 0 else f0
        rpm[i] = 60.0 * f / o
        conf[i] = _confidence(excess[i], df, f, n_h, _LOBE_BINS * fs_y / n + 0.5 * sweep[i],
                              f_lo)
    t = offset + (starts + 0.5 * n) / fs_y
    return t, rpm, conf


def _best_path(score: np.ndarray, reach: int) -> np.ndarray:
    """Candidate index per frame maximising the summed score, moving at most
    ``reach`` candidates from one frame to the next (dynamic programming)."""
    frames, cands = score.shape
    size = 2 * max(reach, 0) + 1
    total = np.empty_like(score)
    total[0] = score[0]
    for i in range(1, frames):
        total[i] = score[i] + maximum_filter1d(total[i - 1], size=size, mode="constant",
                                               cval=-np.inf)
    path = np.empty(frames, dtype=int)
    path[-1] = int(np.argmax(total[-1]))
    for i in range(frames - 2, -1, -1):
        lo = max(0, path[i + 1] - reach)
        hi = min(cands, path[i + 1] + reach + 1)
        path[i] = lo + int(np.argmax(total[i, lo:hi]))
    return path
