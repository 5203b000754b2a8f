"""What the run view shows, computed off the GUI thread: the run's waveform and its
statistics, the spectrum, the envelope spectrum, the labelled peaks, the source
frequencies of the machine, the alarm bands and the stored findings.

:func:`analyse_run` is a plain function of the engine's long-work form (``progress``,
``cancel``) so that ``AppContext.jobs`` can run it; it knows nothing of widgets.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from engine.bearings import FAMILIES
from engine.envelope import EnvelopeResult, envelope_spectrum
from engine.errors import InputError
from engine.kinematics import LabelledPeak, MachineModel, Shaft, Source, label_peaks, sources
from engine.levels import WaveformStats, waveform_stats
from engine.peaks import find_peaks
from engine.recording import Recording
from engine.spectrum import Spectrum, compute_spectrum
from engine.units import ACCELERATION, quantity_of, scale_factor, unit

from .jobs import Cancelled
from .run_settings import RunSettings

#: Marker kinds (keys of the palette's ``markers``) and what the toolbar calls them.
MARKER_KINDS = {"order": "Orders", "bearing": "Bearings", "gear": "Gear mesh",
                "line": "Line frequency", "blade": "Blade pass", "belt": "Belt"}
#: Orders of the point's shaft marked (0.5× and 1× … this).
ORDER_MARKS = 10
#: Peaks found and labelled in the spectrum and in the envelope spectrum.
PEAK_COUNT = 25
ENVELOPE_PEAK_COUNT = 12
#: Measures whose bands are shaded on the spectrum, and on the envelope spectrum (the
#: overall level sums the whole broadband range, so the header shows it instead).
SPECTRUM_MEASURES = ("band_rms", "band_peak")
ENVELOPE_MEASURES = ("envelope_rms", "envelope_peak")
_TO_RMS = {"rms": 1.0, "peak": 1.0 / math.sqrt(2.0), "pp": 1.0 / (2.0 * math.sqrt(2.0))}


@dataclass(frozen=True)
class PointSetup:
    """What the archive says about a point that the analysis needs.

    Attributes
    ----------
    path, site, machine : str
    props : dict
        The point's properties (``engine.archive.PointInfo.props``).
    model : MachineModel or None
        The machine's kinematic model; when the archive has none, a model of its shafts
        and speed ratios only (``model_stored`` False).
    model_stored : bool
    shaft : str
        The shaft the point sits on ("" when not known: the reference shaft is used).
    shaft_ratio : float
        That shaft's speed over the reference shaft's.
    plan : engine.alarms.plan.AlarmPlan or None
    """

    path: str
    site: str
    machine: str
    props: dict
    model: MachineModel | None
    model_stored: bool
    shaft: str
    shaft_ratio: float
    plan: object | None


def point_setup(arc, path: str) -> PointSetup:
    """Read a point's setup from an open archive."""
    info = arc.point(path)
    model = arc.machine_model(info.site, info.machine)
    stored = model is not None
    if model is None:
        ratios = arc.plant.machine(info.site, info.machine).ratios or {}
        if ratios:
            model = MachineModel(tuple(Shaft(name, float(r)) for name, r in ratios.items()))
    shaft = arc.point_shaft(path)
    ratio = 1.0
    if model is not None and shaft in model.ratios:
        ratio = model.ratio(shaft)
    else:
        shaft = ""
    plan = arc.plan(path)
    return PointSetup(path=path, site=info.site, machine=info.machine, props=dict(info.props),
                      model=model, model_stored=stored, shaft=shaft, shaft_ratio=ratio,
                      plan=plan)


