"""Envelope (demodulated) spectrum for rolling-element bearing diagnostics.

A local bearing defect strikes once per pass of a rolling element; each strike rings
the structure's resonances.  The strikes repeat at the defect frequency (BPFO, BPFI,
BSF, FTF, with 1–2 % random slip), but their energy lies far above it, around the
resonance, where it is buried in the spectrum by other sources.  Envelope analysis
([1]_) takes the band around the resonance, demodulates it, and shows the
repetition rate of the strikes in the spectrum of the envelope:

1. **Band-pass** in the frequency domain: the record's DFT keeps only the band's
   positive-frequency lines (doubled), and its inverse DFT is at once the band-passed
   signal's analytic signal.  This is the procedure [1]_ describes: exact band
   edges, zero phase, no group delay to compensate, and one FFT pair however narrow
   the band, where a time-domain filter for a narrow band at a high rate would need
   thousands of taps.  The record is treated as periodic; the step where its end
   wraps to its start rings in the band, so ``8 / bandwidth`` seconds are dropped at
   each end of the envelope.
2. **Magnitude** of the analytic signal (the envelope, in the unit of the samples),
   its mean removed.
3. **Low-pass and decimation** to ``2.56 · Fmax`` of the envelope spectrum by
   :func:`engine.resample.resample_to_fmax` (Kaiser FIR, nothing aliases below Fmax).
4. **Spectrum** of the envelope by :func:`engine.spectrum.compute_spectrum`, in g.

The band can be chosen by hand or, by :func:`auto_band`, as the band of largest
spectral kurtosis in the fast kurtogram ([2]_, [3]_).

References
----------
.. [1] R. B. Randall, J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   Mechanical Systems and Signal Processing 25:485–520, 2011.
.. [2] J. Antoni, "The spectral kurtosis: a useful tool for characterising
   non-stationary signals", Mechanical Systems and Signal Processing 20:282–307, 2006.
.. [3] J. Antoni, "Fast computation of the kurtogram for the detection of transient
   faults", Mechanical Systems and Signal Processing 21:108–124, 2007.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import scipy.fft

from .errors import InputError
from .kurtogram import Kurtogram, fast_kurtogram, spectral_kurtosis
from .peaks import find_peaks
from .resample import SAMPLES_PER_FMAX, resample_to_fmax
from .spectrum import Spectrum, SpectrumSettings, compute_spectrum
from .units import ACCELERATION, scale_factor
from .units import unit as lookup_unit
from .validate import as_signal, require_positive

#: Default settings of an envelope spectrum: 0 … 500 Hz in 1600 lines, Hann, peak.
ENVELOPE_SETTINGS = SpectrumSettings(fmax_hz=500.0, lines=1600, window="hann", scale="peak")
#: Seconds × bandwidth dropped at each end of the envelope (the wrap-around ringing).
_EDGE_CYCLES = 8.0
#: Lines each side of a matched peak left out of its local floor (a Hann main lobe is
#: ±2 lines; one more for slip smearing).
_PEAK_GUARD_LINES = 3
#: Fewest lines each side of a target in the local floor window.
_FLOOR_MIN_LINES = 16
#: How far, in lines, a harmonic may sit from h × the common fundamental.
_CONSISTENT_LINES = 2.0


@dataclass(frozen=True)
class EnvelopeResult:
    """An envelope spectrum and how its band was chosen.

    Attributes
    ----------
    band_hz : (float, float)
        The demodulated band, Hz.
    spectrum : Spectrum
        Envelope spectrum, unit ``"g"`` (scale and lines as asked).
    kurtosis_in_band : float
        Spectral kurtosis of the band's complex envelope (E|c|⁴/(E|c|²)² − 2,
        dimensionless; 0 for Gaussian noise).
    auto : bool
        True when the band was chosen by the kurtogram.
    kurtogram : Kurtogram or None
        The kurtogram the band was chosen from (None for a band given by hand).
    fs_envelope_hz : float
        Sample rate of the decimated envelope, Hz (2.56 · Fmax).
    warnings : list of str
    """

    band_hz: tuple[float, float]
    spectrum: Spectrum
    kurtosis_in_band: float
    auto: bool
    kurtogram: Kurtogram | None
    fs_envelope_hz: float
    warnings: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class DefectMatch:
    """Evidence for one defect frequency in an envelope spectrum.

    Attributes
    ----------
    name : str
        The key given (for example ``"bpfo"``).
    frequency_hz : float
        The expected (kinematic) defect frequency, Hz.
    harmonics_found : int
        How many of the harmonics 1 … ``harmonics`` have a peak within the tolerance
        standing at least ``min_snr_db`` above the local floor (counted in total, not
        only consecutive from the first).
    amplitude : float
        Interpolated amplitude of the peak nearest the 1st harmonic, in the spectrum's
        unit and scale (0 when there is no local maximum within the tolerance).
    snr_db : float
        That peak's height above its local floor, dB (0 when there is no peak).
    matched_frequencies : tuple of float
        Interpolated frequencies of the harmonics found, Hz, in harmonic order.
    harmonics : tuple of int
        Which harmonic numbers were found.
    """

    name: str
    frequency_hz: float
    harmonics_found: int
    amplitude: float
    snr_db: float
    matched_frequencies: tuple[float, ...]
    harmonics: tuple[int, ...]

    def as_dict(self) -> dict:
        return {"name": self.name, "frequency_hz": self.frequency_hz,
                "harmonics_found": self.harmonics_found, "amplitude": self.amplitude,
                "snr_db": self.snr_db, "matched_frequencies": list(self.matched_frequencies),
                "harmonics": list(self.harmonics)}


def _check_band(band_hz, fs_hz: float, source: str) -> tuple[float, float]:
    pre = f"{source}: " if source else ""
    try:
        lo, hi = (float(v) for v in band_hz)
    except (TypeError, ValueError):
        raise InputError(f"{pre}band_hz must be a pair (low, high) in Hz, "
                         f"got {band_hz!r}") from None
    if not (np.isfinite(lo) and np.isfinite(hi) and 0.0 <= lo < hi <= 0.5 * fs_hz):
        raise InputError(f"{pre}band_hz {lo:g}–{hi:g} Hz must have 0 ≤ low < high ≤ fs/2 "
                         f"= {0.5 * fs_hz:g} Hz")
    return lo, hi


def analytic_signal(
    samples: np.ndarray,
    fs_hz: float,
    *,
    band_hz: tuple[float, float] | None = None,
    source: str = "",
) -> np.ndarray:
    """Analytic signal of a waveform, or of one band of it, by the DFT.

    The DFT's positive-frequency lines are doubled and the negative ones zeroed (DC
    and, for an even length, the Nyquist line kept once), the construction of
    :func:`scipy.signal.hilbert`; with ``band_hz`` only the lines inside the band
    (edges included) are kept, so the result is the analytic signal of the
    band-passed waveform ([1]_).

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    band_hz : (low, high), optional, keyword-only
        Band kept, Hz, ``0 ≤ low < high ≤ fs/2``; default the whole band.

    Returns
    -------
    ndarray of complex, shape (n,)
        Real part: the (band-passed) waveform; magnitude: its envelope; same unit.
    """
    x = as_signal(samples, "samples", source=source, min_size=2)
    fs = require_positive(fs_hz, "sample rate", source=source)
    n = x.size
    gain = np.zeros(n)
    gain[0] = 1.0
    gain[1:(n + 1) // 2] = 2.0
    if n % 2 == 0:
        gain[n // 2] = 1.0
    if band_hz is not None:
        lo, hi = _check_band(band_hz, fs, source)
        f = np.abs(scipy.fft.fftfreq(n, 1.0 / fs))
        gain[(f < lo) | (f > hi)] = 0.0
    return scipy.fft.ifft(scipy.fft.fft(x) * gain)


def _band_analytic(x: np.ndarray, fs: float, band: tuple[float, float], source: str
                   ) -> np.ndarray:
    """Analytic signal of the band with ``8 / bandwidth`` s dropped at each end."""
    c = analytic_signal(x, fs, band_hz=band, source=source)
    edge = int(np.ceil(_EDGE_CYCLES * fs / (band[1] - band[0])))
    if c.size <= 4 * edge:
        raise InputError(f"{source + ': ' if source else ''}the record of {c.size} samples "
                         f"is too short to demodulate a band {band[1] - band[0]:g} Hz wide "
                         f"(it needs more than {4 * edge})")
    return c[edge:-edge]


def _decimated_envelope(c: np.ndarray, fs: float, fmax: float, source: str
                        ) -> tuple[np.ndarray, float]:
    env = np.abs(c)
    return resample_to_fmax(env - env.mean(), fs, fmax, source=source)


def envelope_signal(
    samples: np.ndarray,
    fs_hz: float,
    *,
    band_hz: tuple[float, float],
    fmax_hz: float = 500.0,
    source: str = "",
) -> tuple[np.ndarray, float]:
    """Envelope of one band of a waveform, decimated to ``2.56 · fmax_hz``.

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Waveform (acceleration, any unit).
    fs_hz : float
        Sample rate, Hz.
    band_hz : (low, high), keyword-only
        Demodulated band, Hz.
    fmax_hz : float, keyword-only
        Highest envelope frequency kept, Hz; the envelope is low-passed and decimated
        to 2.56 · fmax_hz (``fs_hz`` must be a simple ratio of it, as for spectra).

    Returns
    -------
    (envelope, fs_env_hz)
        Envelope with its mean removed, in the unit of ``samples``, shape (m,), and
        its sample rate, Hz.  ``8 / bandwidth`` s are dropped at each end first.

    Raises
    ------
    InputError
        A bad band, an Fmax the sample rate cannot reach, or a record too short.
    """
    fs = require_positive(fs_hz, "sample rate", source=source)
    fmax = require_positive(fmax_hz, "envelope Fmax", source=source)
    x = as_signal(samples, "samples", source=source, min_size=2)
    c = _band_analytic(x, fs, _check_band(band_hz, fs, source), source)
    return _decimated_envelope(c, fs, fmax, source)


def _min_bandwidth(fs_hz: float, fmax_hz: float, min_bandwidth_hz: float | None) -> float:
    if min_bandwidth_hz is None:
        return min(2.0 * fmax_hz, 0.25 * fs_hz)
    return require_positive(min_bandwidth_hz, "min_bandwidth_hz")


def auto_band(
    samples: np.ndarray,
    fs_hz: float,
    *,
    fmax_hz: float = 500.0,
    min_bandwidth_hz: float | None = None,
    levels: int | None = None,
    source: str = "",
) -> tuple[tuple[float, float], Kurtogram]:
    """The band to demodulate, chosen by the fast kurtogram ([3]_).

    The band of largest spectral kurtosis among those at least ``min_bandwidth_hz``
    wide.  A band narrower than twice the envelope's Fmax cannot hold the defect
    frequency's harmonics on both sides of the resonance, so by default bands
    narrower than ``2 · fmax_hz`` (at most fs/4) are not considered (common
    practice).

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    fmax_hz : float, keyword-only
        Fmax of the envelope spectrum the band is for, Hz.
    min_bandwidth_hz : float, optional, keyword-only
        Narrowest band considered, Hz; default ``min(2 · fmax_hz, fs/4)``.
    levels : int, optional, keyword-only
        Deepest kurtogram level (see :func:`engine.kurtogram.fast_kurtogram`).

    Returns
    -------
    (band_hz, kurtogram)
        The chosen band ``(low, high)`` in Hz, and the whole kurtogram.
    """
    fs = require_positive(fs_hz, "sample rate", source=source)
    fmax = require_positive(fmax_hz, "envelope Fmax", source=source)
    kg = fast_kurtogram(samples, fs, levels=levels, source=source)
    widest = 0.5 * fs
    min_bw = min(_min_bandwidth(fs, fmax, min_bandwidth_hz), widest)
    best, band = -np.inf, (0.0, widest)
    for r in range(kg.levels.size):
        bw = kg.bandwidth_hz(r)
        if bw < min_bw * (1.0 - 1e-9):
            continue
        row = kg.kurtosis[r, : kg.band_count(r)]
        j = int(np.argmax(row))
        if row[j] > best:
            best, band = float(row[j]), (j * bw, (j + 1) * bw)
    return (float(band[0]), float(band[1])), kg


def envelope_spectrum(
    samples: np.ndarray,
    fs_hz: float,
    *,
    band_hz: tuple[float, float] | None = None,
    settings: SpectrumSettings = ENVELOPE_SETTINGS,
    unit: str = "g",
    min_bandwidth_hz: float | None = None,
    levels: int | None = None,
    source: str = "",
) -> EnvelopeResult:
    """Envelope (demodulated) spectrum of an acceleration waveform ([1]_).

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Acceleration waveform in ``unit``.
    fs_hz : float
        Sample rate, Hz.
    band_hz : (low, high), optional, keyword-only
        Band to demodulate, Hz; ``None`` chooses it by :func:`auto_band`.
    settings : SpectrumSettings, keyword-only
        Spectrum of the envelope (Fmax, lines, window, scale, averaging); ``fmax_hz``
        None means fs/2.56.
    unit : str, keyword-only
        Acceleration unit of the samples; the spectrum is in g.
    min_bandwidth_hz, levels : keyword-only
        Passed to :func:`auto_band` when the band is chosen automatically.

    Returns
    -------
    EnvelopeResult

    Raises
    ------
    InputError
        A unit that is not an acceleration, a bad band, or settings the record cannot
        meet.
    """
    fs = require_positive(fs_hz, "sample rate", source=source)
    pre = f"{source}: " if source else ""
    u = _acceleration_unit(unit, source)
    x = as_signal(samples, "samples", source=source) * scale_factor(u.symbol, "g")
    fmax = float(settings.fmax_hz) if settings.fmax_hz is not None else fs / SAMPLES_PER_FMAX
    kg = None
    if band_hz is None:
        band, kg = auto_band(x, fs, fmax_hz=fmax, min_bandwidth_hz=min_bandwidth_hz,
                             levels=levels, source=source)
    else:
        band = _check_band(band_hz, fs, source)
    warnings: list[str] = []
    if band[1] - band[0] < 2.0 * fmax:
        warnings.append(f"{pre}the band {band[0]:g}–{band[1]:g} Hz is narrower than twice "
                        f"the envelope Fmax ({2 * fmax:g} Hz); envelope lines near Fmax are "
                        "weakened")
    c = _band_analytic(x, fs, band, source)
    sk = float(spectral_kurtosis(c[None, :])[0])
    env, fs_env = _decimated_envelope(c, fs, fmax, source)
    spec = compute_spectrum(env, fs_env, unit_in="g",
                            settings=replace(settings, fmax_hz=None), source=source)
    spec = replace(spec, fmax_hz=fmax)
    return EnvelopeResult(band_hz=(float(band[0]), float(band[1])), spectrum=spec,
                          kurtosis_in_band=sk, auto=band_hz is None, kurtogram=kg,
                          fs_envelope_hz=float(fs_env), warnings=warnings + list(spec.warnings))


def _acceleration_unit(symbol: str, source: str):
    u = lookup_unit(symbol, source=source or None)
    if u.quantity != ACCELERATION:
        raise InputError(f"{source + ': ' if source else ''}envelope analysis needs an "
                         f"acceleration waveform; unit {symbol!r} is {u.quantity}")
    return u


def defect_matches(
    spectrum: Spectrum,
    defect_hz: dict[str, float],
    *,
    tolerance: float = 0.02,
    harmonics: int = 4,
    min_snr_db: float = 6.0,
) -> list[DefectMatch]:
    """Which defect frequencies (and how many of their harmonics) an envelope
    spectrum shows.

    For each defect frequency ``f`` and harmonic ``h = 1 … harmonics``:

    1. **Window**: ``h · f · (1 ± tolerance)``.  The tolerance is relative because
       slip shifts every harmonic by the same fraction (1–2 % in real bearings, [1]_).
    2. **Local floor**: the median of the lines within ``max(16 lines, 2 × the
       window's half-width)`` on each side of ``h · f``, leaving out the 3 lines on
       each side of the window's largest peak (its main lobe).
    3. **Candidates**: the local maxima inside the window (interpolated by
       :func:`engine.peaks.find_peaks`) whose line stands at least ``min_snr_db``
       above the floor.
    4. **One fundamental**: a real defect's harmonics are multiples of one slipping
       fundamental ``F``.  Each candidate proposes ``F = f_h / h``; a harmonic counts
       for ``F`` when one of its candidates lies within 2 lines of ``h · F``.  The
       ``F`` that explains the most harmonics (then the largest summed SNR) wins.

    ``harmonics_found`` is the number of harmonics (among 1 … ``harmonics``, not
    necessarily consecutive) that the winning fundamental explains.  Step 4 keeps a
    comb of unrelated lines (shaft harmonics, a gear, a coupling), one of which falls
    in each wide window by chance, from counting as a defect's harmonics.

    Parameters
    ----------
    spectrum : Spectrum
        An amplitude-scale envelope spectrum (peak, rms or pp).
    defect_hz : dict of str to float
        Name → expected frequency in Hz (for example from
        :func:`engine.bearings.defect_frequencies_hz`).
    tolerance : float, keyword-only
        Relative half-width of the search window (0.02 = ±2 %).
    harmonics : int, keyword-only
        Harmonics examined, counting the line itself.
    min_snr_db : float, keyword-only
        Height above the local floor a peak needs, dB (6 dB: common practice).

    Returns
    -------
    list of DefectMatch
        One per entry of ``defect_hz``, in its order.  ``amplitude`` and ``snr_db``
        are those of the largest peak in the 1st harmonic's window, whether or not it
        counts (0 and 0 dB when the window holds no peak).
    """
    if spectrum.scale not in ("peak", "rms", "pp"):
        raise InputError(f"defect_matches needs an amplitude spectrum (peak, rms or pp), "
                         f"got scale {spectrum.scale!r}")
    if not (isinstance(tolerance, (int, float)) and 0.0 < tolerance < 0.5):
        raise InputError(f"defect_matches: tolerance must be a fraction between 0 and 0.5, "
                         f"got {tolerance!r}")
    if isinstance(harmonics, bool) or not isinstance(harmonics, (int, np.integer)) or harmonics < 1:
        raise InputError(f"defect_matches: harmonics must be a whole number of at least 1, "
                         f"got {harmonics!r}")
    a = np.asarray(spectrum.amplitude, dtype=float)
    df = spectrum.resolution_hz
    peaks = find_peaks(spectrum, count=a.size, min_prominence_db=0.0)
    peak_f = np.array([p.frequency_hz for p in peaks])
    peak_a = np.array([p.amplitude for p in peaks])
    tiny = np.finfo(float).tiny
    out = []
    for name, f0 in defect_hz.items():
        f0 = require_positive(f0, f"defect frequency {name!r}")
        candidates: dict[int, list[tuple[float, float]]] = {}  # h → [(frequency, snr)]
        amp1, snr1 = 0.0, 0.0
        for h in range(1, int(harmonics) + 1):
            target = h * f0
            if target * (1.0 - tolerance) > spectrum.frequency_hz[-1]:
                break
            inside = np.flatnonzero(np.abs(peak_f - target) <= tolerance * target)
            if inside.size == 0:
                continue
            top = peaks[int(inside[np.argmax(peak_a[inside])])]
            half = max(_FLOOR_MIN_LINES, int(np.ceil(2.0 * tolerance * target / df)))
            centre = int(round(target / df))
            idx = np.arange(max(1, centre - half), min(a.size, centre + half + 1))
            idx = idx[np.abs(idx - top.line) > _PEAK_GUARD_LINES]
            floor = max(float(np.median(a[idx])) if idx.size else tiny, tiny)
            snr = {int(i): 20.0 * np.log10(max(a[peaks[i].line], tiny) / floor) for i in inside}
            if h == 1:
                amp1, snr1 = top.amplitude, snr[int(inside[np.argmax(peak_a[inside])])]
            good = [(peaks[i].frequency_hz, snr[i]) for i in snr if snr[i] >= min_snr_db]
            if good:
                candidates[h] = good
        chosen = _common_fundamental(candidates, _CONSISTENT_LINES * df)
        out.append(DefectMatch(name=str(name), frequency_hz=float(f0),
                               harmonics_found=len(chosen), amplitude=float(amp1),
                               snr_db=float(snr1),
                               matched_frequencies=tuple(chosen[h] for h in sorted(chosen)),
                               harmonics=tuple(sorted(chosen))))
    return out


def _common_fundamental(candidates: dict[int, list[tuple[float, float]]],
                        spread_hz: float) -> dict[int, float]:
    """The largest set of harmonics explained by one fundamental (see defect_matches)."""
    best: dict[int, float] = {}
    best_key = (0, -np.inf)
    for h0, group in candidates.items():
        for f_h0, _ in group:
            fundamental = f_h0 / h0
            chosen, total = {}, 0.0
            for h, options in candidates.items():
                near = [(f, s) for f, s in options if abs(f - h * fundamental) <= spread_hz]
                if near:
                    f, s = max(near, key=lambda fs: fs[1])
                    chosen[h], total = f, total + s
            key = (len(chosen), total)
            if key > best_key:
                best, best_key = chosen, key
    return best
