"""The live averaged spectrum: the engine's spectrum computed one new frame at a time.

Samples arrive in blocks of any size.  When the chosen Fmax is below fs/2.56 they are
first brought to the analysis rate 2.56·Fmax by a streaming anti-alias decimator (an
integer factor, so that every Fmax offered is exact).  Each time a frame of
``2.56 · lines`` samples is complete, only that frame is transformed: its mean is
removed, it is windowed, and its squared DFT magnitude joins the average (linear over
the last ``averages`` frames, exponential with a time constant of ``averages`` frames,
or peak hold).  Amplitudes are scaled exactly as :func:`engine.spectrum.compute_spectrum`
scales them, so a sine of amplitude A on a line reads A peak.

Nothing here imports Qt: the view owns a :class:`LiveSpectrum` and draws what it holds.

References
----------
.. [1] G. Heinzel, A. Rüdiger, R. Schilling, "Spectrum and spectral density estimation
   by the DFT ...", Max-Planck-Institut für Gravitationsphysik, 2002 (linear spectrum
   scaling: RMS of line k = sqrt(2)·|X_k| / sum(w)).
.. [2] J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
   function", Proc. IEEE ISCAS, 1974 (scipy.signal.kaiserord / firwin).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
from scipy import signal as _signal

from engine.errors import InputError
from engine.resample import SAMPLES_PER_FMAX, STOPBAND_DB
from engine.spectrum import SpectrumSettings
from engine.units import DEFAULT_LOW_CUT_HZ, frequency_gain, unit
from engine.validate import require_positive
from engine.windows import get_window

#: Spectra per second aimed at when the overlap is "auto" (frames overlap by at least
#: half, more when frames are long, so that the view moves at least 10 times a second).
AUTO_FRAMES_PER_S = 16.0
#: Decimation factors offered: Fmax = fs / (2.56 · factor).
FMAX_FACTORS = (1, 2, 4, 5, 8, 10, 16, 20, 25, 32, 40, 50, 64, 80, 100)
#: Lines offered (the trade's usual powers of two times 100, common practice).
LINES_CHOICES = (100, 200, 400, 800, 1600, 3200, 6400, 12800)
AVERAGING = ("exponential", "linear", "peak-hold")
AMPLITUDE_SCALES = {"peak": 2.0, "rms": 1.0, "pp": 8.0}  # mean square → amplitude²


def fmax_choices(fs_hz: float, *, lowest_hz: float = 10.0) -> list[float]:
    """Fmax values (Hz) available at sample rate ``fs_hz``: fs/(2.56·k), highest first."""
    fs = require_positive(fs_hz, "sample rate")
    out = [fs / (SAMPLES_PER_FMAX * k) for k in FMAX_FACTORS]
    return [f for f in out if f >= lowest_hz] or out[:1]


def decimation_factor(fs_hz: float, fmax_hz: float) -> int:
    """The integer k with fs = 2.56 · Fmax · k, or InputError."""
    k = fs_hz / (SAMPLES_PER_FMAX * fmax_hz)
    kr = int(round(k))
    if kr < 1 or abs(k - kr) > 1e-6 * k:
        choices = ", ".join(f"{f:g}" for f in fmax_choices(fs_hz)[:6])
        raise InputError(f"Fmax {fmax_hz:g} Hz: at {fs_hz:g} Hz the live view offers "
                         f"fs/(2.56·k) for whole k, e.g. {choices} Hz")
    return kr


@dataclass(frozen=True)
class LiveSettings:
    """How the live view computes its spectrum (one state object the widgets bind to).

    Attributes
    ----------
    fmax_hz : float or None
        Highest frequency, Hz (fs/(2.56·k)); ``None`` = fs/2.56.
    lines : int
        Lines from 0 to Fmax.
    window : str
        One of :data:`engine.windows.WINDOWS`.
    averaging : str
        ``exponential``, ``linear`` (mean of the last ``averages`` frames) or
        ``peak-hold``.
    averages : int
        Frames averaged (linear) or the time constant in frames (exponential).
    overlap : float or None
        Fraction of a frame shared with the next, 0 … 0.9; ``None`` = auto (at least
        half, more when needed for :data:`AUTO_FRAMES_PER_S` spectra per second).
    scale : str
        ``peak``, ``rms`` or ``pp``.
    unit : str or None
        Unit shown (integrating per line, e.g. g → mm/s); ``None`` = the source's.
    """

    fmax_hz: float | None = None
    lines: int = 800
    window: str = "hann"
    averaging: str = "exponential"
    averages: int = 8
    overlap: float | None = None
    scale: str = "peak"
    unit: str | None = None

    def validated(self) -> LiveSettings:
        """Canonical names; InputError naming the field when something is out of range."""
        if self.averaging not in AVERAGING:
            raise InputError(f"live spectrum: averaging {self.averaging!r} is not known; "
                             f"expected one of {', '.join(AVERAGING)}")
        if self.scale not in AMPLITUDE_SCALES:
            raise InputError(f"live spectrum: scale {self.scale!r} is not known; expected "
                             f"one of {', '.join(AMPLITUDE_SCALES)}")
        if int(self.averages) < 1:
            raise InputError(f"live spectrum: averages must be at least 1, got {self.averages}")
        base = SpectrumSettings(fmax_hz=self.fmax_hz, lines=self.lines, window=self.window,
                                overlap=0.5 if self.overlap is None else self.overlap,
                                ).validated(source="live spectrum")
        return replace(self, lines=base.lines, window=base.window, averages=int(self.averages),
                       overlap=None if self.overlap is None else base.overlap)


class StreamDecimator:
    """Anti-alias low-pass and keep every k-th sample, block by block.

    The FIR filter has the engine's resampling specification (passband to Fmax,
    ≥ 100 dB down from the new Nyquist frequency 1.28·Fmax, [2]_), linear phase, unit
    gain at DC.  Outputs start once the filter holds a full history (no start-up
    transient), and blocks of any size give the same output as one long block (to
    rounding).

    Parameters
    ----------
    fs_hz : float
        Input rate, Hz.
    factor : int
        Decimation factor k ≥ 2.
    fmax_hz : float
        Passband edge, Hz (fs / (2.56·k)).
    """

    def __init__(self, fs_hz: float, factor: int, fmax_hz: float) -> None:
        if int(factor) < 2:
            raise InputError(f"decimator: factor must be at least 2, got {factor}")
        self.factor = int(factor)
        fs_out = fs_hz / self.factor
        width = (fs_out / 2.0 - fmax_hz) / (fs_hz / 2.0)
        numtaps, beta = _signal.kaiserord(STOPBAND_DB, width)
        numtaps |= 1
        taps = _signal.firwin(numtaps, (fmax_hz + fs_out / 2.0) / 2.0,
                              window=("kaiser", beta), fs=fs_hz)
        self.taps = taps
        self._reversed = np.ascontiguousarray(taps[::-1])
        self._hist = np.zeros(0)
        self._next = numtaps - 1  # position (in history + block) of the next output

    def process(self, x: np.ndarray) -> np.ndarray:
        """Decimated samples for the input block ``x``."""
        buf = np.concatenate((self._hist, np.asarray(x, dtype=float)))
        n_taps, k = self.taps.size, self.factor
        last = buf.size - 1
        if last < self._next:
            self._hist = buf
            return np.zeros(0)
        count = (last - self._next) // k + 1
        first = self._next - n_taps + 1
        windows = np.lib.stride_tricks.sliding_window_view(buf, n_taps)
        y = windows[first:first + (count - 1) * k + 1:k] @ self._reversed
        nxt = self._next + count * k
        cut = nxt - n_taps + 1
        self._hist = buf[cut:].copy()
        self._next = nxt - cut
        return y


class LiveSpectrum:
    """A running averaged spectrum of a stream of samples.

    Parameters
    ----------
    settings : LiveSettings
    fs_hz : float
        The stream's sample rate, Hz.
    unit_in : str
        Unit of the samples.
    on_frame : callable, optional
        Called with each frame's own (not averaged) amplitude, shape (lines + 1,), in
        the shown unit and scale (for the waterfall).  The array is reused: copy what
        you keep.

    Attributes
    ----------
    frequency_hz : ndarray, shape (lines + 1,)
        0, Δf, … Fmax.
    amplitude : ndarray, shape (lines + 1,)
        The averaged spectrum in ``unit`` and ``settings.scale`` (zeros before the
        first frame).
    frames : int
        Frames averaged so far (since the start or the last :meth:`reset`).
    frame_length, hop : int
        Samples per frame and between frame starts, at the analysis rate.
    analysis_rate_hz, resolution_hz, hop_s, frame_s : float
    unit : str
        Unit symbol shown.
    """

    def __init__(self, settings: LiveSettings, fs_hz: float, unit_in: str, *,
                 on_frame: Callable[[np.ndarray], None] | None = None) -> None:
        cfg = settings.validated()
        self.fs_hz = require_positive(fs_hz, "sample rate", source="live spectrum")
        fmax = cfg.fmax_hz if cfg.fmax_hz is not None else self.fs_hz / SAMPLES_PER_FMAX
        k = decimation_factor(self.fs_hz, fmax)
        self.settings = replace(cfg, fmax_hz=float(fmax))
        self.analysis_rate_hz = self.fs_hz / k
        self.decimator = StreamDecimator(self.fs_hz, k, fmax) if k > 1 else None
        n = int(round(SAMPLES_PER_FMAX * cfg.lines))
        if cfg.overlap is None:
            hop = min(n // 2, int(round(self.analysis_rate_hz / AUTO_FRAMES_PER_S)))
        else:
            hop = int(round(n * (1.0 - cfg.overlap)))
        self.frame_length, self.hop = n, max(1, hop)
        self.resolution_hz = self.analysis_rate_hz / n
        self.frame_s, self.hop_s = n / self.analysis_rate_hz, self.hop / self.analysis_rate_hz
        keep = cfg.lines + 1
        self.frequency_hz = np.arange(keep) * self.resolution_hz
        self.unit_in = unit(unit_in).symbol
        self.unit = unit(cfg.unit).symbol if cfg.unit else self.unit_in
        gain = np.abs(frequency_gain(self.frequency_hz, self.unit_in, self.unit,
                                     low_cut_hz=DEFAULT_LOW_CUT_HZ))
        w = get_window(cfg.window, n)
        one_sided = np.full(keep, 2.0)
        one_sided[0] = 1.0  # DC has no mirror image
        # amplitude = coef · sqrt(|X_k|²): the scaling of compute_spectrum ([1]).
        self._coef = gain * np.sqrt(AMPLITUDE_SCALES[cfg.scale] * one_sided) / float(w.sum())
        self._w = w
        self._on_frame = on_frame
        self._pending = np.zeros(n)
        self._work = np.zeros(n)
        self._X = np.zeros(n // 2 + 1, dtype=complex)
        self._power = np.zeros(keep)
        self._tmp = np.zeros(keep)
        self._inst = np.zeros(keep)
        self._avg = np.zeros(keep)
        self.amplitude = np.zeros(keep)
        self._ring = np.zeros((cfg.averages, keep)) if cfg.averaging == "linear" else None
        self._sum = np.zeros(keep)
        self._fill = 0
        self.frames = 0

    @property
    def unit_label(self) -> str:
        """``"g peak"``, ``"mm/s RMS"``, … for the axis."""
        word = {"peak": "peak", "rms": "RMS", "pp": "pk-pk"}[self.settings.scale]
        return f"{unit(self.unit).label} {word}"

    def reset(self) -> None:
        """Start the average again (the frame being filled is kept)."""
        self.frames = 0
        self._avg[:] = 0.0
        self._sum[:] = 0.0
        self.amplitude[:] = 0.0

    def feed(self, samples: np.ndarray) -> int:
        """Add samples at ``fs_hz``; returns how many new frames joined the average."""
        y = np.asarray(samples, dtype=float)
        if self.decimator is not None:
            y = self.decimator.process(y)
        n, done, i = self.frame_length, 0, 0
        while i < y.size:
            take = min(y.size - i, n - self._fill)
            self._pending[self._fill:self._fill + take] = y[i:i + take]
            self._fill += take
            i += take
            if self._fill == n:
                self._add_frame()
                done += 1
                keep = n - self.hop
                if keep > 0:
                    self._pending[:keep] = self._pending[self.hop:n]
                self._fill = max(keep, 0)
        if done:
            np.sqrt(self._avg, out=self.amplitude)
            self.amplitude *= self._coef
        return done

    def _add_frame(self) -> None:
        work, keep = self._work, self._power.size
        np.subtract(self._pending, self._pending.mean(), out=work)
        work *= self._w
        np.fft.rfft(work, out=self._X)
        spec = self._X[:keep]
        p = self._power
        np.square(spec.real, out=p)
        np.square(spec.imag, out=self._tmp)
        p += self._tmp
        self.frames += 1
        k, avg, mode = self.frames, self._avg, self.settings.averaging
        if mode == "exponential":
            if k == 1:
                avg[:] = p
            else:
                # weight 1/min(k, τ): a linear mean until τ frames, then exponential,
                # as engine.spectrum.averaged_power does.
                np.subtract(p, avg, out=self._tmp)
                self._tmp /= min(k, self.settings.averages)
                avg += self._tmp
        elif mode == "peak-hold":
            if k == 1:
                avg[:] = p
            else:
                np.maximum(avg, p, out=avg)
        else:
            slot = (k - 1) % self._ring.shape[0]
            if k > self._ring.shape[0]:
                self._sum -= self._ring[slot]
            self._ring[slot] = p
            self._sum += p
            np.divide(self._sum, min(k, self._ring.shape[0]), out=avg)
        if self._on_frame is not None:
            np.sqrt(p, out=self._inst)
            self._inst *= self._coef
            self._on_frame(self._inst)

    def peak(self) -> tuple[float, float]:
        """Frequency (Hz) and amplitude of the highest line above DC."""
        if self.amplitude.size < 2:
            return 0.0, 0.0
        i = 1 + int(np.argmax(self.amplitude[1:]))
        return float(self.frequency_hz[i]), float(self.amplitude[i])
