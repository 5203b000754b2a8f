"""Runs of an archive through analysis and alarm evaluation.

The archive stores; :mod:`engine.analysis` computes one run; :mod:`engine.alarms`
decides states.  This module joins them for stored runs:

* :func:`point_setup` gathers what the analysis of a point needs (settings, machine
  model, shaft, ISO zone limits, the plan in force);
* :func:`analyse_runs` analyses runs and keeps their results (serially; the batch
  engine, :mod:`engine.batch`, does the same in a process pool or on a Dask cluster);
* :func:`evaluate_points` evaluates every analysed run of the points against the plan
  in force, records the states, zones and the event log;
* :func:`process_new_runs` is what an import calls: analyse the new runs, evaluate.

The plan in force is the point's own alarm plan, or, when it has none and its machine
has an ISO 20816-3 group and foundation, the generic default plan of that group
(:func:`engine.alarms.iso.default_plan`); a point with neither gets no state.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field, replace

import numpy as np

from .analysis import PointSetup, analyse_recording
from .archive.derived import read_results_file
from .errors import EngineError, InputError
from .results import RunResults, band_value_name

Progress = Callable[[int, int, str], None] | None
Cancel = Callable[[], bool] | None


class Stopped(EngineError):
    """The user stopped the work; what was done so far is kept."""


def zone_limits(arc, point: str) -> tuple[float, float, float] | None:
    """ISO 20816-3 zone boundaries (mm/s) of the point's machine, None when not set."""
    from .alarms.iso import zone_boundaries

    info = arc.point(point)
    m = arc.plant.machine(info.site, info.machine).props
    if m.get("iso_group") in (1, 2) and m.get("foundation") in ("rigid", "flexible"):
        return zone_boundaries(int(m["iso_group"]), m["foundation"])
    return None


def plan_in_force(arc, point: str):
    """The point's plan, else its machine's ISO default plan, else None."""
    from .alarms.iso import default_plan

    plan = arc.plan(point)
    if plan is not None:
        return plan
    info = arc.point(point)
    m = arc.plant.machine(info.site, info.machine).props
    if m.get("iso_group") in (1, 2) and m.get("foundation") in ("rigid", "flexible"):
        return default_plan(int(m["iso_group"]), m["foundation"])
    return None


def point_setup(arc, point: str, *, settings: dict | None = None) -> PointSetup:
    """Everything :func:`engine.analysis.analyse_recording` needs for ``point``."""
    info = arc.point(point)
    model = arc.machine_model(info.site, info.machine)
    shaft = arc.point_shaft(point)
    ratio = 1.0
    if model is not None and shaft:
        ratio = model.ratio(shaft)
    elif shaft:
        ratio = arc.plant.machine(info.site, info.machine).ratios.get(shaft, 1.0)
    return PointSetup(path=point, props=dict(info.props), model=model, shaft=shaft,
                      ratio=ratio, zone_limits_mm_s=zone_limits(arc, point),
                      plan=plan_in_force(arc, point), settings=dict(settings or {}))


def _axial_companion(arc, setup: PointSetup, taken_s: float) -> dict | None:
    """1× and 2× (mm/s RMS) at the machine's axial point within a day of ``taken_s``."""
    info = arc.point(setup.path)
    if str(info.props.get("direction")) == "A":
        return None
    machine = arc.plant.machine(info.site, info.machine)
    for p in machine.points.values():
        if p.props.get("direction") == "A":
            rows = arc.value_rows(p.path)
            if "1x_mm_s" not in rows or not rows["taken_s"].size:
                continue
            i = int(np.argmin(np.abs(rows["taken_s"] - taken_s)))
            if abs(rows["taken_s"][i] - taken_s) <= 86400.0:
                one, two = float(rows["1x_mm_s"][i]), float(rows["2x_mm_s"][i])
                if math.isfinite(one) and math.isfinite(two):
                    return {"1x": one, "2x": two}
    return None


