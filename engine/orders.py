"""Computed order tracking: vibration resampled to constant steps of shaft angle.

On a run-up or coast-down every speed-locked component (1×, 2×, gear mesh, blade
pass) sweeps through the spectrum in Hz, while a structural resonance or a fixed tone
stays put.  Resampled at constant steps of shaft angle, the speed-locked components
become stationary lines at fixed *orders* (cycles per revolution) and the rest smears
out.  The method is computed order tracking ([1]_):

1. **Shaft angle** from the tachometer pulses: pulse ``i`` is at ``i / ppr``
   revolutions; the time of any angle is interpolated by a monotone cubic (PCHIP,
   [2]_) through (revolutions, pulse time).  [1]_ fits a quadratic per three pulses;
   the monotone cubic has the same order of accuracy, is smooth across pulses and can
   never run backwards.
2. **Anti-alias low-pass, in time, on the whole record, before resampling.**  The
   angle-domain rate ``samples_per_rev · f`` (f the shaft speed in rev/s) is lowest
   at the lowest speed, so everything above ``(samples_per_rev / 2) · f_min`` Hz
   would alias.  The filter passes every order up to ``max_order`` at the *highest*
   speed (``max_order · f_max`` Hz, so that no order asked for is lost anywhere in a
   run-up) and stops at ``1.25`` times that, and ``samples_per_rev`` is the smallest
   power of 2 of at least ``2.56 · max_order`` that puts the stop edge at or below
   ``(samples_per_rev / 2) · f_min``.  The filter is applied in the frequency domain
   (a raised-cosine transition on the record's DFT), after a decimation by a whole
   factor with a short linear-phase FIR that leaves the band below the stop edge
   untouched (ripple 1e-5), down to a rate of at least 10 × the stop edge: zero
   phase, flat pass band, and the cost of one FFT pair of the shorter record.  The
   record is treated as periodic: its first and last milliseconds carry some
   ringing of the wrap-around step.
3. **Resampling** at the angle grid by 4-point (cubic) Lagrange interpolation; at
   12.5 samples per cycle of the pass edge (10 of the stop edge) its amplitude error
   is at most 0.15 % there and falls with the square of frequency below ([1]_ shows
   why the interpolation needs such oversampling).

Order spectra, order cuts and the time-synchronous average are then spectra and
averages over revolutions of the angle-domain signal.

References
----------
.. [1] K. R. Fyfe, E. D. S. Munck, "Analysis of computed order tracking", Mechanical
   Systems and Signal Processing 11(2):187–205, 1997.
.. [2] F. N. Fritsch, R. E. Carlson, "Monotone piecewise cubic interpolation", SIAM J.
   Numer. Anal. 17(2):238–246, 1980 (scipy.interpolate.PchipInterpolator).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
import scipy.fft
from scipy import signal
from scipy.interpolate import PchipInterpolator

from .errors import InputError
from .resample import SAMPLES_PER_FMAX, resample_to_fmax
from .spectrum import averaged_power, frame_count
from .speed import short_time_spectra
from .tach import TachResult
from .validate import as_signal, require_positive
from .windows import get_window, window_name

#: Stop edge of the anti-alias filter relative to its pass edge.
TRANSITION = 1.25
#: Fewest samples per cycle of the stop edge kept for the interpolation.
OVERSAMPLING = 10.0
#: Largest number of samples per revolution chosen automatically.
MAX_SAMPLES_PER_REV = 2 ** 14
AMPLITUDE_SCALES = ("peak", "rms", "pp")


@dataclass(frozen=True)
class AngleSignal:
    """A waveform sampled at constant steps of shaft angle.

    Attributes
    ----------
    samples : ndarray, shape (m,)
        Values at revolutions ``start_rev + k / samples_per_rev``, unit as the input.
    samples_per_rev : int
    start_rev : float
        Angle of the first sample, revolutions from the first tachometer pulse (0).
    pass_hz, stop_hz : float
        Pass and stop edges of the anti-alias filter applied, Hz.
    rpm_min, rpm_max : float
        Lowest and highest speed over the record (one-revolution means), rev/min.
    pulse_times_s, pulse_revs : ndarray, shape (p,)
        The tachometer pulses (s) and the shaft angle at each (revolutions), through
        which :meth:`time_at` interpolates.
    warnings : list of str
    """

    samples: np.ndarray
    samples_per_rev: int
    start_rev: float
    pass_hz: float
    stop_hz: float
    rpm_min: float
    rpm_max: float
    pulse_times_s: np.ndarray
    pulse_revs: np.ndarray
    warnings: list[str] = field(default_factory=list)

    @property
    def revolutions(self) -> float:
        """Length of the angle-domain record, revolutions."""
        return self.samples.size / self.samples_per_rev

    def time_at(self, revs: np.ndarray) -> np.ndarray:
        """Time (s) at which the shaft reached ``revs`` revolutions."""
        return PchipInterpolator(self.pulse_revs, self.pulse_times_s)(np.asarray(revs, float))


@dataclass(frozen=True)
class OrderSpectrum:
    """Averaged spectrum in orders of shaft speed.

    Attributes
    ----------
    order : ndarray, shape (lines + 1,)
        0, Δo, … max_order, orders (cycles per revolution).
    amplitude : ndarray, shape (lines + 1,)
        In the signal's unit, scale ``scale`` (peak, rms or pp).
    rpm_min, rpm_max : float
        Speed range covered, rev/min.
    revolutions : float
        Revolutions analysed.
    warnings : list of str
    order_resolution : float
    samples_per_rev : int
    averages : int
    scale, window, unit : str
    """

    order: np.ndarray
    amplitude: np.ndarray
    rpm_min: float
    rpm_max: float
    revolutions: float
    warnings: list[str]
    order_resolution: float
    samples_per_rev: int
    averages: int
    scale: str
    window: str
    unit: str

    def as_dict(self) -> dict:
        return {"order": self.order.tolist(), "amplitude": self.amplitude.tolist(),
                "rpm_min": self.rpm_min, "rpm_max": self.rpm_max,
                "revolutions": self.revolutions, "order_resolution": self.order_resolution,
                "samples_per_rev": self.samples_per_rev, "averages": self.averages,
                "scale": self.scale, "window": self.window, "unit": self.unit,
                "warnings": list(self.warnings)}


def _pow2_at_least(v: float) -> int:
    return int(2 ** max(0, int(np.ceil(np.log2(max(v, 1.0)) - 1e-12))))


def _pulses(tach: TachResult, n: int, fs: float, pre: str) -> tuple[np.ndarray, np.ndarray]:
    if not isinstance(tach, TachResult):
        raise InputError(f"{pre}tach must be a TachResult from engine.tach.detect_pulses, "
                         f"got {type(tach).__name__}")
    t = np.asarray(tach.pulse_times_s, float)
    if t.size < 2 * tach.pulses_per_rev + 1:
        raise InputError(f"{pre}order tracking needs pulses over at least two revolutions; "
                         f"the tach holds {t.size} pulses at {tach.pulses_per_rev} per rev")
    if t[0] < 0.0 or t[-1] > (n - 1) / fs:
        raise InputError(f"{pre}tach pulses run from {t[0]:.3f} s to {t[-1]:.3f} s but the "
                         f"vibration record lasts {(n - 1) / fs:.3f} s; give the tach of "
                         "this record")
    return t, np.arange(t.size) / tach.pulses_per_rev


@lru_cache(maxsize=16)
def _predecimation_taps(factor: int, stop_hz: float, fs_hz: float) -> np.ndarray:
    """Kaiser FIR for decimation by ``factor``: flat (ripple 1e-5) up to ``stop_hz``
    and 100 dB down from ``fs/factor − stop_hz``, the lowest frequency that would
    fold back below ``stop_hz``."""
    fs_out = fs_hz / factor
    width = (fs_out - 2.0 * stop_hz) / (0.5 * fs_hz)
    numtaps, beta = signal.kaiserord(100.0, width)
    return signal.firwin(numtaps | 1, 0.5 * fs_out, window=("kaiser", beta), fs=fs_hz)


def _lowpass_decimate(x: np.ndarray, fs: float, pass_hz: float, stop_hz: float
                      ) -> tuple[np.ndarray, float]:
    """Zero-phase low-pass from ``pass_hz`` to ``stop_hz``, at a rate of at least
    OVERSAMPLING × stop.

    When the record's rate allows, it is first decimated by a whole factor with a
    short polyphase FIR (:func:`scipy.signal.resample_poly`, linear phase with its
    delay removed) that leaves everything below ``stop_hz`` untouched; the low-pass
    itself is then a raised-cosine taper on the DFT of the shorter record, which is
    also up-sampled (zero lines added, at most 8×) when the rate is too low.
    """
    factor = int(np.floor(fs / (OVERSAMPLING * stop_hz)))
    if factor >= 2:
        x = signal.resample_poly(x, 1, factor, window=_predecimation_taps(factor, stop_hz, fs))
        fs = fs / factor
    n = x.size
    n_fft = scipy.fft.next_fast_len(n, real=True)
    want = int(np.ceil(n_fft * OVERSAMPLING * stop_hz / fs))
    m = scipy.fft.next_fast_len(min(max(want, n_fft), 8 * n_fft), real=True)
    spec = scipy.fft.rfft(x, n_fft)
    lines = m // 2 + 1
    if lines > spec.size:
        spec = np.concatenate([spec, np.zeros(lines - spec.size, complex)])
    f = np.arange(lines) * (fs / n_fft)
    taper = np.clip((stop_hz - f) / (stop_hz - pass_hz), 0.0, 1.0)
    spec *= 0.5 - 0.5 * np.cos(np.pi * taper)  # 1 below pass_hz, raised cosine to 0 at stop
    if m % 2 == 0:
        spec[-1] = spec[-1].real  # a real signal's Nyquist line is real
    y = scipy.fft.irfft(spec, m) * (m / n_fft)
    return y[: int(np.ceil(n * m / n_fft))], fs * m / n_fft


def _lagrange4(y: np.ndarray, pos: np.ndarray) -> np.ndarray:
    """4-point Lagrange (cubic) interpolation of ``y`` at fractional indices ``pos``
    (≥ 0; the polynomial through samples i−1 … i+2 in Horner form)."""
    i = np.clip(pos.astype(np.int64), 1, y.size - 3)  # truncation is floor for pos ≥ 0
    u = pos - i
    i -= 1
    # Shifted views instead of shifted index arrays: one gather each.
    ym1, y0, y1, y2 = (np.take(y[k:], i) for k in range(4))
    c2 = ym1 + y1
    c2 *= 0.5
    c2 -= y0
    c3 = y2 - ym1
    c3 *= 1.0 / 6.0
    c3 += 0.5 * (y0 - y1)
    c1 = y1 - y0
    c1 -= c2
    c1 -= c3
    out = c3 * u
    out += c2
    out *= u
    out += c1
    out *= u
    out += y0
    return out


def resample_to_angle(
    samples: np.ndarray,
    fs_hz: float,
    tach: TachResult,
    *,
    max_order: float = 20.0,
    samples_per_rev: int | None = None,
    source: str = "",
) -> AngleSignal:
    """Resample a waveform to constant steps of shaft angle ([1]_).

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Vibration waveform, any unit.
    fs_hz : float
        Sample rate, Hz.
    tach : TachResult
        Pulses of the same record (:func:`engine.tach.detect_pulses`).
    max_order : float, keyword-only
        Highest order kept at every speed.
    samples_per_rev : int, optional, keyword-only
        Samples per revolution, a whole number ≥ 2.56 · max_order; default as in the
        module notes (a power of 2, at most :data:`MAX_SAMPLES_PER_REV`).

    Returns
    -------
    AngleSignal
        From the first pulse to the last.  ``warnings`` says when orders up to
        ``max_order`` could not all be kept at the highest speed (the sample rate or
        the samples per revolution are too low for them).
    """
    pre = f"{source}: " if source else ""
    x = as_signal(samples, "samples", source=source, min_size=16)
    fs = require_positive(fs_hz, "sample rate", source=source)
    top = require_positive(max_order, "max_order", source=source)
    t, revs = _pulses(tach, x.size, fs, pre)
    ppr = tach.pulses_per_rev
    rev_hz = 1.0 / (t[ppr:] - t[:-ppr])  # one-revolution mean speeds, rev/s
    f_lo, f_hi = float(rev_hz.min()), float(rev_hz.max())
    warnings: list[str] = []
    pass_hz = top * f_hi
    if samples_per_rev is None:
        spr = _pow2_at_least(max(SAMPLES_PER_FMAX * top, 2.0 * TRANSITION * pass_hz / f_lo))
        if spr > MAX_SAMPLES_PER_REV:
            spr = MAX_SAMPLES_PER_REV
    else:
        if (isinstance(samples_per_rev, bool)
                or not isinstance(samples_per_rev, (int, np.integer))):
            raise InputError(f"{pre}samples_per_rev must be a whole number, "
                             f"got {samples_per_rev!r}")
        spr = int(samples_per_rev)
        if spr < SAMPLES_PER_FMAX * top:
            raise InputError(f"{pre}samples_per_rev {spr} is below 2.56 × max_order "
                             f"({SAMPLES_PER_FMAX * top:g}); raise it or lower max_order")
    stop_hz = min(TRANSITION * pass_hz, 0.5 * spr * f_lo)
    if stop_hz > 0.5 * fs:
        stop_hz = 0.5 * fs
    pass_hz = min(pass_hz, stop_hz / TRANSITION)
    kept = pass_hz / f_hi
    if kept < top * (1.0 - 1e-9):
        limit = ("the sample rate" if stop_hz >= 0.5 * fs * (1 - 1e-9)
                 else f"{spr} samples per revolution at the lowest speed")
        warnings.append(
            f"{pre}orders above {kept:.3g} are attenuated at the top speed "
            f"({60 * f_hi:.0f} rpm): the anti-alias filter passes only {pass_hz:.0f} Hz "
            f"(limited by {limit}); order {top:g} is kept up to {60 * pass_hz / top:.0f} rpm")
    y, fs_y = _lowpass_decimate(x, fs, pass_hz, stop_hz)
    grid = np.arange(int(np.floor(revs[-1] * spr)) + 1) / spr
    when = PchipInterpolator(revs, t)(grid)
    z = _lagrange4(y, when * fs_y)
    return AngleSignal(samples=z, samples_per_rev=spr, start_rev=0.0, pass_hz=float(pass_hz),
                       stop_hz=float(stop_hz), rpm_min=60.0 * f_lo, rpm_max=60.0 * f_hi,
                       pulse_times_s=t, pulse_revs=revs, warnings=warnings)


def _scale(ms: np.ndarray, scale: str) -> np.ndarray:
    if scale == "rms":
        return np.sqrt(ms)
    if scale == "peak":
        return np.sqrt(2.0 * ms)
    return 2.0 * np.sqrt(2.0 * ms)


def _check_scale(scale: str, pre: str) -> str:
    if scale not in AMPLITUDE_SCALES:
        raise InputError(f"{pre}scale {scale!r} is not known for orders; expected one of "
                         f"{', '.join(AMPLITUDE_SCALES)}")
    return scale


def order_spectrum(
    samples: np.ndarray,
    fs_hz: float,
    tach: TachResult,
    *,
    max_order: float = 20.0,
    order_resolution: float = 0.05,
    window: str = "hann",
    scale: str = "peak",
    overlap: float = 0.5,
    unit: str = "g",
    source: str = "",
) -> OrderSpectrum:
    """Averaged order spectrum of a run-up, coast-down or steady run ([1]_).

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Vibration waveform in ``unit``.
    fs_hz : float
        Sample rate, Hz.
    tach : TachResult
        Pulses of the same record.
    max_order : float, keyword-only
        Highest order shown.
    order_resolution : float, keyword-only
        Line spacing in orders; frames span ``1 / order_resolution`` revolutions.
    window : str, keyword-only
        One of :data:`engine.windows.WINDOWS`.
    scale : str, keyword-only
        ``peak``, ``rms`` or ``pp`` amplitude of a stationary order.
    overlap : float, keyword-only
        Fraction of a frame shared with the next, 0 … 0.9.
    unit : str, keyword-only
        Unit of the samples (carried into the result).

    Returns
    -------
    OrderSpectrum
        Frames are averaged as power (linear averaging over the whole record).

    Raises
    ------
    InputError
        Bad options, or fewer revolutions than one frame.
    """
    pre = f"{source}: " if source else ""
    _check_scale(scale, pre)
    res = require_positive(order_resolution, "order_resolution", source=source)
    if not 0.0 <= float(overlap) <= 0.9:
        raise InputError(f"{pre}overlap must be between 0 and 0.9, got {overlap!r}")
    win = window_name(window)
    ang = resample_to_angle(samples, fs_hz, tach, max_order=max_order, source=source)
    n = int(round(ang.samples_per_rev / res))
    if n > ang.samples.size:
        raise InputError(f"{pre}an order resolution of {res:g} needs frames of "
                         f"{n / ang.samples_per_rev:.4g} revolutions; the tach covers only "
                         f"{ang.revolutions:.4g}")
    step = max(1, int(round(n * (1.0 - float(overlap)))))
    frames = frame_count(ang.samples.size, n, step)
    d_order = ang.samples_per_rev / n
    keep = int(np.floor(float(max_order) / d_order + 1e-9)) + 1
    power = averaged_power(ang.samples, frame_length=n, step=step, window=win, keep=keep,
                           n_frames=frames)
    s1 = float(get_window(win, n).sum())
    ms = power / (s1 * s1)
    ms[1:] *= 2.0
    return OrderSpectrum(order=np.arange(keep) * d_order, amplitude=_scale(ms, scale),
                         rpm_min=ang.rpm_min, rpm_max=ang.rpm_max,
                         revolutions=ang.revolutions, warnings=list(ang.warnings),
                         order_resolution=d_order, samples_per_rev=ang.samples_per_rev,
                         averages=frames, scale=scale, window=win, unit=unit)


def order_cut(
    samples: np.ndarray,
    fs_hz: float,
    tach: TachResult,
    order: float,
    *,
    revs_per_frame: int = 8,
    revs_per_step: int = 1,
    window: str = "hann",
    scale: str = "peak",
    source: str = "",
) -> tuple[np.ndarray, np.ndarray]:
    """Amplitude of one order against speed (an order cut) ([1]_).

    The angle-domain signal is cut into frames of ``revs_per_frame`` revolutions,
    one every ``revs_per_step``; in each the order's amplitude is the windowed
    projection on ``exp(−j 2π · order · θ)`` (the frame's DFT at exactly that order,
    on a line or not), and the speed is the frame's mean (revolutions over time).

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    tach : TachResult
    order : float
        The order followed (1.0 = 1×).
    revs_per_frame : int, keyword-only
        Revolutions per frame; the order resolution is ``1 / revs_per_frame``, so
        orders closer than about ``2 / revs_per_frame`` (Hann) blend.
    revs_per_step : int, keyword-only
        Revolutions between frame starts.
    window, scale : str, keyword-only

    Returns
    -------
    (rpm, amplitude)
        Shapes (frames,): mean speed of each frame (rev/min) and the order's
        amplitude in the signal's unit and ``scale``.
    """
    pre = f"{source}: " if source else ""
    _check_scale(scale, pre)
    o = require_positive(order, "order", source=source)
    for v, name in ((revs_per_frame, "revs_per_frame"), (revs_per_step, "revs_per_step")):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 1:
            raise InputError(f"{pre}{name} must be a whole number of at least 1, got {v!r}")
    ang = resample_to_angle(samples, fs_hz, tach, max_order=max(2.0 * o, o + 2.0),
                            source=source)
    spr = ang.samples_per_rev
    n, step = int(revs_per_frame) * spr, int(revs_per_step) * spr
    count = frame_count(ang.samples.size, n, step)
    if count < 1:
        raise InputError(f"{pre}frames of {revs_per_frame} revolutions do not fit in the "
                         f"{ang.revolutions:.4g} revolutions the tach covers")
    w = get_window(window_name(window), n)
    theta = np.arange(n) / spr
    kernel = w * np.exp(-2j * np.pi * o * theta)
    frames = np.lib.stride_tricks.sliding_window_view(ang.samples, n)[::step][:count]
    peak = 2.0 * np.abs(frames @ kernel) / float(w.sum())
    start = ang.start_rev + np.arange(count) * (step / spr)
    dt = ang.time_at(start + n / spr) - ang.time_at(start)
    rpm = 60.0 * (n / spr) / dt
    amp = {"peak": peak, "rms": peak / np.sqrt(2.0), "pp": 2.0 * peak}[scale]
    return rpm, amp


def speed_waterfall(
    samples: np.ndarray,
    fs_hz: float,
    tach: TachResult,
    *,
    fmax_hz: float,
    lines: int = 800,
    rpm_step: float = 50.0,
    window: str = "hann",
    scale: str = "peak",
    source: str = "",
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Short-time spectra in Hz against speed, for a waterfall or Campbell diagram.

    One spectrum of ``lines`` lines up to ``fmax_hz`` (a frame of ``2.56 · lines``
    samples at ``2.56 · fmax_hz``) is taken, centred on the moment the speed first
    reaches each of ``rpm_min, rpm_min + rpm_step, …`` (the tachometer's smoothed
    speed); levels whose frame would run off the record are left out.  Speed-locked
    components lie on rays through the origin, resonances and fixed tones on
    vertical lines.

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    tach : TachResult
    fmax_hz : float, keyword-only
        Fmax of each spectrum, Hz.
    lines : int, keyword-only
        Lines per spectrum (100 … 25600).
    rpm_step : float, keyword-only
        Speed between spectra, rev/min.
    window, scale : str, keyword-only
        Window and amplitude scale (peak, rms or pp).

    Returns
    -------
    (rpm, frequency_hz, amplitude)
        Shapes (k,), (lines + 1,) and (k, lines + 1).
    """
    pre = f"{source}: " if source else ""
    _check_scale(scale, pre)
    x = as_signal(samples, "samples", source=source)
    fs = require_positive(fs_hz, "sample rate", source=source)
    step_rpm = require_positive(rpm_step, "rpm_step", source=source)
    fmax = require_positive(fmax_hz, "fmax_hz", source=source)
    if not isinstance(tach, TachResult) or tach.rpm.size < 2:
        raise InputError(f"{pre}speed_waterfall needs a TachResult with a speed profile")
    y, fs_a = resample_to_fmax(x, fs, fmax, source=source)
    offset = (x.size / fs - y.size / fs_a) / 2.0  # resample_to_fmax drops both ends alike
    n = int(round(SAMPLES_PER_FMAX * int(lines)))
    t_p, r_p = tach.rpm_times_s, tach.rpm
    levels = np.arange(np.ceil(r_p.min() / step_rpm) * step_rpm, r_p.max() + 1e-9, step_rpm)
    centres, kept = [], []
    for level in levels:
        seg = np.flatnonzero((r_p[:-1] - level) * (r_p[1:] - level) <= 0.0)
        if seg.size == 0:
            continue
        i = int(seg[0])
        span = r_p[i + 1] - r_p[i]
        frac = 0.0 if span == 0 else (level - r_p[i]) / span
        when = t_p[i] + frac * (t_p[i + 1] - t_p[i])
        start = int(round((when - offset) * fs_a)) - n // 2
        if 0 <= start and start + n <= y.size:
            centres.append(start)
            kept.append(level)
    freq = np.arange(int(lines) + 1) * (fs_a / n)
    if not kept:
        return np.zeros(0), freq, np.zeros((0, freq.size))
    amp = short_time_spectra(y, fs_a, frame_length=n, starts=np.asarray(centres),
                             window=window, scale=scale, keep=int(lines) + 1)
    return np.asarray(kept), freq, amp


