"""A simulated machine built from first principles, for the demo, training and tests.

The machine is a sum of components, each in g (acceleration):

* **Orders** — speed-locked sinusoids ``A · cos(2π · k · θ(t) + φ)``, where ``θ(t)`` is
  the shaft angle in revolutions, integrated from the instantaneous speed, so an order
  stays locked to the shaft through speed changes.
* **Fixed tones** — sinusoids at fixed frequencies (2× line frequency).
* **Bearing impacts** — one impact each time ``k · θ`` passes a whole number (``k`` the
  defect order), jittered to model slip, each exciting a decaying sinusoid at a
  structural resonance, optionally modulated by a shaft order ([1]_).
* **Gear mesh** — the tooth order of a gear and sidebands at ± n × a shaft order.
* **Noise** — white Gaussian noise, and band-limited noise for a worn bearing's
  broadband rise.
* **Resonances** — single-degree-of-freedom gains on the order components, so that a
  run-up crossing the resonance shows the rise and the phase change of 1×.

The slow speed variation ``speed_wobble`` is a sum of two slow sinusoids (0.2–0.8 Hz);
every random choice (phases, jitter, noise) follows from ``seed``.

References
----------
.. [1] R. B. Randall, J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   Mechanical Systems and Signal Processing 25:485–520, 2011 (impact trains, 1–2 %
   random slip, modulation by the load zone).
.. [2] W. T. Thomson, *Theory of Vibration with Applications* — the single-degree-of-
   freedom frequency response ``1 / (1 − r² + j r/Q)``.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from scipy.signal import butter, lfilter, sosfilt

from .errors import InputError
from .recording import Channel, Recording
from .validate import require_positive

#: Tach pulses: fraction of each pulse period that is high, and the high level, V.
TACH_DUTY, TACH_HIGH_V = 0.25, 5.0
#: Largest impact jitter, as a fraction of the impact spacing (keeps impacts in order).
_MAX_JITTER = 0.45
_TWO_PI = 2.0 * np.pi


def _number(value, name: str, low: float, high: float, who: str) -> float:
    """``value`` as a finite float in [low, high], or InputError naming the field."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        v = np.nan
    if not np.isfinite(v) or not (low <= v <= high):
        span = ("a finite number" if low < -1e300 else f"a number from {low:g} to {high:g}"
                if high < 1e300 else "a positive number" if low > 0 else f"a number ≥ {low:g}")
        raise InputError(f"{who}: {name} must be {span}, got {value!r}")
    return v