def analyse_run(arc, run_id: str, setup: PointSetup | None = None) -> RunResults:
    """Analyse one stored run (reads its samples)."""
    rec, info = arc.read_run(run_id)
    row = arc._catalogue.get(info.run_id)
    setup = setup or point_setup(arc, row.point)
    return analyse_recording(rec, setup, run_id=info.run_id, taken_s=row.taken_s,
                             rpm=row.rpm, quality=row.quality,
                             axial_companion=_axial_companion(arc, setup, row.taken_s))


def _ordered(arc, run_ids: Iterable[str]) -> list[str]:
    """Axial points first (their 1×/2× feed the radial points' findings), then by time."""
    rows = [arc._catalogue.get(arc.resolve_run(r)) for r in run_ids]
    direction = {p.path: p.props.get("direction") for p in arc.points()}
    rows.sort(key=lambda r: (direction.get(r.point) != "A", r.taken_s))
    return [r.run_id for r in rows]


def analyse_runs(arc, run_ids: Iterable[str], *, progress: Progress = None,
                 cancel: Cancel = None, keep_every: int = 50
                 ) -> tuple[list[str], list[dict]]:
    """Analyse runs and store their results (writer).

    Returns the run ids done and the problems (``{"run_id", "point", "reason"}``) of
    runs that could not be analysed (for example a record too short for the point's
    lines); those runs keep no results and get no state.
    """
    ids = _ordered(arc, run_ids)
    setups: dict[str, PointSetup] = {}
    done, batch, problems = [], [], []
    for i, rid in enumerate(ids):
        if cancel is not None and cancel():
            arc.store_results(batch)
            raise Stopped(f"{arc.path}: analysis stopped after {i} of {len(ids)} runs; "
                          "those are kept")
        point = arc._catalogue.get(rid).point
        if point not in setups:
            setups[point] = point_setup(arc, point)
        try:
            batch.append(analyse_run(arc, rid, setups[point]))
        except InputError as exc:
            problems.append({"run_id": rid, "point": point, "reason": str(exc)})
            continue
        if arc.point(point).props.get("direction") == "A" or len(batch) >= keep_every:
            arc.store_results(batch)          # the axial values must be seen by the rest
            batch = []
        done.append(rid)
        if progress is not None:
            progress(i + 1, len(ids), f"analysed {point} run {rid[:8]}")
    arc.store_results(batch)
    return done, problems


def remeasure(arc, results: RunResults, setup: PointSetup) -> RunResults:
    """The run's results with the band values of ``setup.plan`` measured again from
    its stored spectra (no samples are read)."""
    from .alarms.measure import MeasureInput, measure_plan
    from .analysis import _defect_hz

    values = {k: v for k, v in results.values.items() if not k.startswith("band:")}
    if setup.plan is not None:
        inp = MeasureInput(velocity=results.spectrum, envelope=results.envelope,
                           overall_velocity_mm_s=results.value("overall_velocity_mm_s"),
                           crest_factor=results.value("crest_factor"),
                           kurtosis=results.value("kurtosis"), rpm=results.rpm,
                           defect_hz=_defect_hz(setup, results.rpm))
        for name, v in measure_plan(setup.plan, inp).items():
            values[band_value_name(name)] = float(v)
    return replace(results, values=values,
                   plan_digest="" if setup.plan is None else setup.plan.digest())


@dataclass
class Evaluation:
    """What an evaluation found: runs evaluated, states now, and the changes."""

    runs: int = 0
    points: int = 0
    remeasured: int = 0
    states: dict[str, str] = field(default_factory=dict)     # point -> state of latest run
    changed: dict[str, tuple[str, str]] = field(default_factory=dict)  # point -> (before, now)
    events: int = 0
    problems: list[dict] = field(default_factory=list)   # runs that could not be analysed

    def as_dict(self) -> dict:
        return {"runs": self.runs, "points": self.points, "remeasured": self.remeasured,
                "states": self.states, "events": self.events, "problems": self.problems,
                "changed": {k: {"before": a, "now": b} for k, (a, b) in self.changed.items()}}