@dataclass
class RunAnalysis:
    """Everything the run view draws for one run with one set of settings.

    Attributes
    ----------
    run_id, point : str
    key : tuple
        ``(run_id, settings.compute_key())``: what the cache is keyed on.
    settings : RunSettings
    taken_s : float
        Seconds since 1970 UTC.
    fs_hz : float
    waveform, time_s : ndarray
        Channel samples in ``waveform_unit`` and their times, s.
    waveform_unit : str
    stats : WaveformStats
    rpm : float or None
        Reference-shaft speed of the run, rev/min.
    shaft_hz : float or None
        Speed of the point's shaft, rev/s.
    spectrum : Spectrum
    envelope : EnvelopeResult or None
    peaks, envelope_peaks : list of LabelledPeak
    sources : list of Source
        The machine's source frequencies at the run's speed (point's shaft first).
    setup : PointSetup
    results : engine.results.RunResults or None
        Stored results (state, zone, findings, band states).
    notes : list of str
        What could not be shown and why (no envelope for a velocity sensor …) and the
        engine's warnings.
    """

    run_id: str
    point: str
    key: tuple
    settings: RunSettings
    taken_s: float
    fs_hz: float
    waveform: np.ndarray
    time_s: np.ndarray
    waveform_unit: str
    stats: WaveformStats
    rpm: float | None
    shaft_hz: float | None
    spectrum: Spectrum
    envelope: EnvelopeResult | None
    peaks: list[LabelledPeak]
    envelope_peaks: list[LabelledPeak]
    sources: list[Source]
    setup: PointSetup
    results: object | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def shaft_rpm(self) -> float | None:
        return None if self.shaft_hz is None else 60.0 * self.shaft_hz


def marker_kind(src: Source) -> str:
    """The marker kind (a key of :data:`MARKER_KINDS`) a source is toggled with."""
    direct = {"order": "order", "bearing": "bearing", "gear_mesh": "gear", "line": "line",
              "blade_pass": "blade", "belt": "belt"}
    if src.kind in direct:
        return direct[src.kind]
    if src.family in FAMILIES:
        return "bearing"
    if src.family == "gear mesh":
        return "gear"
    if src.family == "electrical":
        return "line"
    return "order"


def point_sources(setup: PointSetup, rpm: float) -> list[Source]:
    """The sources to mark for a point at a reference speed (rev/min).

    Orders 0.5× and 1× … :data:`ORDER_MARKS`× of the point's shaft, 1× and 2× of the
    machine's other shafts, the bearings on the point's shaft (all bearings when the
    shaft is unknown) with three harmonics and one sideband pair, and every gear mesh,
    blade pass, belt and electrical source.
    """
    model = setup.model
    if model is None or not rpm or not rpm > 0:
        return []
    shaft = setup.shaft or next(iter(model.ratios))
    orders = [s for s in sources(model, rpm, harmonics=ORDER_MARKS, sidebands=0)
              if s.kind == "order"]
    out = [s for s in orders if s.shaft == shaft
           or (abs(model.ratio(s.shaft) - model.ratio(shaft)) > 1e-6
               and s.family == "running speed" and s.name.endswith((" 1×", " 2×")))]
    on_shaft = {b.label for b in model.bearings if b.shaft == shaft}
    for s in sources(model, rpm, harmonics=3, sidebands=1):
        if s.kind == "order":
            continue
        if s.family in FAMILIES and on_shaft and not any(s.name.startswith(label + " ")
                                                         for label in on_shaft):
            continue
        out.append(s)
    return sorted(out, key=lambda s: s.frequency_hz)


def stored_band(results, settings: RunSettings) -> tuple[float, float] | None:
    """The envelope band the kurtogram chose when the run was analysed, when it was
    chosen for the same envelope Fmax (the kurtogram's choice depends on the record and
    on that Fmax only, see ``engine.envelope.auto_band``), else None."""
    env = (results.settings or {}).get("envelope") or {}
    fmax = env.get("fmax_hz")
    if not env.get("auto_band") or results.envelope_band_hz is None or fmax is None:
        return None
    if abs(float(fmax) - float(settings.env_fmax_hz)) > 1e-9:
        return None
    lo, hi = results.envelope_band_hz
    return float(lo), float(hi)


def candidate_sources(setup: PointSetup, rpm: float | None, *, harmonics: int) -> list[Source]:
    """Sources a peak may be labelled with: orders 0.5× and 1× … :data:`ORDER_MARKS`×
    of every shaft, and the other sources with ``harmonics`` harmonics and two sideband
    pairs (a 9th harmonic of FTF explains nothing a technician would act on)."""
    if setup.model is None or not rpm:
        return []
    orders = [s for s in sources(setup.model, rpm, harmonics=ORDER_MARKS, sidebands=0)
              if s.kind == "order"]
    rest = [s for s in sources(setup.model, rpm, harmonics=harmonics, sidebands=2)
            if s.kind != "order"]
    return orders + rest