def time_synchronous_average(
    samples: np.ndarray,
    fs_hz: float,
    tach: TachResult,
    *,
    samples_per_rev: int | None = None,
    source: str = "",
) -> tuple[np.ndarray, np.ndarray]:
    """Time-synchronous average: the mean waveform of one revolution.

    The angle-domain signal is cut into whole revolutions from the first pulse
    (angle 0 is the tachometer's edge) and averaged; components locked to the shaft
    keep their shape, everything else falls with the number of revolutions ([1]_).

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    tach : TachResult
    samples_per_rev : int, optional, keyword-only
        Samples per revolution of the result; default the power of 2 nearest the
        record's own samples per revolution at its mean speed.  Orders up to
        ``samples_per_rev / 2.56`` are kept.

    Returns
    -------
    (angle_deg, waveform)
        Shapes (samples_per_rev,): 0 … 360 − 360/samples_per_rev degrees, and the
        average in the signal's unit.
    """
    pre = f"{source}: " if source else ""
    fs = require_positive(fs_hz, "sample rate", source=source)
    if samples_per_rev is None:
        if not isinstance(tach, TachResult) or tach.pulse_times_s.size < 2:
            raise InputError(f"{pre}time_synchronous_average needs a TachResult with pulses")
        t = tach.pulse_times_s
        mean_rev_s = (t[-1] - t[0]) / ((t.size - 1) / tach.pulses_per_rev)
        spr = int(2 ** np.round(np.log2(fs * mean_rev_s)))
    else:
        spr = samples_per_rev
    top = (spr if isinstance(spr, (int, np.integer)) else 0) / SAMPLES_PER_FMAX
    ang = resample_to_angle(samples, fs, tach, max_order=max(top, 1e-9),
                            samples_per_rev=spr, source=source)
    revs = ang.samples.size // ang.samples_per_rev
    if revs < 1:
        raise InputError(f"{pre}the tach covers less than one revolution")
    waveform = ang.samples[: revs * ang.samples_per_rev].reshape(revs, -1).mean(axis=0)
    return np.arange(ang.samples_per_rev) * (360.0 / ang.samples_per_rev), waveform