def evaluate_points(arc, points: Iterable[str] | None = None, *, since_s: float | None = None,
                    progress: Progress = None, cancel: Cancel = None) -> Evaluation:
    """Evaluate the analysed runs of ``points`` (default: all) against the plan in
    force, and record states, zones and events (writer).

    Runs whose band values were measured for another plan are measured again from
    their stored spectra first.  ``since_s`` limits the recorded states to runs taken
    at or after it (the event log still follows the whole history).
    """
    from .alarms.evaluate import evaluate_history, state_changes
    from .alarms.iso import zone_of

    points = list(points) if points is not None else [p.path for p in arc.points()]
    before = {p: s["state"] for p, s in arc.point_states().items()}
    out = Evaluation()
    for k, point in enumerate(points):
        if cancel is not None and cancel():
            raise Stopped(f"{arc.path}: evaluation stopped after {k} of {len(points)} points")
        setup = point_setup(arc, point)
        plan = setup.plan
        rows = arc.value_rows(point)
        if not rows or not rows["run_id"].size:
            continue
        if plan is not None:
            digest = plan.digest()
            stale = [rid for rid, d in zip(rows["run_id"], rows["plan_digest"]) if d != digest]
            if stale:
                # The stored spectra only: no per-run band states are needed here.
                fresh = [remeasure(arc, read_results_file(arc.results_file(rid)), setup)
                         for rid in stale]
                arc.store_results(fresh)
                out.remeasured += len(fresh)
                rows = arc.value_rows(point)
        n = rows["run_id"].size
        limits = setup.zone_limits_mm_s
        overall_v = rows.get("overall_velocity_mm_s", np.full(n, np.nan))
        zones = [zone_of(v, limits) if limits and math.isfinite(v) else "" for v in overall_v]
        if plan is None:
            states = np.full(n, "", dtype=object)
            worst = [""] * n
            events = []
        else:
            vals = {b.name: rows.get(band_value_name(b.name), np.full(n, np.nan))
                    for b in plan.bands}
            states, band_states = evaluate_history(plan, vals, rows["quality"])
            worst = []
            for i in range(n):
                names = [b.name for b in plan.bands if band_states[b.name][i] == states[i]]
                worst.append(names[0] if names and states[i] in ("alert", "danger") else "")
            events = state_changes(point, list(rows["run_id"]), rows["taken_s"], states,
                                   band_states, vals, plan)
        sel = np.ones(n, bool) if since_s is None else rows["taken_s"] >= since_s
        arc.set_states([r for r, s in zip(rows["run_id"], sel) if s],
                       [str(x) for x, s in zip(states, sel) if s],
                       [z for z, s in zip(zones, sel) if s], [w for w, s in zip(worst, sel) if s],
                       "" if plan is None else plan.digest())
        arc.replace_events(point, events)
        out.runs += int(sel.sum())
        out.points += 1
        out.events += len(events)
        if progress is not None:
            progress(k + 1, len(points), f"evaluated {point}")
    after = arc.point_states()
    out.states = {p: s["state"] for p, s in after.items() if p in points}
    out.changed = {p: (before.get(p, ""), s) for p, s in out.states.items()
                   if before.get(p, "") != s}
    return out


def process_new_runs(arc, run_ids: Iterable[str], *, progress: Progress = None,
                     cancel: Cancel = None) -> Evaluation:
    """Analyse newly imported runs and evaluate their points (what an import calls)."""
    ids = [r for r in run_ids if r]
    if not ids:
        return Evaluation()
    _, problems = analyse_runs(arc, ids, progress=progress, cancel=cancel)
    points = sorted({arc._catalogue.get(arc.resolve_run(r)).point for r in ids})
    out = evaluate_points(arc, points, cancel=cancel)
    out.problems = problems
    return out
