"""Amplitude-correct, averaged spectra in the trade's form (Fmax, lines, averages).

A spectrum of ``lines`` lines up to ``fmax_hz`` is computed from frames of
``N = 2.56 · lines`` samples at the analysis rate ``2.56 · Fmax`` (common practice), so
the line spacing is ``Fmax / lines``.  Frames are windowed, transformed, and their
squared magnitudes averaged (linear, exponential or peak hold) with overlap; the
result is scaled to peak, RMS or peak-to-peak amplitude, or to power / amplitude
spectral density.

Scaling (one-sided, window ``w`` of length ``N``, frame DFT ``X_k``):

* RMS amplitude of line k ≥ 1: ``sqrt(2 · mean|X_k|²) / sum(w)`` (unit RMS);
  a sinusoid of amplitude A exactly on a line reads A/√2.
* peak = √2 · RMS; peak-to-peak = 2 · peak (for sinusoids).
* PSD: ``RMS² / ENBW_Hz`` = ``2 · mean|X_k|² / (fs · sum(w²))`` (unit²/Hz), the
  density scaling of Welch's method ([1], [2] eq. 24); ASD = √PSD (unit/√Hz).

References
----------
.. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra", IEEE Trans. Audio Electroacoust. 15(2):70–73, 1967.
.. [2] G. Heinzel, A. Rüdiger, R. Schilling, "Spectrum and spectral density estimation
   by the DFT ...", Max-Planck-Institut für Gravitationsphysik, 2002.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import lru_cache

import numpy as np
import scipy.fft

from .errors import InputError
from .resample import SAMPLES_PER_FMAX, analysis_rate, resample_to_fmax
from .units import DEFAULT_LOW_CUT_HZ, frequency_gain, quantity_of, to_db, unit
from .validate import as_signal, require_positive
from .windows import get_window, metrics, window_name

SCALES = ("peak", "rms", "pp", "psd", "asd")
AVERAGING = ("linear", "exponential", "peak-hold")
DETREND = ("constant", "none")
#: Lines accepted (the trade's usual range is 100 … 25600; any value in between works).
MIN_LINES, MAX_LINES = 100, 25600


@dataclass(frozen=True)
class SpectrumSettings:
    """How to compute a spectrum.

    Attributes
    ----------
    fmax_hz : float or None
        Highest frequency shown, Hz; ``None`` uses fs/2.56 (no resampling).
    lines : int
        Number of lines from 0 to Fmax (100 … 25600).
    window : str
        One of :data:`engine.windows.WINDOWS`.
    averages : int or None
        Frames averaged (linear, peak hold) or the time constant in frames
        (exponential); ``None`` uses every full frame the recording holds.
    overlap : float
        Fraction of a frame shared with the next, 0 … 0.9.
    averaging : str
        ``linear`` (power mean), ``exponential`` or ``peak-hold``.
    scale : str
        ``peak``, ``rms``, ``pp``, ``psd`` or ``asd``.
    detrend : str
        ``constant`` removes each frame's mean (the DC line reads zero), ``none`` keeps it.
    """

    fmax_hz: float | None = None
    lines: int = 1600
    window: str = "hann"
    averages: int | None = None
    overlap: float = 0.5
    averaging: str = "linear"
    scale: str = "rms"
    detrend: str = "constant"

    def validated(self, *, source: str = "") -> SpectrumSettings:
        """The same settings with names made canonical; InputError when out of range."""
        pre = f"{source}: " if source else ""
        lines = int(self.lines)
        if not MIN_LINES <= lines <= MAX_LINES:
            raise InputError(f"{pre}lines must be between {MIN_LINES} and {MAX_LINES}, got {self.lines}")
        if not 0.0 <= float(self.overlap) <= 0.9:
            raise InputError(f"{pre}overlap must be between 0 and 0.9 (0–90 %), got {self.overlap}")
        if self.averages is not None and int(self.averages) < 1:
            raise InputError(f"{pre}averages must be at least 1, got {self.averages}")
        if self.fmax_hz is not None:
            require_positive(self.fmax_hz, "Fmax", source=source)
        for value, allowed, name in ((self.averaging, AVERAGING, "averaging"),
                                     (self.scale, SCALES, "scale"),
                                     (self.detrend, DETREND, "detrend")):
            if value not in allowed:
                raise InputError(f"{pre}{name} {value!r} is not known; expected one of {', '.join(allowed)}")
        return replace(self, lines=lines, window=window_name(self.window),
                       overlap=float(self.overlap))


@dataclass
class Spectrum:
    """An averaged spectrum with its axis and everything needed to read it.

    Attributes
    ----------
    frequency_hz : ndarray, shape (lines + 1,)
        0, Δf, … Fmax.
    amplitude : ndarray, shape (lines + 1,)
        In ``unit`` (peak, RMS or pp), ``unit²/Hz`` (psd) or ``unit/√Hz`` (asd).
    mean_square : ndarray, shape (lines + 1,)
        RMS² per line in ``unit²``, whatever the scale (for band levels).
    unit, scale, window : str
    fmax_hz, resolution_hz, enbw_hz, fs_hz : float
        ``fs_hz`` is the analysis rate (2.56·Fmax).
    lines, averages, frame_length : int
        ``averages`` is the number of frames actually used.
    overlap : float
    averaging : str
    warnings : list of str
    """

    frequency_hz: np.ndarray
    amplitude: np.ndarray
    mean_square: np.ndarray
    unit: str
    scale: str
    window: str
    fmax_hz: float
    lines: int
    resolution_hz: float
    enbw_hz: float
    fs_hz: float
    averages: int
    frame_length: int
    overlap: float
    averaging: str
    warnings: list[str] = field(default_factory=list)

    @property
    def enbw_bins(self) -> float:
        return self.enbw_hz / self.resolution_hz

    @property
    def unit_label(self) -> str:
        """Unit of ``amplitude`` including the density for psd/asd."""
        base = unit(self.unit).label
        return {"psd": f"{base}²/Hz", "asd": f"{base}/√Hz"}.get(self.scale, base)

    def band_rms(self, low_hz: float, high_hz: float) -> float:
        """RMS level in a band, from the lines inside it, in ``unit``.

        Sum of line powers divided by the window's ENBW in bins ([2], eq. 26).
        """
        sel = (self.frequency_hz >= low_hz) & (self.frequency_hz <= high_hz)
        return float(np.sqrt(self.mean_square[sel].sum() / self.enbw_bins))

    def rescaled(self, scale: str) -> Spectrum:
        """The same spectrum in another scale."""
        if scale not in SCALES:
            raise InputError(f"scale {scale!r} is not known; expected one of {', '.join(SCALES)}")
        return replace(self, scale=scale, amplitude=_scaled(self.mean_square, scale, self.enbw_hz))

    def converted(self, to_unit: str, *, low_cut_hz: float = DEFAULT_LOW_CUT_HZ) -> Spectrum:
        """The same spectrum in another unit, integrating or differentiating per line."""
        gain = frequency_gain(self.frequency_hz, self.unit, to_unit, low_cut_hz=low_cut_hz)
        ms = self.mean_square * gain**2
        return replace(self, unit=unit(to_unit).symbol, mean_square=ms,
                       amplitude=_scaled(ms, self.scale, self.enbw_hz))

    def in_db(self) -> np.ndarray:
        """Amplitude in dB re the ISO 1683 reference value of the quantity.

        Amplitude scales give 20·log10(A/ref); psd gives 10·log10(PSD/ref²) (dB re
        ref²/Hz); asd gives 20·log10(ASD/ref).
        """
        q = quantity_of(self.unit)
        si = unit(self.unit).to_si
        linear = np.sqrt(self.amplitude) if self.scale == "psd" else self.amplitude
        return to_db(linear * si, q)

    def as_dict(self) -> dict:
        return {
            "unit": self.unit, "scale": self.scale, "window": self.window,
            "fmax_hz": self.fmax_hz, "lines": self.lines,
            "resolution_hz": self.resolution_hz, "enbw_hz": self.enbw_hz,
            "analysis_rate_hz": self.fs_hz, "averages": self.averages,
            "overlap": self.overlap, "averaging": self.averaging,
            "frequency_hz": self.frequency_hz.tolist(), "amplitude": self.amplitude.tolist(),
            "warnings": list(self.warnings),
        }


def _scaled(mean_square: np.ndarray, scale: str, enbw_hz: float) -> np.ndarray:
    if scale == "rms":
        return np.sqrt(mean_square)
    if scale == "peak":
        return np.sqrt(2.0 * mean_square)
    if scale == "pp":
        return 2.0 * np.sqrt(2.0 * mean_square)
    if scale == "psd":
        return mean_square / enbw_hz
    return np.sqrt(mean_square / enbw_hz)


@lru_cache(maxsize=32)
def _window_dft(name: str, n: int, keep: int) -> tuple[np.ndarray, np.ndarray]:
    """Non-zero lines of the window's own DFT below ``keep`` (for exact mean removal).

    Our windows are all cosine sums, whose DFT has only a few non-zero lines, so
    removing each frame's mean after the transform costs a handful of operations.
    """
    w = get_window(name, n)
    wf = scipy.fft.rfft(w)[:keep]
    idx = np.flatnonzero(np.abs(wf) > 1e-12 * np.abs(wf[0]))
    return idx, wf[idx]


def _frame_means(x: np.ndarray, frame_length: int, step: int, n_frames: int) -> np.ndarray:
    """Mean of each frame from one pass over the record (overlapping frames share
    segments: each frame's sum is the sum of the segments between frame edges)."""
    starts = np.arange(n_frames) * step
    edges = np.unique(np.concatenate([starts, starts + frame_length]))
    seg = np.add.reduceat(x[: edges[-1]], edges[:-1])
    pos = np.searchsorted(edges, starts)
    end = np.searchsorted(edges, starts + frame_length)
    cum = np.concatenate(([0.0], np.cumsum(seg)))
    return (cum[end] - cum[pos]) / frame_length


def frame_count(n_samples: int, frame_length: int, step: int) -> int:
    """How many full frames of ``frame_length`` with hop ``step`` fit in a record."""
    return 0 if n_samples < frame_length else 1 + (n_samples - frame_length) // step


def averaged_power(
    x: np.ndarray,
    *,
    frame_length: int,
    step: int,
    window: str,
    keep: int,
    n_frames: int,
    averaging: str = "linear",
    time_constant: int | None = None,
    detrend: str = "constant",
) -> np.ndarray:
    """Averaged squared DFT magnitude ``|X_k|²`` of windowed frames, lines 0 … keep−1.

    Parameters
    ----------
    x : ndarray, shape (n,)
    frame_length, step : int
        Frame length and hop, samples.
    window : str
    keep : int
        Number of lines kept from 0.
    n_frames : int
        Frames used, from the start of the record.
    averaging : str
        ``linear`` (mean), ``exponential`` (weight 1/min(k, time_constant) for frame k)
        or ``peak-hold`` (maximum per line).
    detrend : str
        ``constant`` removes each frame's mean before windowing.

    Returns
    -------
    ndarray, shape (keep,)
    """
    w = get_window(window, frame_length)
    frames = np.lib.stride_tricks.sliding_window_view(x, frame_length)[::step][:n_frames]
    spec = scipy.fft.rfft(frames * w, axis=-1)
    if keep < spec.shape[-1]:
        spec = spec[:, :keep]
    if detrend == "constant":
        idx, wf = _window_dft(window, frame_length, keep)
        spec[:, idx] -= _frame_means(x, frame_length, step, n_frames)[:, None] * wf[None, :]
    flat = spec.view(np.float64)
    if averaging == "linear":
        acc = np.einsum("ij,ij->j", flat, flat) / n_frames
        return acc[0::2] + acc[1::2]
    power = flat[:, 0::2] ** 2 + flat[:, 1::2] ** 2
    if averaging == "peak-hold":
        return power.max(axis=0)
    tc = max(1, int(time_constant or n_frames))
    avg = power[0].copy()
    for k in range(1, n_frames):
        avg += (power[k] - avg) / min(k + 1, tc)
    return avg


def welch_psd(
    samples: np.ndarray,
    fs_hz: float,
    *,
    frame_length: int,
    window: str = "hann",
    overlap: float = 0.5,
    detrend: str = "constant",
) -> tuple[np.ndarray, np.ndarray]:
    """One-sided power spectral density by Welch's method, full band 0 … fs/2.

    Equivalent to ``scipy.signal.welch(x, fs, window, nperseg=frame_length,
    noverlap=frame_length - step, detrend=..., scaling="density")`` ([1]).

    Returns
    -------
    (frequency_hz, psd)
        shapes (frame_length // 2 + 1,); psd in unit²/Hz.
    """
    x = as_signal(samples, "samples")
    require_positive(fs_hz, "sample rate")
    step = max(1, int(round(frame_length * (1.0 - overlap))))
    n_frames = frame_count(x.size, frame_length, step)
    if n_frames < 1:
        raise InputError(f"the record has {x.size} samples, fewer than one frame of {frame_length}")
    keep = frame_length // 2 + 1
    p = averaged_power(x, frame_length=frame_length, step=step, window=window_name(window),
                       keep=keep, n_frames=n_frames, detrend=detrend)
    w = get_window(window_name(window), frame_length)
    psd = p / (fs_hz * float(np.square(w).sum()))
    psd[1:] *= 2.0
    if frame_length % 2 == 0:
        psd[-1] /= 2.0  # the Nyquist line has no mirror image
    return np.fft.rfftfreq(frame_length, 1.0 / fs_hz), psd


def compute_spectrum(
    samples: np.ndarray,
    fs_hz: float,
    *,
    unit_in: str = "g",
    unit_out: str | None = None,
    settings: SpectrumSettings = SpectrumSettings(),
    low_cut_hz: float = DEFAULT_LOW_CUT_HZ,
    source: str = "",
) -> Spectrum:
    """Averaged, amplitude-correct spectrum of a waveform.

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Waveform in ``unit_in``.
    fs_hz : float
        Sample rate, Hz.
    unit_in : str, keyword-only
        Unit of the samples.
    unit_out : str or None
        Unit of the spectrum (integration or differentiation per line, with
        ``low_cut_hz``); ``None`` keeps ``unit_in``.
    settings : SpectrumSettings
    low_cut_hz : float
        Lines below it are zeroed when integrating, Hz.
    source : str
        Named in messages.

    Returns
    -------
    Spectrum

    Raises
    ------
    InputError
        Settings out of range, Fmax above fs/2.56, or a record shorter than one frame.

    Examples
    --------
    A 2 g RMS sine at 100 Hz, on a line, reads 2.0 g RMS:

    >>> fs = 2560.0
    >>> t = np.arange(8192) / fs
    >>> x = 2 * np.sqrt(2) * np.sin(2 * np.pi * 100 * t)
    >>> s = compute_spectrum(x, fs, settings=SpectrumSettings(lines=800, scale="rms"))
    >>> round(float(s.amplitude.max()), 6)
    2.0
    """
    cfg = settings.validated(source=source)
    x = as_signal(samples, "samples", source=source)
    require_positive(fs_hz, "sample rate", source=source)
    fmax = float(cfg.fmax_hz) if cfg.fmax_hz is not None else fs_hz / SAMPLES_PER_FMAX
    x, fs_a = resample_to_fmax(x, fs_hz, fmax, source=source)
    n = int(round(SAMPLES_PER_FMAX * cfg.lines))
    step = max(1, int(round(n * (1.0 - cfg.overlap))))
    available = frame_count(x.size, n, step)
    pre = f"{source}: " if source else ""
    if available < 1:
        need_s = n / fs_a
        raise InputError(
            f"{pre}{cfg.lines} lines at Fmax {fmax:g} Hz need frames of {need_s:.3g} s "
            f"({n} samples at {fs_a:g} Hz); the recording lasts only "
            f"{np.asarray(samples).size / fs_hz:.3g} s — use fewer lines or a higher Fmax"
        )
    warnings: list[str] = []
    if cfg.averaging == "exponential" or cfg.averages is None:
        used = available
    elif cfg.averages > available:
        used = available
        warnings.append(
            f"{pre}asked for {cfg.averages} averages but the recording holds only "
            f"{available} frames of {n} samples at {cfg.overlap:.0%} overlap; used {available}"
        )
    else:
        used = int(cfg.averages)
    keep = cfg.lines + 1
    power = averaged_power(x, frame_length=n, step=step, window=cfg.window, keep=keep,
                           n_frames=used, averaging=cfg.averaging,
                           time_constant=cfg.averages, detrend=cfg.detrend)
    w = get_window(cfg.window, n)
    s1 = float(w.sum())
    ms = power / (s1 * s1)
    ms[1:] *= 2.0
    df = fs_a / n
    enbw_hz = metrics(cfg.window, n).enbw_hz(df)
    spec = Spectrum(
        frequency_hz=np.arange(keep) * df, amplitude=_scaled(ms, cfg.scale, enbw_hz),
        mean_square=ms, unit=unit(unit_in).symbol, scale=cfg.scale, window=cfg.window,
        fmax_hz=fmax, lines=cfg.lines, resolution_hz=df, enbw_hz=enbw_hz, fs_hz=fs_a,
        averages=used, frame_length=n, overlap=cfg.overlap, averaging=cfg.averaging,
        warnings=warnings,
    )
    if unit_out is not None and unit(unit_out).symbol != spec.unit:
        spec = spec.converted(unit_out, low_cut_hz=low_cut_hz)
    return spec


def required_samples(settings: SpectrumSettings, fs_hz: float, averages: int = 1) -> int:
    """Samples a recording at ``fs_hz`` needs for ``averages`` frames of these settings."""
    cfg = settings.validated()
    fmax = cfg.fmax_hz or fs_hz / SAMPLES_PER_FMAX
    n = int(round(SAMPLES_PER_FMAX * cfg.lines))
    step = max(1, int(round(n * (1.0 - cfg.overlap))))
    ratio = fs_hz / analysis_rate(fmax)
    return int(np.ceil((n + (averages - 1) * step) * ratio))
