"""Build the archive of the invented Demo Works plant (PRODUCT.md, "Demo plant").

Every machine and point of :data:`engine.demo_plant.PLANT`, sixteen weekly surveys of
simulated recordings with their developing faults, and M-501's run-up with a
tachometer channel — deterministic, so every build is the same archive.
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

from .archive import create_archive
from .demo_plant import PLANT, demo_recording
from .errors import EngineError
from .kinematics import model_from_demo
from .pipeline import Stopped, analyse_runs, evaluate_points, plan_in_force

#: Analysis settings stored on every demo point (the trade's usual survey setup).
POINT_SETTINGS = {"fmax_hz": 1000.0, "lines": 1600, "window": "hann", "overlap": 0.5}

DEFAULT_NAME = "demo-works.shaftwatch"


class Cancelled(EngineError):
    """The build was cancelled; the partial archive is removed."""


def demo_runs() -> list[tuple[str, str, int]]:
    """(machine tag, point name, week) of every run in the demo archive, in time order."""
    return [(m.tag, p.name, week)
            for week in range(1, PLANT.weeks + 1)
            for m in PLANT.machines for p in m.points]


def build_demo_archive(
    path: str | Path,
    *,
    duration_s: float = 2.0,
    progress: Callable[[int, int, str], None] | None = None,
    cancelled: Callable[[], bool] | None = None,
) -> Path:
    """Create the demo archive at ``path`` (which must not exist yet).

    Parameters
    ----------
    path : str or Path
    duration_s : float, keyword-only
        Length of each steady-speed run, s (the run-up keeps its own 10 s).
    progress : callable(done, total, label), optional
    cancelled : callable() -> bool, optional
        Polled between runs; when it returns True the build stops and the partial
        archive is removed.

    Returns
    -------
    Path of the archive.
    """
    path = Path(path)
    runs = demo_runs()
    total = 2 * len(runs)
    site = PLANT.site
    try:
        with create_archive(path, plant_name=site, command="build demo archive") as arc:
            _add_assets(arc)
            for i, (tag, point, week) in enumerate(runs):
                if cancelled is not None and cancelled():
                    raise Cancelled(f"{path}: demo build cancelled after {i} of "
                                    f"{len(runs)} runs; nothing was kept")
                rec = demo_recording(tag, point, week, duration_s=duration_s)
                arc.import_recording(rec, f"{site}/{tag}/{point}", taken=rec.taken,
                                     rpm=rec.rpm, notes=f"demo survey week {week}",
                                     source=f"demo-{tag}-{point.replace(' ', '-')}"
                                            f"-week{week:02d}",
                                     taken_source="demo plant schedule")
                if progress is not None:
                    progress(i + 1, total, f"{tag} {point} week {week}")
            ids = [r.run_id for r in arc.runs()]
            step = (lambda d, t, text: progress(len(runs) + d, total, text)) \
                if progress is not None else None
            try:
                analyse_runs(arc, ids, progress=step, cancel=cancelled)
                set_demo_plans(arc)
                evaluate_points(arc, cancel=cancelled)
            except Stopped as exc:
                raise Cancelled(f"{path}: demo build cancelled ({exc}); nothing was kept") \
                    from None
    except Cancelled:
        shutil.rmtree(path, ignore_errors=True)
        raise
    return path


#: Weeks whose runs form each demo point's statistical baseline (all machines healthy).
BASELINE_WEEKS = (1, 2, 3, 4, 5)


def demo_plan_template():
    """Narrow bands learnt from the baseline: 1× and 2× of the point's shaft (band RMS
    in mm/s over ±0.1 order, so that they follow speed)."""
    from .alarms.plan import AlarmPlan, Band

    bands = (Band(name="1x", measure="band_rms", alert=1.0, danger=2.0, unit="mm/s",
                  scale="rms", low=0.9, high=1.1, basis="order"),
             Band(name="2x", measure="band_rms", alert=1.0, danger=2.0, unit="mm/s",
                  scale="rms", low=1.9, high=2.1, basis="order"))
    return AlarmPlan(name="narrow bands", bands=bands, origin="demo template")


def set_demo_plans(arc) -> None:
    """Give every demo point its plan: the machine's ISO 20816-3 default for the
    overall velocity, plus 1× and 2× bands at 2.5× / 5× their mean over the baseline
    weeks (the ratio method, common practice for narrow bands)."""
    from .alarms.baseline import baseline_plan
    from .alarms.plan import AlarmPlan

    template = demo_plan_template()
    first = PLANT.taken(PLANT.machines[0].tag, PLANT.machines[0].points[0].name,
                        BASELINE_WEEKS[0]).timestamp()
    last = PLANT.taken(PLANT.machines[0].tag, PLANT.machines[0].points[0].name,
                       BASELINE_WEEKS[-1]).timestamp() + 3 * 86400.0
    plans = {}
    for p in arc.points():
        iso = plan_in_force(arc, p.path)
        rows = arc.value_rows(p.path)
        sel = (rows["taken_s"] >= first - 86400.0) & (rows["taken_s"] <= last)
        names = {"1x": "1x_mm_s", "2x": "2x_mm_s"}
        runs_values = [{b: float(rows[c][i]) for b, c in names.items()}
                       for i in range(sel.size) if sel[i]]
        learnt = baseline_plan(template, runs_values, method="ratio",
                               name=f"{p.machine} {p.name}")
        bands = (iso.bands if iso is not None else ()) + learnt.bands
        plans[p.path] = AlarmPlan(
            name=f"{p.machine} {p.name}", bands=bands,
            origin=(f"{iso.origin} + " if iso is not None else "") + learnt.origin,
            note=" ".join(x for x in ((iso.note if iso else ""), learnt.note) if x))
    arc.set_plans(plans)


def _add_assets(arc) -> None:
    site = PLANT.site
    arc.add_site(site, description="Invented municipal water-treatment works (demo data)")
    for m in PLANT.machines:
        arc.add_machine(site, m.tag, name=m.name, description=m.description,
                        nominal_rpm=m.nominal_rpm, power_kw=m.power_kw,
                        iso_group=m.iso_group, foundation=m.foundation,
                        ratios={name: ratio for name, ratio in m.shafts})
        for p in m.points:
            arc.add_point(site, m.tag, p.name, location=p.location, shaft=p.shaft,
                          direction=p.direction, unit="g", **POINT_SETTINGS)
        arc.set_machine_model(site, m.tag, model_from_demo(m))
    seen = set()
    for m in PLANT.machines:
        for p in m.points:
            if p.bearing is not None and p.bearing.label not in seen:
                seen.add(p.bearing.label)
                arc.add_bearing(p.bearing)