def _whole(value, name: str, low: int, who: str) -> int:
    """``value`` as a whole number ≥ ``low``, or InputError naming the field."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < low:
        raise InputError(f"{who}: {name} must be a whole number of at least {low}, "
                         f"got {value!r}")
    return int(value)


_INF = np.finfo(float).max  # upper bound "none" that still rejects inf


@dataclass(frozen=True)
class Impacts:
    """A train of bearing-defect impacts.

    Attributes
    ----------
    order : float
        Impacts per shaft revolution (for example a bearing's BPFO in orders).
    amplitude_g, resonance_hz, damping : float
        Initial amplitude (g) of the decaying sinusoid each impact starts, the natural
        frequency (Hz) and the damping ratio ζ of the resonance it excites.
    slip : float
        Standard deviation of each impact's random jitter, as a fraction of the impact
        spacing (1–2 % in real bearings, [1]_).
    modulation_order, modulation_depth : float
        Shaft order that modulates the amplitudes (1.0 for an inner-race defect turning
        through the load zone, the FTF order for a rolling-element defect; 0 = none)
        and its depth ``m`` (0 … 1): amplitudes are ``A · (1 + m cos(2π · order · θ))``.
    """

    order: float
    amplitude_g: float
    resonance_hz: float
    damping: float = 0.05
    slip: float = 0.01
    modulation_order: float = 0.0
    modulation_depth: float = 0.0

    def __post_init__(self) -> None:
        for name, low, high in (("order", 1e-9, _INF), ("amplitude_g", 0, _INF),
                                ("resonance_hz", 1e-9, _INF), ("damping", 1e-4, 0.99),
                                ("slip", 0, 0.2), ("modulation_order", 0, _INF),
                                ("modulation_depth", 0, 1)):
            _number(getattr(self, name), name, low, high, "impacts")


@dataclass(frozen=True)
class GearMesh:
    """A gear mesh on the reference shaft.

    ``teeth`` of the gear on the reference shaft give the mesh order; ``amplitude_g``
    is the mesh amplitude (g peak); ``sideband_pairs`` pairs of sidebands are spaced by
    ``sideband_order`` (1.0 = the reference shaft), the first pair at
    ``sideband_amplitude_g`` (g peak) and pair ``n`` at ``1/n`` of it (a modelling
    choice: sidebands fall off away from the mesh).
    """

    teeth: int
    amplitude_g: float
    sideband_order: float = 1.0
    sideband_amplitude_g: float = 0.0
    sideband_pairs: int = 2

    def __post_init__(self) -> None:
        _whole(self.teeth, "teeth", 1, "gear_mesh")
        _whole(self.sideband_pairs, "sideband_pairs", 0, "gear_mesh")
        for name, low in (("amplitude_g", 0.0), ("sideband_order", 1e-9),
                          ("sideband_amplitude_g", 0.0)):
            _number(getattr(self, name), name, low, _INF, "gear_mesh")


@dataclass(frozen=True)
class Resonance:
    """A structural resonance that shapes the order components.

    The gain on an order at ``f`` Hz is ``1 / (1 − r² + j r/Q)``, ``r = f /
    frequency_hz`` ([2]_): 1 well below, ``Q`` at resonance, ``1/r²`` above, the phase
    lagging from 0 to 180°.
    """

    frequency_hz: float
    q: float = 10.0

    def __post_init__(self) -> None:
        _number(self.frequency_hz, "frequency_hz", 1e-9, _INF, "resonance")
        _number(self.q, "q", 0.5, 1000.0, "resonance")

    def gain(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Complex gain at ``frequency_hz`` (Hz), dimensionless."""
        r = np.asarray(frequency_hz, dtype=float) / self.frequency_hz
        return 1.0 / (1.0 - r * r + 1j * r / self.q)


@dataclass
class MachineSignal:
    """Everything that makes up a simulated machine's vibration at one point.

    Attributes
    ----------
    rpm : float
        Speed of the reference shaft, rev/min.
    speed_wobble : float
        Peak relative slow speed variation (0.002 = ±0.2 %).
    orders : dict of float to (float, float)
        Order → (amplitude in g peak, phase in rad).
    fixed_tones_hz : dict of float to float
        Frequency in Hz → amplitude in g peak (for example 100 Hz, 2× line).
    bearing_impacts : list of Impacts
    gear_mesh : GearMesh or None
        A tuple ``(teeth, amplitude_g, sideband_order, sideband_amplitude_g)`` is
        converted.
    noise_g_rms : float
        RMS of white noise over 0 … fs/2, g.
    resonances : list of Resonance
        Applied to the order components.
    seed : int
        Seed of every random choice.
    noise_bands : dict of (float, float) to float
        ``(low_hz, high_hz)`` → RMS in g of noise in that band (a 4th-order
        Butterworth band-pass of white noise), for the broadband rise of a worn bearing.
    """

    rpm: float
    speed_wobble: float = 0.002
    orders: dict[float, tuple[float, float]] = field(default_factory=dict)
    fixed_tones_hz: dict[float, float] = field(default_factory=dict)
    bearing_impacts: list[Impacts] = field(default_factory=list)
    gear_mesh: GearMesh | None = None
    noise_g_rms: float = 0.0
    resonances: list[Resonance] = field(default_factory=list)
    seed: int = 0
    noise_bands: dict[tuple[float, float], float] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if isinstance(self.gear_mesh, tuple):
            self.gear_mesh = GearMesh(*self.gear_mesh)
        self.validate()

    def validate(self) -> None:
        """Check every field; raise InputError naming the first bad one."""
        who = "machine signal"
        _number(self.rpm, "rpm", 1e-9, _INF, who)
        _number(self.speed_wobble, "speed_wobble", 0.0, 0.2, who)
        _number(self.noise_g_rms, "noise_g_rms", 0.0, _INF, who)
        _whole(self.seed, "seed", -2 ** 63, who)
        for k, value in self.orders.items():
            _number(k, "orders key (order)", 1e-9, _INF, who)
            if not (isinstance(value, (tuple, list)) and len(value) == 2):
                raise InputError(f"{who}: orders[{k!r}] must be (amplitude_g, phase_rad), "
                                 f"got {value!r}")
            _number(value[0], f"orders[{k!r}] amplitude", 0.0, _INF, who)
            _number(value[1], f"orders[{k!r}] phase", -_INF, _INF, who)
        for f, a in self.fixed_tones_hz.items():
            _number(f, "fixed_tones_hz key (Hz)", 1e-9, _INF, who)
            _number(a, f"fixed_tones_hz[{f!r}] amplitude", 0.0, _INF, who)
        for band, a in self.noise_bands.items():
            if not (isinstance(band, tuple) and len(band) == 2 and 0 < band[0] < band[1]):
                raise InputError(f"{who}: noise_bands keys must be (low_hz, high_hz) with "
                                 f"0 < low < high, got {band!r}")
            _number(a, f"noise_bands[{band!r}] RMS", 0.0, _INF, who)
        for name, kind in (("bearing_impacts", Impacts), ("resonances", Resonance)):
            for item in getattr(self, name):
                if not isinstance(item, kind):
                    raise InputError(f"{who}: {name} must hold {kind.__name__}, got {item!r}")
        if self.gear_mesh is not None and not isinstance(self.gear_mesh, GearMesh):
            raise InputError(f"{who}: gear_mesh must be a GearMesh or None, got "
                             f"{self.gear_mesh!r}")


def _splitmix(x: np.ndarray) -> np.ndarray:
    """SplitMix64 finaliser, vectorised: a fixed, stateless hash of 64-bit keys."""
    z = x + np.uint64(0x9E3779B97F4A7C15)  # uint64 arithmetic wraps modulo 2**64
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


def _jitter(key: int, k: np.ndarray, slip: float) -> np.ndarray:
    """Gaussian jitter of impact ``k``: a pure function of ``(key, k)``, so that a
    stream read in blocks draws the same jitter as one long read."""
    if slip == 0.0 or k.size == 0:
        return np.zeros(k.shape)
    base = _splitmix(np.full(k.shape, key, dtype=np.uint64) ^ k.astype(np.int64).view(np.uint64))
    u1, u2 = (((_splitmix(base ^ np.uint64(c)) >> np.uint64(11)).astype(float) + 0.5)
              / 2.0 ** 53 for c in (0, 0xD1B54A32D192ED03))
    z = np.sqrt(-2.0 * np.log(u1)) * np.cos(_TWO_PI * u2)  # Box–Muller
    return np.clip(slip * z, -_MAX_JITTER, _MAX_JITTER)


class _Parts:
    """The seeded random choices of one MachineSignal, fixed once."""

    _WEIGHTS = np.array([0.6, 0.4])  # wobble weights: the peak of the sum is ≤ 1

    def __init__(self, signal: MachineSignal) -> None:
        seq = np.random.SeedSequence(int(signal.seed) & 0xFFFFFFFFFFFFFFFF)
        params, noise, keys, bands = seq.spawn(4)
        rng = np.random.default_rng(params)
        self.wobble_hz = np.array([0.23, 0.71]) * rng.uniform(0.8, 1.2, 2)
        self.wobble_phase = rng.uniform(0.0, _TWO_PI, 2)
        self.tone_phase = rng.uniform(0.0, _TWO_PI, len(signal.fixed_tones_hz))
        pairs = signal.gear_mesh.sideband_pairs if signal.gear_mesh else 0
        self.mesh_phase = rng.uniform(0.0, _TWO_PI, 1 + 2 * pairs)
        n_imp = len(signal.bearing_impacts) + 1  # one spare for a stream's added fault
        self.impact_offset = rng.uniform(0.0, 1.0, n_imp)
        self.mod_phase = rng.uniform(0.0, _TWO_PI, n_imp)
        self.impact_key = [int(v) for v in keys.generate_state(n_imp, np.uint64)]
        self.noise_rng = np.random.default_rng(noise)
        self.band_rngs = [np.random.default_rng(c) for c in bands.spawn(len(signal.noise_bands))]

    def wobble(self, t: np.ndarray) -> np.ndarray:
        """m(t): slow relative speed variation, peak ≤ 1."""
        arg = _TWO_PI * self.wobble_hz[:, None] * t[None, :] + self.wobble_phase[:, None]
        return self._WEIGHTS @ np.sin(arg)

    def wobble_integral(self, t: np.ndarray) -> np.ndarray:
        """∫ m dt, s (up to a constant)."""
        w = _TWO_PI * self.wobble_hz
        return -(self._WEIGHTS / w) @ np.cos(w[:, None] * t[None, :] + self.wobble_phase[:, None])


def impact_filter(resonance_hz: float, damping: float, fs_hz: float):
    """IIR filter ``(b, a)`` whose impulse response is ``e^(−ζωn t) · sin(ωd t)``
    sampled at ``fs_hz`` (ωn = 2π · resonance_hz, ωd = ωn √(1 − ζ²)), peak ≈ 1."""
    wn = _TWO_PI * resonance_hz / fs_hz
    r = np.exp(-damping * wn)
    wd = wn * np.sqrt(1.0 - damping * damping)
    return np.array([0.0, r * np.sin(wd)]), np.array([1.0, -2.0 * r * np.cos(wd), r * r])


def band_noise_filter(band_hz: tuple[float, float], fs_hz: float) -> tuple[np.ndarray, float]:
    """Second-order sections of the band-noise filter and the RMS that unit white
    noise has after it (the square root of the sum of its squared impulse response)."""
    sos = butter(2, band_hz, btype="bandpass", fs=fs_hz, output="sos")
    impulse = np.eye(1, int(fs_hz * 20.0 / band_hz[0]) + 64)[0]
    return sos, float(np.sqrt(np.sum(sosfilt(sos, impulse) ** 2)))


class _Renderer:
    """Renders blocks of samples of a MachineSignal; keeps the state between blocks."""

    def __init__(self, signal: MachineSignal, fs_hz: float, extra: Impacts | None = None):
        signal.validate()
        self.signal, self.fs_hz, self.parts = signal, fs_hz, _Parts(signal)
        self.impacts = list(signal.bearing_impacts) + ([extra] if extra else [])
        self.levels = [1.0] * len(self.impacts)
        nyq = 0.5 * fs_hz
        tops = ([(i.resonance_hz, "impact resonance_hz") for i in self.impacts]
                + [(f, "fixed tone") for f in signal.fixed_tones_hz]
                + [(b[1], "noise band") for b in signal.noise_bands])
        for f, what in tops:
            if f >= 0.9 * nyq:
                raise InputError(f"machine signal: {what} {f:g} Hz must be below 0.9 × fs/2 "
                                 f"= {0.9 * nyq:g} Hz at fs {fs_hz:g} Hz")
        self.filters = [impact_filter(i.resonance_hz, i.damping, fs_hz) for i in self.impacts]
        self.states = [np.zeros(2) for _ in self.impacts]
        self.bands = []
        for (band, rms), rng in zip(signal.noise_bands.items(), self.parts.band_rngs):
            sos, unit_rms = band_noise_filter(band, fs_hz)
            # Start the filter in its steady state with a pre-roll of its own noise.
            _, zi = sosfilt(sos, rng.standard_normal(int(fs_hz * 5.0 / band[0]) + 16),
                            zi=np.zeros((sos.shape[0], 2)))
            self.bands.append([sos, rms / unit_rms, rng, zi])

    def check_nyquist(self, f_max_shaft_hz: float) -> None:
        """Raise when a speed-locked component would pass fs/2 at the highest speed."""
        s = self.signal
        top = max(s.orders, default=0.0)
        if s.gear_mesh is not None:
            top = max(top, s.gear_mesh.teeth
                      + s.gear_mesh.sideband_pairs * s.gear_mesh.sideband_order)
        if top * f_max_shaft_hz >= 0.5 * self.fs_hz:
            raise InputError(f"machine signal: order {top:g} reaches {top * f_max_shaft_hz:g}"
                             f" Hz, above fs/2 = {0.5 * self.fs_hz:g} Hz; raise fs_hz")

    def render(self, i0: int, theta_ext: np.ndarray, f_ext: np.ndarray) -> np.ndarray:
        """Samples ``i0 … i0+n−1`` from θ (rev) and shaft frequency (Hz) given at
        ``i0−1 … i0+n`` (``n + 2`` values each)."""
        s, p = self.signal, self.parts
        n = theta_ext.size - 2
        theta, f_shaft = theta_ext[1:-1], f_ext[1:-1]
        x = np.zeros(n)
        for k, (amp, phase) in s.orders.items():
            arg = _TWO_PI * k * theta + phase
            if s.resonances:
                h = np.prod([res.gain(k * f_shaft) for res in s.resonances], axis=0)
                x += amp * np.abs(h) * np.cos(arg + np.angle(h))
            else:
                x += amp * np.cos(arg)
        t = (i0 + np.arange(n)) / self.fs_hz
        for (f, amp), ph in zip(s.fixed_tones_hz.items(), p.tone_phase):
            x += amp * np.cos(_TWO_PI * f * t + ph)
        mesh = s.gear_mesh
        if mesh is not None:
            x += mesh.amplitude_g * np.cos(_TWO_PI * mesh.teeth * theta + p.mesh_phase[0])
            for j in range(1, mesh.sideband_pairs + 1):
                for side, ph in ((-1, p.mesh_phase[2 * j - 1]), (1, p.mesh_phase[2 * j])):
                    order = mesh.teeth + side * j * mesh.sideband_order
                    x += mesh.sideband_amplitude_g / j * np.cos(_TWO_PI * order * theta + ph)
        for j, imp in enumerate(self.impacts):
            x += self._impacts(j, imp, i0, theta_ext)
        if s.noise_g_rms > 0.0:
            x += s.noise_g_rms * p.noise_rng.standard_normal(n)
        for band in self.bands:  # [sos, scale, rng, filter state]
            y, band[3] = sosfilt(band[0], band[2].standard_normal(n), zi=band[3])
            x += band[1] * y
        return x

    def _impacts(self, j: int, imp: Impacts, i0: int, theta_ext: np.ndarray) -> np.ndarray:
        n, p = theta_ext.size - 2, self.parts
        amp, offset = imp.amplitude_g * self.levels[j], p.impact_offset[j]
        k = np.arange(int(np.floor(theta_ext[0] * imp.order - offset)) - 1,
                      int(np.ceil(theta_ext[-1] * imp.order - offset)) + 2)
        angle = (k + offset + _jitter(p.impact_key[j], k, imp.slip)) / imp.order  # rev
        angle = angle[(angle >= theta_ext[0]) & (angle < theta_ext[-1])]
        train = np.zeros(n)
        if amp > 0.0 and angle.size:
            pos = np.interp(angle, theta_ext, np.arange(i0 - 1, i0 + n + 1, dtype=float))
            a = np.full(angle.size, amp)
            if imp.modulation_depth > 0.0 and imp.modulation_order > 0.0:
                a *= 1.0 + imp.modulation_depth * np.cos(
                    _TWO_PI * imp.modulation_order * angle + p.mod_phase[j])
            lo = np.floor(pos).astype(np.int64)
            frac = pos - lo
            # Each impact is shared linearly between the two samples around it; the
            # part that falls outside this block belongs to the neighbouring block.
            for idx, w in ((lo, 1.0 - frac), (lo + 1, frac)):
                rel = idx - i0
                ok = (rel >= 0) & (rel < n)
                np.add.at(train, rel[ok], (a * w)[ok])
        b, a_f = self.filters[j]
        y, self.states[j] = lfilter(b, a_f, train, zi=self.states[j])
        return y


class _SpeedLaw:
    """Shaft angle of a speed ramping linearly from ``f0`` to ``f1`` (Hz) at ``rate``
    Hz/s from sample ``i_s`` (angle ``theta_s``, rev), plus the slow wobble (scaled by
    ``f1``).  Analytic, so the angle at a sample does not depend on how it is read."""

    def __init__(self, parts: _Parts, fs_hz: float, wobble: float, i_s: int,
                 theta_s: float, f0: float, f1: float, rate: float) -> None:
        self.parts, self.fs_hz, self.wobble = parts, fs_hz, wobble
        self.i_s, self.theta_s, self.f0, self.f1 = i_s, theta_s, f0, f1
        self.ramp_s = abs(f1 - f0) / rate if rate > 0 and f1 != f0 else 0.0
        self.accel = (f1 - f0) / self.ramp_s if self.ramp_s > 0 else 0.0
        self.m_s = parts.wobble_integral(np.array([i_s / fs_hz]))[0] if wobble else 0.0

    def base_hz(self, idx: np.ndarray) -> np.ndarray:
        return self.f0 + self.accel * np.clip((idx - self.i_s) / self.fs_hz, 0.0, self.ramp_s)

    def angle(self, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """θ (rev) and instantaneous shaft frequency (Hz) at sample indices ``idx``."""
        tau = (idx - self.i_s) / self.fs_hz
        t1 = np.clip(tau, 0.0, self.ramp_s)
        theta = (self.theta_s + self.f0 * t1 + 0.5 * self.accel * t1 * t1
                 + self.f1 * np.maximum(tau - self.ramp_s, 0.0) + self.f0 * np.minimum(tau, 0.0))
        freq = self.f0 + self.accel * t1
        if self.wobble:
            t = idx / self.fs_hz
            theta = theta + self.f1 * self.wobble * (self.parts.wobble_integral(t) - self.m_s)
            freq = freq + self.f1 * self.wobble * self.parts.wobble(t)
        return theta, freq


def _profile_rpm(rpm_profile, t: np.ndarray) -> np.ndarray:
    if callable(rpm_profile):
        rpm = np.broadcast_to(np.asarray(rpm_profile(t), dtype=float), t.shape)
    else:
        try:
            tp, rp = (np.asarray(v, dtype=float) for v in rpm_profile)
            ok = tp.ndim == 1 and tp.shape == rp.shape and tp.size > 1 and all(np.diff(tp) > 0)
        except (TypeError, ValueError):
            ok = False
        if not ok:
            raise InputError("rpm_profile must be a callable t → rpm or a pair (t_array in "
                             "s, strictly increasing; rpm_array of the same length)")
        rpm = np.interp(t, tp, rp)
    if not np.all(np.isfinite(rpm)) or np.any(rpm <= 0):
        raise InputError("rpm_profile: every rpm must be a positive finite number "
                         f"(lowest {np.nanmin(rpm):g})")
    return rpm


def synthesize(
    signal: MachineSignal,
    *,
    fs_hz: float = 25600.0,
    duration_s: float = 4.0,
    rpm_profile: Callable[[np.ndarray], np.ndarray] | tuple | None = None,
    tach_ppr: int | None = None,
) -> Recording:
    """A recording of the simulated machine.

    Parameters
    ----------
    signal : MachineSignal
    fs_hz : float, keyword-only
        Sample rate, Hz.
    duration_s : float, keyword-only
        Length, s; the record holds ``round(duration_s · fs_hz)`` samples.
    rpm_profile : callable or (t_array, rpm_array), keyword-only
        Reference-shaft speed in rev/min against time in s (run-ups, coast-downs);
        ``None`` runs at ``signal.rpm``.  The wobble is applied on top.
    tach_ppr : int, keyword-only
        When given, a second channel ``"tach"`` in V holds 0/5 V pulses, one per
        ``1/tach_ppr`` revolution, rising when ``θ · tach_ppr`` passes a whole number
        (θ = 0 at the first sample, so the record starts on a pulse).

    Returns
    -------
    Recording
        Channel 0 ``"vibration"`` in g; ``rpm`` is ``signal.rpm`` at constant speed and
        ``None`` along a profile; ``tach_channel`` is 1 when there is a tach channel.

    Raises
    ------
    InputError
        On a bad rate, duration, profile or ppr, or a component above fs/2.

    Notes
    -----
    The shaft angle is ``θ(t) = ∫ f(t) dt`` in revolutions, analytic at constant speed
    and by the trapezoidal rule along a profile; every order is ``cos(2π k θ + φ)``.
    """
    fs = require_positive(fs_hz, "fs_hz", source="synthesize")
    n = int(round(require_positive(duration_s, "duration_s", source="synthesize") * fs))
    if n < 1:
        raise InputError(f"synthesize: duration_s {duration_s!r} gives no samples at {fs:g} Hz")
    ppr = None if tach_ppr is None else _whole(tach_ppr, "tach_ppr", 1, "synthesize")
    renderer = _Renderer(signal, fs)
    idx = np.arange(-1, n + 1)
    if rpm_profile is None:
        f_nom = signal.rpm / 60.0
        law = _SpeedLaw(renderer.parts, fs, signal.speed_wobble, 0, 0.0, f_nom, f_nom, 0.0)
        theta, freq = law.angle(idx)
    else:
        freq = _profile_rpm(rpm_profile, np.maximum(idx / fs, 0.0)) / 60.0
        if signal.speed_wobble:
            freq = freq * (1.0 + signal.speed_wobble * renderer.parts.wobble(idx / fs))
        theta = np.concatenate(([0.0], np.cumsum(0.5 * (freq[1:] + freq[:-1]) / fs)))
        theta -= theta[1]  # θ = 0 at sample 0
    renderer.check_nyquist(float(freq.max()))
    channels = [Channel(renderer.render(0, theta, freq), "g", name="vibration")]
    if ppr is not None:
        phase = np.mod(theta[1:-1] * ppr, 1.0)
        channels.append(Channel(np.where(phase < TACH_DUTY, TACH_HIGH_V, 0.0), "V",
                                name="tach"))
    return Recording(fs_hz=fs, channels=channels, source="simulated machine",
                     rpm=float(signal.rpm) if rpm_profile is None else None,
                     tach_channel=None if ppr is None else 1)


class SimulatedStream:
    """An endless simulated machine for live views, read block by block.

    Successive :meth:`read` calls continue seamlessly (shaft angle, impact train,
    resonance ringing, noise), so at constant speed the blocks joined together equal
    one long read, and equal :func:`synthesize` of the same signal.  :meth:`set_rpm`
    and :meth:`set_fault` may be called from another thread; they take effect at the
    start of the next block.

    Parameters
    ----------
    signal : MachineSignal
    fs_hz : float
        Sample rate, Hz.
    fault : Impacts, keyword-only
        The bearing defect :meth:`set_fault` scales, added at level 1.  By default the
        signal's first impact train (level 1), or when it has none an outer-race defect
        (order 3.58, 2 g at level 1, resonance at fs/8) added at level 0.
    ramp_rpm_per_s : float, keyword-only
        How fast the speed follows :meth:`set_rpm`, rev/min per second.
    """

    def __init__(self, signal: MachineSignal, fs_hz: float = 25600.0, *,
                 fault: Impacts | None = None, ramp_rpm_per_s: float = 600.0) -> None:
        self.fs_hz = require_positive(fs_hz, "fs_hz", source="simulated stream")
        self._ramp_hz_s = require_positive(ramp_rpm_per_s, "ramp_rpm_per_s",
                                           source="simulated stream") / 60.0
        extra = fault
        if fault is None and not signal.bearing_impacts:
            extra = Impacts(order=3.58, amplitude_g=2.0, resonance_hz=self.fs_hz / 8.0)
        self._renderer = _Renderer(signal, self.fs_hz, extra)
        self._fault_index = len(self._renderer.impacts) - 1 if extra else 0
        if fault is None and extra is not None:
            self._renderer.levels[self._fault_index] = 0.0
        self._lock = threading.Lock()
        self._pos = 0
        f = signal.rpm / 60.0
        self._law = _SpeedLaw(self._renderer.parts, self.fs_hz, signal.speed_wobble,
                              0, 0.0, f, f, 0.0)
        self._target_hz = f
        self._renderer.check_nyquist(f * (1.0 + signal.speed_wobble))

    @property
    def rpm(self) -> float:
        """Current reference-shaft speed (without the wobble), rev/min."""
        return float(self._law.base_hz(np.array([self._pos]))[0] * 60.0)

    @property
    def fault_level(self) -> float:
        """Current level of the scaled defect, 0 … 1."""
        return self._renderer.levels[self._fault_index]

    def set_rpm(self, rpm: float) -> None:
        """Ask for a new speed, rev/min; the speed ramps there from the next block."""
        f = require_positive(rpm, "rpm", source="simulated stream") / 60.0
        self._renderer.check_nyquist(f * (1.0 + self._renderer.signal.speed_wobble))
        with self._lock:
            self._target_hz = f

    def set_fault(self, level: float) -> None:
        """Scale the bearing defect: 0 = none … 1 = strong."""
        v = _number(level, "fault level", 0.0, 1.0, "simulated stream")
        with self._lock:
            self._renderer.levels[self._fault_index] = v

    def read(self, n_samples: int) -> np.ndarray:
        """The next ``n_samples`` samples of vibration, g (float64, shape (n,))."""
        n = _whole(n_samples, "n_samples", 0, "simulated stream")
        with self._lock:
            if n == 0:
                return np.zeros(0)
            law = self._law
            if self._target_hz != law.f1:
                now = np.array([self._pos])
                law = _SpeedLaw(self._renderer.parts, self.fs_hz, law.wobble, self._pos,
                                float(law.angle(now)[0][0]), float(law.base_hz(now)[0]),
                                self._target_hz, self._ramp_hz_s)
                self._law = law
            theta, freq = law.angle(np.arange(self._pos - 1, self._pos + n + 1))
            x = self._renderer.render(self._pos, theta, freq)
            self._pos += n
            return x