def label_for(setup: PointSetup, peaks, candidates: list[Source], **tolerance
              ) -> list[LabelledPeak]:
    """Peaks labelled by :func:`engine.kinematics.label_peaks`, each peak's matches put
    in the order a reader wants them: nearest first and, among sources at the same
    frequency (motor 1× and pump 1× of a direct drive), the point's own shaft first."""
    out = []
    for lp in label_peaks(peaks, candidates, **tolerance):
        matches = sorted(lp.matches, key=lambda m: (round(abs(m[1]), 6),
                                                    m[0].shaft != setup.shaft))
        out.append(LabelledPeak(lp.peak, matches))
    return out


def _channel(rec: Recording, props: dict) -> int:
    wanted = int(props.get("channel", -1))
    if 0 <= wanted < len(rec.channels):
        return wanted
    for i in range(len(rec.channels)):
        if i != rec.tach_channel:
            return i
    return 0


def _check(cancel) -> None:
    if cancel is not None and cancel():
        raise Cancelled("stopped")


def analyse_run(arc, point: str, run_id: str, settings: RunSettings, *, progress=None,
                cancel=None, setup: PointSetup | None = None) -> RunAnalysis:
    """Read a run and compute what the run view shows.

    Parameters
    ----------
    arc : engine.archive.Archive
        Open for reading.
    point, run_id : str
    settings : RunSettings
    progress : callable(done, total, text), optional
    cancel : callable() -> bool, optional
        Checked between steps; raises :class:`app.jobs.Cancelled` when True.
    setup : PointSetup, optional
        The point's setup when already read.

    Raises
    ------
    ArchiveError
        The run file cannot be read (the message names it).
    InputError
        Settings the run cannot meet (the message says what to change).
    """
    def step(i: int, text: str) -> None:
        _check(cancel)
        if progress is not None:
            progress(i, 5, text)

    step(0, "reading the run")
    setup = setup or point_setup(arc, point)
    rec, info = arc.read_run(run_id)
    ch = rec.channels[_channel(rec, setup.props)]
    x = np.asarray(ch.samples, dtype=float)
    source = f"{point}, run {run_id}"
    notes: list[str] = []
    rpm = info.rpm if info.rpm is not None and info.rpm == info.rpm and info.rpm > 0 else None
    shaft_hz = None if rpm is None else rpm / 60.0 * setup.shaft_ratio
    stats = waveform_stats(x, source=source)

    step(1, "spectrum")
    spec = compute_spectrum(x, rec.fs_hz, unit_in=ch.unit, unit_out=settings.unit,
                            settings=settings.spectrum_settings(), source=source)
    notes += spec.warnings

    step(2, "envelope spectrum")
    results = arc.results(run_id)
    band, reused = settings.env_band_hz, False
    if band is None and results is not None:
        band = stored_band(results, settings)
        reused = band is not None
    env = None
    if quantity_of(ch.unit) != ACCELERATION:
        notes.append(f"no envelope spectrum: the sensor measures {quantity_of(ch.unit)}, "
                     "envelope analysis needs acceleration")
    else:
        try:
            env = envelope_spectrum(x, rec.fs_hz, band_hz=band,
                                    settings=settings.envelope_settings(), unit=ch.unit,
                                    source=source)
            if reused:      # the kurtogram's band, chosen when the run was analysed
                env = replace(env, auto=True)
            notes += env.warnings
        except InputError as exc:
            notes.append(f"no envelope spectrum: {exc}")

    step(3, "peaks and sources")
    srcs = point_sources(setup, rpm) if rpm else []
    shaft_rpm = None if shaft_hz is None else shaft_hz * 60.0
    peaks = find_peaks(spec, count=PEAK_COUNT, rpm=shaft_rpm)
    labelled = label_for(setup, peaks, candidate_sources(setup, rpm, harmonics=3),
                         tolerance_hz=spec.resolution_hz)
    env_labelled: list[LabelledPeak] = []
    if env is not None:
        env_peaks = find_peaks(env.spectrum, count=ENVELOPE_PEAK_COUNT, rpm=shaft_rpm)
        # Envelope lines: bearing defect families (five harmonics, as the findings
        # rules look for) and shaft orders; slip moves them by 1–2 % (Randall &
        # Antoni 2011), hence the 2 % tolerance.
        env_srcs = [s for s in candidate_sources(setup, rpm, harmonics=5)
                    if s.family in FAMILIES or s.kind == "order"]
        env_labelled = label_for(setup, env_peaks, env_srcs,
                                 tolerance_hz=env.spectrum.resolution_hz, tolerance_pct=2.0)

    _check(cancel)
    return RunAnalysis(
        run_id=run_id, point=point, key=(run_id, settings.compute_key()), settings=settings,
        taken_s=info.taken.timestamp(), fs_hz=rec.fs_hz, waveform=x,
        time_s=np.arange(x.size) / rec.fs_hz, waveform_unit=ch.unit, stats=stats, rpm=rpm,
        shaft_hz=shaft_hz, spectrum=spec, envelope=env, peaks=labelled,
        envelope_peaks=env_labelled, sources=srcs, setup=setup, results=results, notes=notes)


