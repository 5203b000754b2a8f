"""The value of each alarm band for one run.

What each measure reads (see :mod:`engine.alarms.plan` for the units that fit):

* ``band_rms`` — RMS of the spectrum lines inside the band: the sum of their mean
  squares divided by the window's ENBW in lines (:meth:`engine.spectrum.Spectrum.
  band_rms`, [2] eq. 26).  A tone whose main lobe lies inside the band reads its RMS
  wherever it falls between lines; a tone within a main lobe of an edge is partly
  counted.  ``peak`` and ``pp`` are √2 and 2√2 times that (sinusoid-equivalent).
* ``band_peak`` — amplitude of the largest line in the band, in the requested scale.
  It is the line's value, not an interpolated peak: with a Hann window a tone midway
  between lines reads up to 15 % (1.42 dB) low ([1], scalloping loss); a flat-top
  spectrum reads every tone within 0.05 %.
* ``overall`` — without edges, the run's ISO broadband velocity RMS
  (``overall_velocity_mm_s``, from :func:`engine.levels.overall_levels`); with edges,
  the velocity spectrum's band RMS over them.
* ``envelope_rms`` / ``envelope_peak`` — as band RMS / band peak, on the envelope
  spectrum (in g); without edges over all its lines above DC.
* ``defect`` — amplitude of the largest envelope line within ±2 % of the defect
  frequency (and at least ± one line spacing, so that the nearest lines are always
  looked at): real bearings slip 1–2 % ([3]), which shifts the line by that much.
* ``crest_factor``, ``kurtosis`` — the run's values, as given.

Spectra are converted to the band's unit by :meth:`engine.spectrum.Spectrum.converted`
(per-line integration or differentiation, lines below 2 Hz dropped when integrating).
Acceleration bands read the acceleration spectrum when there is one, otherwise the
velocity spectrum differentiated; velocity and displacement bands the reverse.

A value is NaN when it cannot be measured: no spectrum of a usable kind, an order band
at an unknown speed, a band reaching above the spectrum's Fmax (a partial band would
read low without saying so), a band holding no line, or a defect frequency the point's
bearing does not give.

References
----------
.. [1] F. J. Harris, "On the use of windows for harmonic analysis with the DFT",
   Proc. IEEE 66(1):51–83, 1978.
.. [2] G. Heinzel, A. Rüdiger, R. Schilling, "Spectrum and spectral density
   estimation by the DFT ...", Max-Planck-Institut für Gravitationsphysik, 2002.
.. [3] R. B. Randall, J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   Mechanical Systems and Signal Processing 25:485–520, 2011.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..envelope import ENVELOPE_SETTINGS, envelope_spectrum
from ..errors import InputError
from ..levels import overall_levels
from ..spectrum import Spectrum, SpectrumSettings, compute_spectrum
from ..units import ACCELERATION, scale_factor, unit
from .plan import AlarmPlan, Band

#: Relative half-width of the window searched around a defect frequency (slip 1–2 %,
#: Randall & Antoni 2011).
DEFECT_TOLERANCE = 0.02
#: Factor from RMS to each amplitude scale (peak = √2·RMS, pp = 2·peak, as in
#: :mod:`engine.spectrum`).
SCALE_FROM_RMS = {"rms": 1.0, "peak": math.sqrt(2.0), "pp": 2.0 * math.sqrt(2.0)}
_EDGE_RTOL = 1e-9


@dataclass
class MeasureInput:
    """Everything the bands of a plan are measured from, for one run.

    Attributes
    ----------
    velocity : Spectrum or None
        Spectrum in any velocity unit (any scale: the mean squares are used).
    envelope : Spectrum or None
        Envelope spectrum in g (any acceleration unit is accepted).
    overall_velocity_mm_s : float
        ISO broadband velocity RMS, mm/s (NaN when unknown).
    crest_factor, kurtosis : float
        Of the acceleration waveform, dimensionless (NaN when unknown).
    rpm : float
        Speed of the point's shaft, rev/min; NaN when unknown.
    defect_hz : dict of str to float
        Defect frequencies of the point's bearing at this speed, Hz (``"bpfo"`` …).
    acceleration : Spectrum or None
        Spectrum in an acceleration unit, for bands in acceleration units.
    warnings : list of str
        What could not be computed when the input was built from a waveform.
    """

    velocity: Spectrum | None = None
    envelope: Spectrum | None = None
    overall_velocity_mm_s: float = math.nan
    crest_factor: float = math.nan
    kurtosis: float = math.nan
    rpm: float = math.nan
    defect_hz: dict[str, float] = field(default_factory=dict)
    acceleration: Spectrum | None = None
    warnings: list[str] = field(default_factory=list)


class _Spectra:
    """Spectra of one input converted to the units bands ask for, each once."""

    def __init__(self, inp: MeasureInput) -> None:
        self.inp = inp
        self._cache: dict[tuple[bool, str], Spectrum | None] = {}

    def get(self, symbol: str, *, envelope: bool = False) -> Spectrum | None:
        target = unit(symbol).symbol
        key = (envelope, target)
        if key not in self._cache:
            self._cache[key] = self._convert(target, envelope)
        return self._cache[key]

    def _convert(self, target: str, envelope: bool) -> Spectrum | None:
        inp = self.inp
        if envelope:
            src = inp.envelope
            if src is not None and unit(src.unit).quantity != ACCELERATION:
                raise InputError(f"the envelope spectrum must be in an acceleration unit "
                                 f"(g); it is in {src.unit}")
        else:
            first, second = ((inp.acceleration, inp.velocity)
                             if unit(target).quantity == ACCELERATION
                             else (inp.velocity, inp.acceleration))
            src = first if first is not None else second
        if src is None:
            return None
        if not isinstance(src, Spectrum):
            raise InputError(f"spectra must be engine.spectrum.Spectrum objects, got "
                             f"{type(src).__name__}")
        return src if unit(src.unit).symbol == target else src.converted(target)


def _lines(spec: Spectrum, lo: float, hi: float) -> np.ndarray | None:
    """Mask of the lines in [lo, hi], or None when the band is not measurable."""
    if hi > spec.fmax_hz * (1.0 + _EDGE_RTOL):
        return None
    f = spec.frequency_hz
    sel = (f >= lo * (1.0 - _EDGE_RTOL)) & (f <= hi * (1.0 + _EDGE_RTOL))
    return sel if sel.any() else None


def _band_value(spec: Spectrum | None, edges, kind: str, scale: str) -> float:
    if spec is None or edges is None:
        return math.nan
    sel = _lines(spec, *edges)
    if sel is None:
        return math.nan
    if kind == "rms":
        # Spectrum.band_rms: sum of line powers / ENBW in bins (Heinzel 2002, eq. 26).
        rms = spec.band_rms(float(spec.frequency_hz[sel][0]), float(spec.frequency_hz[sel][-1]))
    else:
        rms = float(np.sqrt(np.max(spec.mean_square[sel])))
    return rms * SCALE_FROM_RMS[scale]


def _finite(value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return math.nan
    return v if math.isfinite(v) else math.nan


def _measure(band: Band, inp: MeasureInput, spectra: _Spectra) -> float:
    m = band.measure
    if m == "crest_factor":
        return _finite(inp.crest_factor)
    if m == "kurtosis":
        return _finite(inp.kurtosis)
    if m == "overall":
        if band.low is None:
            v = _finite(inp.overall_velocity_mm_s)
            return v * scale_factor("mm/s", band.unit) * SCALE_FROM_RMS[band.scale]
        return _band_value(spectra.get(band.unit), band.edges_hz(inp.rpm), "rms", band.scale)
    if m in ("band_rms", "band_peak"):
        return _band_value(spectra.get(band.unit), band.edges_hz(inp.rpm),
                           "rms" if m == "band_rms" else "peak", band.scale)
    spec = spectra.get(band.unit, envelope=True)
    if spec is None:
        return math.nan
    if m in ("envelope_rms", "envelope_peak"):
        edges = band.edges_hz(inp.rpm) if band.low is not None else (
            0.5 * spec.resolution_hz, spec.fmax_hz)
        return _band_value(spec, edges, "rms" if m == "envelope_rms" else "peak", band.scale)
    # defect
    f0 = math.nan
    for key, value in (inp.defect_hz or {}).items():
        if str(key).lower() == band.defect:
            f0 = _finite(value)
    if not f0 > 0:
        return math.nan
    half = max(DEFECT_TOLERANCE * f0, spec.resolution_hz)
    return _band_value(spec, (f0 - half, f0 + half), "peak", band.scale)


def measure(band: Band, inp: MeasureInput) -> float:
    """The value of one band for one run.

    Parameters
    ----------
    band : Band
    inp : MeasureInput

    Returns
    -------
    float
        In ``band.unit`` and ``band.scale`` (dimensionless for crest factor and
        kurtosis); NaN when not measurable (see the module notes).

    Raises
    ------
    InputError
        A band that does not validate, or an envelope spectrum not in acceleration.
    """
    band.validate(source="measure")
    return _measure(band, inp, _Spectra(inp))


def measure_plan(plan: AlarmPlan, inp: MeasureInput) -> dict[str, float]:
    """The value of every band of a plan for one run.

    Returns
    -------
    dict of str to float
        Band name → value, in plan order (see :func:`measure`).
    """
    plan.validate(source=f"alarm plan {plan.name!r}")
    spectra = _Spectra(inp)
    return {b.name: _measure(b, inp, spectra) for b in plan.bands}


def measure_input_from_waveform(
    samples: np.ndarray,
    fs_hz: float,
    *,
    unit_in: str = "g",
    rpm: float = math.nan,
    defect_hz: dict[str, float] | None = None,
    settings: SpectrumSettings = SpectrumSettings(),
    envelope_settings: SpectrumSettings = ENVELOPE_SETTINGS,
    envelope_band_hz: tuple[float, float] | None = None,
    source: str = "",
) -> MeasureInput:
    """Build a :class:`MeasureInput` from one channel's waveform.

    Parameters
    ----------
    samples : ndarray, shape (n,)
        Waveform in ``unit_in`` (acceleration, velocity or displacement).
    fs_hz : float
        Sample rate, Hz.
    unit_in : str, keyword-only
    rpm : float
        Shaft speed, rev/min (NaN unknown; picks the ISO broadband range).
    defect_hz : dict, optional
        Defect frequencies of the point's bearing, Hz.
    settings : SpectrumSettings
        Of the spectrum (computed once in ``unit_in``, then converted to mm/s and g).
    envelope_settings : SpectrumSettings
        Of the envelope spectrum (acceleration waveforms only).
    envelope_band_hz : (low, high), optional
        Band demodulated, Hz; None chooses it by the fast kurtogram.

    Returns
    -------
    MeasureInput
        Parts that cannot be computed (an envelope of a velocity waveform, an
        overall level the sample rate cannot reach) are None/NaN and said in
        ``warnings``.

    Raises
    ------
    InputError
        When even the spectrum cannot be computed.
    """
    spec = compute_spectrum(samples, fs_hz, unit_in=unit_in, settings=settings, source=source)
    is_accel = unit(unit_in).quantity == ACCELERATION
    pre = f"{source}: " if source else ""
    warnings = list(spec.warnings)
    r = _finite(rpm)
    try:
        lv = overall_levels(samples, fs_hz, unit_in=unit_in,
                            rpm=r if r > 0 else None, source=source)
        overall, crest, kurt = lv.velocity_rms_mm_s, lv.crest_factor, lv.kurtosis
    except InputError as e:
        overall = crest = kurt = math.nan
        warnings.append(f"no overall level: {e}")
    env = None
    if is_accel:
        try:
            res = envelope_spectrum(samples, fs_hz, band_hz=envelope_band_hz,
                                    settings=envelope_settings, unit=unit_in, source=source)
            env = res.spectrum
            warnings += res.warnings
        except InputError as e:
            warnings.append(f"no envelope spectrum: {e}")
    else:
        warnings.append(f"{pre}no envelope spectrum: the waveform is not an acceleration")
    return MeasureInput(velocity=spec.converted("mm/s"), envelope=env,
                        overall_velocity_mm_s=overall, crest_factor=crest, kurtosis=kurt,
                        rpm=r, defect_hz=dict(defect_hz or {}),
                        acceleration=spec.converted("g"), warnings=warnings)
