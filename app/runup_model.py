"""The numbers behind the run-up view (no widgets): its settings, the choice of run, and
the computation of a run's speed profile, order spectrum, Campbell spectra and order
cuts.

:func:`analyse_run` and :func:`compute_runup` take the engine's long-work arguments
(``progress(done, total, text)``, ``cancel()``), so that the view runs them as a job and
tests can call them alone; a cancel raises :class:`app.jobs.Cancelled`, which the job
runner reports as a stop rather than an error.

References
----------
.. [1] K. R. Fyfe, E. D. S. Munck, "Analysis of computed order tracking", Mechanical
   Systems and Signal Processing 11(2):187–205, 1997 (order spectra, order cuts).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from engine.errors import InputError
from engine.findings import Finding, resonance_from_order_cut
from engine.orders import OrderSpectrum, order_cut, order_spectrum, speed_waterfall
from engine.recording import Recording
from engine.resample import SAMPLES_PER_FMAX
from engine.tach import detect_pulses, speed_profile

from .jobs import Cancelled

#: Share of an order cut's largest value below which a bump is not marked as a
#: resonance: bumps at the noise floor pass the rule's 2× test by chance (our choice).
MARK_SHARE = 0.1
#: Rough number of spectra in the Campbell diagram over the speed range (our choice).
CAMPBELL_ROWS = 80
#: Frame length of the Campbell spectra, s: 1 Hz resolution, while a run-up of
#: 150 rpm/s moves 1× by 2.5 Hz in it (our choice).
CAMPBELL_FRAME_S = 1.0


@dataclass(frozen=True)
class RunupSettings:
    """What the user chose: tach channel (``None``: the run's own), pulses per
    revolution, highest order (orders), order resolution (orders) and the orders cut."""

    tach_channel: int | None = None
    pulses_per_rev: int = 1
    max_order: float = 10.0
    order_resolution: float = 0.05
    cut_orders: tuple[float, ...] = (1.0, 2.0)


@dataclass
class OrderCut:
    """One order's amplitude against speed: the frames as computed (``rpm``,
    ``amplitude``), their means in speed bands of ``bin_rpm`` (``rpm_binned``,
    ``amplitude_binned``, what is drawn), the resonances marked and how many smaller
    bumps were left unmarked."""

    order: float
    rpm: np.ndarray
    amplitude: np.ndarray
    bin_rpm: float
    rpm_binned: np.ndarray
    amplitude_binned: np.ndarray
    resonances: list[Finding] = field(default_factory=list)
    unmarked: int = 0


@dataclass
class RunupResult:
    """Everything the view draws for one run (units in the names; amplitudes in
    ``unit``, peak)."""

    run_id: str
    point: str
    unit: str
    channel: int
    tach_channel: int
    channels: list[dict]
    profile_t_s: np.ndarray
    profile_rpm: np.ndarray
    spectrum: OrderSpectrum
    campbell_rpm: np.ndarray
    campbell_hz: np.ndarray
    campbell_amplitude: np.ndarray
    campbell_lines: int
    cuts: list[OrderCut]
    warnings: list[str]

    def resonance_hz(self) -> list[float]:
        """Distinct frequencies of the resonances marked on the cuts, Hz: findings within
        5 % of each other are one resonance, at the frequency of the clearest of them
        (the largest ratio to its neighbours' trend)."""
        found = sorted(((r.values["frequency_hz"], r.values["ratio"]) for c in self.cuts
                        for r in c.resonances))
        groups: list[list[tuple[float, float]]] = []
        for f, ratio in found:
            if groups and f <= 1.05 * groups[-1][0][0]:
                groups[-1].append((f, ratio))
            else:
                groups.append([(f, ratio)])
        return [max(g, key=lambda fr: fr[1])[0] for g in groups]


@dataclass
class NoTach:
    """A run without a tachometer channel: what is needed to estimate its speed."""

    run_id: str
    point: str
    channel: int
    channels: list[dict]
    near_rpm: float | None


def parse_orders(text: str) -> tuple[float, ...]:
    """Orders from text such as ``"1, 2, 4.5"`` (commas or spaces), each > 0.

    Raises InputError naming the field and the entry that is not a positive number.
    """
    parts = [p for p in text.replace(",", " ").split() if p]
    if not parts:
        raise InputError("order cuts: give at least one order, e.g. 1, 2")
    out = []
    for p in parts:
        try:
            v = float(p.rstrip("×xX"))
        except ValueError:
            raise InputError(f"order cuts: {p!r} is not a number; write orders like 1, 2, 4.5"
                             ) from None
        if not (math.isfinite(v) and v > 0):
            raise InputError(f"order cuts: {p!r} must be a positive order")
        out.append(v)
    return tuple(dict.fromkeys(out))


def nice_step(raw: float) -> float:
    """The smallest of 1, 2, 5 × 10ⁿ at least ``raw`` (> 0)."""
    base = 10.0 ** math.floor(math.log10(raw))
    return next(m * base for m in (1.0, 2.0, 5.0, 10.0) if m * base >= raw * (1 - 1e-12))


def vibration_channel(channels: list[dict], tach: int | None, preferred: int = -1) -> int:
    """The channel analysed: ``preferred`` when it exists and is not the tach, else the
    first channel that is not the tach."""
    indices = [c["index"] for c in channels if c["index"] != tach]
    if not indices:
        raise InputError("the run holds only its tachometer channel; there is no vibration "
                         "channel to analyse")
    return preferred if preferred in indices else indices[0]


def _by_speed(rpm: np.ndarray, amplitude: np.ndarray, width: float
              ) -> tuple[np.ndarray, np.ndarray]:
    """Means of ``rpm`` and ``amplitude`` over speed bands ``width`` rpm wide; steady
    stretches, where many frames share one speed, become one point."""
    band = np.floor(rpm / width).astype(np.int64)
    keys, inverse, counts = np.unique(band, return_inverse=True, return_counts=True)
    r = np.bincount(inverse, weights=rpm, minlength=keys.size) / counts
    a = np.bincount(inverse, weights=amplitude, minlength=keys.size) / counts
    return r, a


def _step(progress, cancel, done: int, total: int, text: str) -> None:
    if cancel():
        raise Cancelled("run-up analysis stopped")
    progress(done, total, text)


def compute_runup(rec: Recording, run_id: str, point: str, channels: list[dict],
                  settings: RunupSettings, progress, cancel, *, channel: int = -1
                  ) -> RunupResult:
    """Speed profile, order spectrum, Campbell spectra and order cuts of one run.

    Parameters
    ----------
    rec : Recording
        The run's samples (vibration channel and tachometer channel).
    run_id, point : str
    channels : list of dict
        The run's channel metadata (``RunInfo.channels``).
    settings : RunupSettings
    progress : callable(done, total, text)
    cancel : callable() -> bool
        Checked between the steps; when True, :class:`app.jobs.Cancelled` is raised.
    channel : int, keyword-only
        Preferred vibration channel (-1: the first that is not the tach).

    Returns
    -------
    RunupResult
        The Campbell spectra reach ``max_order`` at the top speed; each order cut is
        also averaged in speed bands and passed to
        :func:`engine.findings.resonance_from_order_cut`, and the bumps found at least
        :data:`MARK_SHARE` of the cut's largest value are kept as resonances.
    """
    tach_index = rec.tach_channel if settings.tach_channel is None else settings.tach_channel
    if tach_index is None:
        raise InputError(f"run {run_id}: no tachometer channel; choose one")
    src = f"run {run_id}"
    tach_samples = rec.channel(tach_index).samples
    vib = vibration_channel(channels, tach_index, channel)
    x, fs = rec.channel(vib).samples, rec.fs_hz
    unit = rec.channel(vib).unit
    total = 3 + len(settings.cut_orders)
    _step(progress, cancel, 0, total, "finding tachometer pulses")
    tach = detect_pulses(tach_samples, fs, pulses_per_rev=int(settings.pulses_per_rev),
                         source=src)
    t_s, rpm = speed_profile(tach)
    if rpm.size < 2:
        raise InputError(f"{src}: the tachometer gives no speed profile ({tach.pulse_times_s.size}"
                         f" pulses at {settings.pulses_per_rev} per revolution)")
    warnings = list(tach.warnings)
    _step(progress, cancel, 1, total, "order spectrum")
    spec = order_spectrum(x, fs, tach, max_order=settings.max_order,
                          order_resolution=settings.order_resolution, unit=unit, source=src)
    warnings += spec.warnings
    _step(progress, cancel, 2, total, "Campbell diagram")
    # Fmax a whole decimation factor below fs/2.56, at or just above the top order at
    # the top speed, so that the anti-alias resampling has a simple ratio.
    wanted = settings.max_order * float(rpm.max()) / 60.0
    fmax = fs / SAMPLES_PER_FMAX / max(1, math.floor(fs / SAMPLES_PER_FMAX / wanted))
    frame_s = min(CAMPBELL_FRAME_S, rec.duration_s / 4.0)
    lines = int(np.clip(round(fmax * frame_s), 100, 3200))
    rpm_step = nice_step(max(float(rpm.max() - rpm.min()), 1.0) / CAMPBELL_ROWS)
    wf_rpm, wf_hz, wf_amp = speed_waterfall(x, fs, tach, fmax_hz=fmax, lines=lines,
                                            rpm_step=rpm_step, source=src)
    cuts = []
    for i, k in enumerate(settings.cut_orders):
        _step(progress, cancel, 3 + i, total, f"order cut {k:g}×")
        r, a = order_cut(x, fs, tach, k, source=src)
        width = max(0.005 * float(r.max()), 1.0)
        rb, ab = _by_speed(r, a, width)
        cut = OrderCut(k, r, a, width, rb, ab)
        if rb.size >= 5:
            found = resonance_from_order_cut(rb, ab, order=k, unit=f"{unit} peak")
            least = MARK_SHARE * float(ab.max())
            cut.resonances = [f for f in found if f.values["amplitude"] >= least]
            cut.unmarked = len(found) - len(cut.resonances)
        else:
            warnings.append(f"{src}: the {k:g}× order cut covers fewer than 5 speeds; "
                            "no resonance search")
        cuts.append(cut)
    progress(total, total, "done")
    return RunupResult(run_id, point, unit, vib, tach_index, channels, t_s, rpm, spec,
                       wf_rpm, wf_hz, wf_amp, lines, cuts, warnings)


def latest_with_tach(arc, point: str | None) -> str | None:
    """The latest run of ``point`` that has a tachometer channel, else its latest run."""
    if point is None:
        return None
    rows = arc.runs(point=point)
    for row in reversed(rows):
        if arc.run_info(row.run_id).tach_channel is not None:
            return row.run_id
    return rows[-1].run_id if rows else None


def nominal_rpm(arc, point: str) -> float | None:
    """The nominal speed of the machine of ``point`` (rev/min), or ``None`` when unset."""
    site, tag, _ = point.split("/", 2)
    value = arc.plant.machine(site, tag).props.get("nominal_rpm")
    return float(value) if value is not None and math.isfinite(value) and value > 0 else None


def analyse_run(arc, point: str | None, run_id: str | None, settings: RunupSettings,
                progress, cancel, *, cached: tuple | None = None) -> tuple:
    """Read a run and analyse it: the job the run-up view runs.

    Parameters
    ----------
    arc : engine.archive.Archive
        Open for reading.
    point, run_id : str or None
        The run ``run_id``, or else the latest run of ``point`` with a tachometer
        (:func:`latest_with_tach`).
    settings : RunupSettings
    progress, cancel : callables
        As for :func:`compute_runup`.
    cached : (run_id, Recording, RunInfo), optional, keyword-only
        A run already read; used when it is the run asked for.

    Returns
    -------
    (Recording, RunInfo, RunupResult or NoTach)
        :class:`NoTach` when the run has no tachometer channel and none was chosen.
    """
    progress(0, 0, "reading the run")
    rid = run_id or latest_with_tach(arc, point)
    if rid is None:
        raise InputError(f"point {point} has no runs yet; import a run-up recorded with a "
                         "tachometer channel")
    if cached is not None and cached[0] == rid:
        rec, info = cached[1], cached[2]
    else:
        rec, info = arc.read_run(rid)
    preferred = int(arc.point(info.point).props.get("channel", -1))
    if cancel():
        raise Cancelled("run-up analysis stopped")
    if settings.tach_channel is None and info.tach_channel is None:
        near = info.rpm or nominal_rpm(arc, info.point)
        return rec, info, NoTach(rid, info.point,
                                 vibration_channel(info.channels, None, preferred),
                                 info.channels, near)
    return rec, info, compute_runup(rec, rid, info.point, info.channels, settings, progress,
                                    cancel, channel=preferred)