def level_in(value: float, from_unit: str, from_scale: str, to_unit: str, to_scale: str
             ) -> float | None:
    """A band level in another unit and scale (same quantity only; the peak and pp
    scales are the sinusoid-equivalent √2 and 2√2 × RMS, as in the alarm rules)."""
    try:
        if from_unit == "1" or quantity_of(from_unit) != quantity_of(to_unit):
            return None
        k = scale_factor(from_unit, to_unit)
    except InputError:
        return None
    rms = value * _TO_RMS.get(from_scale or "rms", 1.0)
    return rms / _TO_RMS.get(to_scale, 1.0) * k


def band_rows(plan, shaft_rpm: float | None, *, measures: tuple[str, ...], unit_to: str,
              scale_to: str, states: dict[str, dict] | None = None) -> list[dict]:
    """The bands of ``plan`` to shade on a plot, edges in Hz at the point's shaft speed.

    Returns dicts ``{"name", "low_hz", "high_hz", "alert", "danger", "tooltip", "state"}``
    (``state`` this run's state in the band, "" when not evaluated) with
    the levels in ``unit_to``/``scale_to`` (None when the band's unit is another
    quantity).  Order bands without a speed are left out.
    """
    if plan is None:
        return []
    out = []
    for b in plan.bands:
        if b.measure not in measures:
            continue
        edges = b.edges_hz(shaft_rpm if shaft_rpm else math.nan)
        if edges is None:
            continue
        alert = level_in(b.alert, b.unit, b.scale, unit_to, scale_to)
        danger = level_in(b.danger, b.unit, b.scale, unit_to, scale_to)
        where = (f"{b.low:g}–{b.high:g}× ({edges[0]:.1f}–{edges[1]:.1f} Hz)"
                 if b.basis == "order" and b.low is not None
                 else f"{edges[0]:.1f}–{edges[1]:.1f} Hz")
        u = unit(b.unit).label if b.unit != "1" else ""
        tip = [f"{b.name}: {b.measure.replace('_', ' ')} {where}",
               f"alert {b.alert:g} {u} {b.scale.upper()}, danger {b.danger:g} {u} "
               f"{b.scale.upper()}"]
        st = (states or {}).get(b.name)
        if st:
            tip.append(f"this run: {st['value']:.3g} {u} → {st['state'] or 'not evaluated'}")
        if alert is None:
            tip.append(f"(levels are in {u}; choose that unit to see them drawn)")
        out.append({"name": b.name, "low_hz": edges[0], "high_hz": edges[1], "alert": alert,
                    "danger": danger, "tooltip": "\n".join(tip),
                    "state": (st or {}).get("state", "") or ""})
    return out


class AnalysisCache:
    """The last few analyses, keyed by ``(run_id, settings.compute_key())``."""

    def __init__(self, size: int = 12):
        self.size = size
        self._items: dict[tuple, RunAnalysis] = {}

    def get(self, key: tuple) -> RunAnalysis | None:
        item = self._items.pop(key, None)
        if item is not None:
            self._items[key] = item          # most recently used last
        return item

    def put(self, analysis: RunAnalysis) -> None:
        self._items.pop(analysis.key, None)
        self._items[analysis.key] = analysis
        while len(self._items) > self.size:
            self._items.pop(next(iter(self._items)))

    def clear(self) -> None:
        self._items.clear()

    def __len__(self) -> int:
        return len(self._items)

