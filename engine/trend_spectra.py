"""Spectra of a point over time: stacked by date (waterfall) and against a reference.

Reads the velocity spectra kept with each run's results (``arc.results(run_id)
.spectrum``, mm/s RMS per line) and never writes.

Resampling onto a common axis
-----------------------------
Runs analysed with other settings (Hz), or at other speeds (orders), have their lines
at other places.  Each run's spectrum is put on the common axis **by peak hold**: a bin
of the common axis (edges midway between its points) takes the largest amplitude of the
run's lines that fall in it; a bin that holds no line (a common axis finer than the
run's lines) takes the amplitude interpolated linearly between the two nearest lines;
bins beyond the run's Fmax are NaN.  So a tone reads the same amplitude (mm/s RMS) as in
the run's own spectrum, wherever it falls; the bins are *not* band levels (summing them
does not give a band RMS: read those from the value table).

The order axis steps by ``1/k`` order (``k`` a whole number), so that every whole order
(1×, 2×, …) is the centre of a bin.  By default the step is twice the coarsest line
spacing of the runs in orders (``2·Δf / shaft Hz`` of the slowest run), rounded up to
``1/k``.  Every bin then holds at least one line of every run, and *both* lines either
side of a tone at n× (each less than one spacing from it) fall in the bin of n×: so the
tone's largest line is in that bin in every run, even when the tone lies midway between
two lines and noise or a slight speed wobble within the run makes the farther line the
larger one.  (With a step of one spacing only the nearer line is sure to be there.)

Comparison in dB
----------------
``dB = 20·log10(max(current, floor) / max(reference, floor))``, with ``floor`` =
:data:`DB_FLOOR` × the largest line of either spectrum (lines at the float32 storage
noise would otherwise give arbitrary dB).  The baseline reference averages the
baseline runs *in power* (the mean of the RMS² per line, then its square root), as a
linear spectrum average does.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from .alarms.baseline import MIN_BASELINE_RUNS
from .errors import InputError
from .forecast import iso_date

__all__ = ["Comparison", "DB_FLOOR", "RISE_MIN", "Waterfall", "compare", "spectra_by_date"]

#: Floor of the dB comparison, relative to the largest line of either spectrum (−100 dB).
DB_FLOOR = 1e-5
#: Lines listed as rises must be local maxima of the current spectrum at least this
#: fraction of its largest line (−40 dB); smaller lines are noise, whatever their dB.
RISE_MIN = 0.01
_TOL = 1e-9


def _num(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _iso(t: float) -> str | None:
    return iso_date(float(t)) or None


def peak_hold_resample(x_src: np.ndarray, a_src: np.ndarray, x_dst: np.ndarray) -> np.ndarray:
    """Amplitudes on a uniform axis by peak hold (see the module notes).

    Parameters
    ----------
    x_src, a_src : ndarray, shape (n,)
        Increasing positions (Hz or orders) of a spectrum's lines and their amplitudes.
    x_dst : ndarray, shape (m,)
        Uniform, increasing positions of the common axis (m ≥ 2).

    Returns
    -------
    ndarray, shape (m,)
        NaN beyond the source's last line.
    """
    step = float(x_dst[1] - x_dst[0])
    m = x_dst.size
    idx = np.floor((x_src - (x_dst[0] - 0.5 * step)) / step + _TOL).astype(np.int64)
    ok = (idx >= 0) & (idx < m)
    out = np.full(m, -np.inf)
    np.maximum.at(out, idx[ok], a_src[ok])
    empty = ~np.isfinite(out)
    out[empty] = np.interp(x_dst[empty], x_src, a_src, left=np.nan, right=np.nan)
    out[x_dst > x_src[-1] * (1 + _TOL)] = np.nan
    return out


@dataclass
class Waterfall:
    """Spectra of one point stacked by date.

    Attributes
    ----------
    point : str
    times_s : ndarray, shape (n,)
        When each run was taken, s since 1970 UTC, ascending.
    run_ids, states : list of str, length n
    rpm : ndarray, shape (n,)
        Speed of the point's shaft, rev/min (NaN unknown).
    axis : ndarray, shape (m,)
        Frequency, Hz, or order of the shaft speed (``axis_unit``).
    axis_unit : str
        ``"Hz"`` or ``"order"``.
    matrix : ndarray, shape (n, m)
        Amplitudes, ``unit`` (velocity RMS per line; NaN above a run's Fmax).
    unit : str
    left_out : list of dict
        ``{"run_id", "reason"}`` of runs without a spectrum, or without a speed in
        orders.
    """

    point: str
    times_s: np.ndarray
    run_ids: list[str]
    states: list[str]
    rpm: np.ndarray
    axis: np.ndarray
    axis_unit: str
    matrix: np.ndarray
    unit: str = "mm/s RMS"
    left_out: list[dict] = field(default_factory=list)

    def as_dict(self) -> dict:
        return {"point": self.point, "time": [_iso(t) for t in self.times_s],
                "run_id": list(self.run_ids), "state": list(self.states),
                "rpm": [_num(r) for r in self.rpm], "axis": [float(a) for a in self.axis],
                "axis_unit": self.axis_unit, "unit": self.unit,
                "matrix": [[_num(v) for v in row] for row in self.matrix],
                "left_out": list(self.left_out)}


def _spectra(arc, point: str) -> tuple[list, list[dict], dict[str, str]]:
    """(results with a spectrum, in time order; runs left out; state by run)."""
    rows = arc.value_rows(point)
    got, left = [], []
    states = {}
    for rid, st in zip(rows.get("run_id", []), rows.get("state", [])):
        r = arc.results(str(rid))
        states[str(rid)] = str(st)
        if r is None or r.spectrum is None:
            left.append({"run_id": str(rid), "reason": "no stored spectrum"})
        else:
            got.append(r)
    return got, left, states


def _order_axis(runs: list, max_order, bins) -> np.ndarray:
    shaft_hz = np.array([r.rpm / 60.0 for r in runs])
    reach = min(float(r.spectrum.fmax_hz) / f for r, f in zip(runs, shaft_hz))
    if max_order is not None:
        if not (isinstance(max_order, (int, float)) and math.isfinite(max_order)
                and max_order > 0):
            raise InputError(f"waterfall: max_order must be a positive number, got "
                             f"{max_order!r}")
        reach = float(max_order)
    if bins is None:
        coarsest = max(float(r.spectrum.resolution_hz) / f for r, f in zip(runs, shaft_hz))
        per_order = max(1, math.floor(1.0 / (2.0 * coarsest) + _TOL))
    else:
        if isinstance(bins, bool) or not isinstance(bins, (int, np.integer)) or bins < 2:
            raise InputError(f"waterfall: bins must be a whole number ≥ 2, got {bins!r}")
        per_order = max(1, round(int(bins) / reach))
    count = max(2, math.floor(reach * per_order + _TOL) + 1)
    return np.arange(count) / per_order


def spectra_by_date(arc, point: str, *, orders: bool = False, max_order: float | None = None,
                    bins: int | None = None) -> Waterfall:
    """The point's stored spectra stacked by date (a waterfall).

    Parameters
    ----------
    arc : Archive
    point : str
        ``"Site/Machine/Point"``.
    orders : bool, keyword-only
        Put every spectrum on a common axis of orders of its run's shaft speed (runs
        without a speed are left out and listed); default Hz.
    max_order : float, optional, keyword-only
        Highest order of the axis (orders only); default the highest every run reaches
        (the smallest Fmax / shaft Hz).
    bins : int, optional, keyword-only
        About how many bins the order axis has; the step is rounded to 1/k order
        (module notes).  Default: twice the coarsest run's line spacing in orders.

    Returns
    -------
    Waterfall
        Amplitudes in mm/s RMS, resampled by peak hold where needed (module notes).

    Raises
    ------
    InputError
        An unknown point; ``max_order``/``bins`` without ``orders`` or not positive.
    """
    arc.point(point)
    if not orders and (max_order is not None or bins is not None):
        raise InputError("waterfall: max_order and bins apply to the order axis; give "
                         "orders=True")
    runs, left, states = _spectra(arc, point)
    if orders:
        keep = []
        for r in runs:
            if math.isfinite(r.rpm) and r.rpm > 0:
                keep.append(r)
            else:
                left.append({"run_id": r.run_id, "reason": "no shaft speed (rpm)"})
        runs = keep
    unit = runs[-1].spectrum.unit if runs else "mm/s"
    if not runs:
        axis = np.zeros(0)
        matrix = np.zeros((0, 0))
    elif orders:
        axis = _order_axis(runs, max_order, bins)
        matrix = np.vstack([peak_hold_resample(r.spectrum.frequency_hz / (r.rpm / 60.0),
                                               np.sqrt(r.spectrum.mean_square), axis)
                            for r in runs])
    else:
        axis = runs[-1].spectrum.frequency_hz
        rows = []
        for r in runs:
            s = r.spectrum
            amp = np.sqrt(s.mean_square)
            same = s.frequency_hz.size == axis.size and np.allclose(s.frequency_hz, axis)
            rows.append(amp if same else peak_hold_resample(s.frequency_hz, amp, axis))
        matrix = np.vstack(rows)
    return Waterfall(point=point, times_s=np.array([r.taken_s for r in runs], dtype=float),
                     run_ids=[r.run_id for r in runs],
                     states=[states.get(r.run_id, "") for r in runs],
                     rpm=np.array([r.rpm for r in runs], dtype=float), axis=axis,
                     axis_unit="order" if orders else "Hz", matrix=matrix,
                     unit=f"{unit} RMS", left_out=left)


@dataclass
class Comparison:
    """A run's spectrum against a reference spectrum.

    Attributes
    ----------
    run_id, point : str
    taken_s : float
        When the run was taken, s since 1970 UTC.
    reference : str
        ``"baseline"`` or the reference run's id.
    reference_runs : list of str
        The runs averaged into the reference.
    frequency_hz, current, reference_amplitude, db : ndarray, shape (m,)
        Axis (Hz), the two amplitudes (``unit``) and their ratio in dB.
    floor : float
        Amplitude floor of the dB ratio (``unit``).
    rises : list of dict
        Largest rises, most dB first: ``frequency_hz``, ``current``, ``reference``,
        ``db`` and ``source`` (the labelled peak's sources within one line; ``""``).
    unit : str
    state : str
        The run's recorded alarm state.
    """

    run_id: str
    point: str
    taken_s: float
    reference: str
    reference_runs: list[str]
    frequency_hz: np.ndarray
    current: np.ndarray
    reference_amplitude: np.ndarray
    db: np.ndarray
    floor: float
    rises: list[dict]
    unit: str = "mm/s RMS"
    state: str = ""

    def as_dict(self) -> dict:
        return {"run_id": self.run_id, "point": self.point, "time": _iso(self.taken_s),
                "state": self.state, "reference": self.reference,
                "reference_runs": list(self.reference_runs), "unit": self.unit,
                "floor": self.floor, "rises": self.rises,
                "frequency_hz": [float(f) for f in self.frequency_hz],
                "current": [float(v) for v in self.current],
                "reference_amplitude": [float(v) for v in self.reference_amplitude],
                "db": [float(v) for v in self.db]}


def _source_near(peaks: list[dict], f_hz: float, tol_hz: float) -> str:
    near = [p for p in peaks if abs(float(p.get("frequency_hz", math.nan)) - f_hz) <= tol_hz]
    if not near:
        return ""
    best = min(near, key=lambda p: abs(float(p["frequency_hz"]) - f_hz))
    return " / ".join(s.get("name", "") for s in best.get("sources", []) if s.get("name"))


def _baseline_ids(arc, point: str, baseline_runs) -> list[str]:
    rows = arc.value_rows(point)
    ids = [str(r) for r in rows.get("run_id", [])]
    if baseline_runs is None:
        baseline_runs = MIN_BASELINE_RUNS
    if isinstance(baseline_runs, (int, np.integer)) and not isinstance(baseline_runs, bool):
        if baseline_runs < 1:
            raise InputError(f"compare: baseline_runs must be ≥ 1, got {baseline_runs}")
        if len(ids) < baseline_runs:
            raise InputError(f"compare: {point} has {len(ids)} analysed run(s); the baseline "
                             f"asks for its first {baseline_runs}")
        return ids[:int(baseline_runs)]
    if isinstance(baseline_runs, str) or not isinstance(baseline_runs, Sequence) \
            or not baseline_runs:
        raise InputError("compare: baseline_runs must be a count or a list of run ids")
    return [arc.resolve_run(str(r)) for r in baseline_runs]


def _spectrum_of(arc, run_id: str, point: str | None = None):
    r = arc.results(run_id)
    if r is None or r.spectrum is None:
        raise InputError(f"{arc.path}: run {run_id} has no stored spectrum; analyse it first")
    if point is not None and r.point != point:
        raise InputError(f"compare: run {run_id} is of {r.point}, not of {point}")
    return r


def compare(arc, run_id: str, reference: str = "baseline", *,
            baseline_runs: int | Sequence[str] | None = None, top: int = 10) -> Comparison:
    """A run's velocity spectrum against a reference spectrum of the same point.

    Parameters
    ----------
    arc : Archive
    run_id : str
        Run id or a unique prefix.
    reference : str, keyword
        ``"baseline"`` (the mean in power of the baseline runs) or a run id.
    baseline_runs : int or list of str, optional, keyword-only
        The baseline: the point's first N analysed runs (default
        :data:`engine.alarms.baseline.MIN_BASELINE_RUNS`), or these run ids.
    top : int, keyword-only
        Number of rises listed.

    Returns
    -------
    Comparison
        Amplitudes in the spectrum's unit (mm/s RMS), dB as in the module notes.

    Raises
    ------
    InputError
        An unknown run; a run without a spectrum; reference runs of another point or
        analysed with other lines or Fmax (their lines would not be the same
        frequencies).
    """
    rid = arc.resolve_run(run_id)
    cur = _spectrum_of(arc, rid)
    if reference == "baseline":
        ref_ids = _baseline_ids(arc, cur.point, baseline_runs)
    else:
        ref_ids = [arc.resolve_run(str(reference))]
    refs = [_spectrum_of(arc, r, cur.point) for r in ref_ids]
    f = cur.spectrum.frequency_hz
    for r in refs:
        s = r.spectrum
        if s.frequency_hz.size != f.size or not np.allclose(s.frequency_hz, f):
            raise InputError(f"compare: run {r.run_id} was analysed with {s.lines} lines to "
                             f"{s.fmax_hz:g} Hz and run {rid} with {cur.spectrum.lines} lines "
                             f"to {cur.spectrum.fmax_hz:g} Hz; compare runs of one setting")
    now = np.sqrt(cur.spectrum.mean_square)
    ref = np.sqrt(np.mean([r.spectrum.mean_square for r in refs], axis=0))
    floor = DB_FLOOR * max(float(now.max(initial=0.0)), float(ref.max(initial=0.0)), 1e-300)
    db = 20.0 * np.log10(np.maximum(now, floor) / np.maximum(ref, floor))
    rises = []
    if now.size >= 3:
        inner = np.arange(1, now.size - 1)
        peak = (now[inner] >= now[inner - 1]) & (now[inner] >= now[inner + 1]) \
            & (now[inner] > np.minimum(now[inner - 1], now[inner + 1]))
        big = now[inner] >= RISE_MIN * float(now[1:].max())
        cand = inner[peak & big & (db[inner] > 0)]
        cand = cand[np.argsort(-db[cand], kind="stable")][:max(int(top), 0)]
        tol = float(cur.spectrum.resolution_hz)
        rises = [{"frequency_hz": float(f[i]), "current": float(now[i]),
                  "reference": float(ref[i]), "db": float(db[i]),
                  "source": _source_near(cur.labelled_peaks, float(f[i]), tol)} for i in cand]
    return Comparison(run_id=rid, point=cur.point, taken_s=cur.taken_s,
                      reference="baseline" if reference == "baseline" else ref_ids[0],
                      reference_runs=ref_ids, frequency_hz=f.copy(), current=now,
                      reference_amplitude=ref, db=db, floor=floor, rises=rises,
                      unit=f"{cur.spectrum.unit} RMS", state=cur.state)
