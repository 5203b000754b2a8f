"""Alarm evaluation of a 20,000-run archive from its stored values (run on demand:
``python -m tests.benchmarks.bench_evaluate``).

The archive is built synthetically in a temporary folder: a real ``plant.h5`` with 200
points on 20 machines, each with an alarm plan (the ISO 20816-3 group 2 rigid default
band plus a 1× order band), a catalogue of 20,000 runs (100 per point, daily) and a
value table holding every run's values and band values measured for that plan; no
spectra are computed and no run file exists (evaluation reads neither).  A fifth of
the points drift upwards through alert into danger so that the event logs are not
empty.

Timed (best of 3, each on the same archive, which evaluation leaves as it found it):

* ``reprocess(what="evaluate")`` end to end: open as the writer, evaluate every point,
  write the value table, catalogue and event log, close (target < 2 s);
* ``engine.pipeline.evaluate_points`` through the batch's archive view alone, against
  the same call on the bare archive (the reference: every point's plan, model and
  value rows read anew).
"""

from __future__ import annotations

import hashlib
import math
import os
import shutil
import tempfile
import warnings
from pathlib import Path

import numpy as np

from engine.alarms.iso import default_plan
from engine.alarms.plan import AlarmPlan, Band
from engine.archive import create_archive, open_archive
from engine.archive.catalogue import COLUMNS, Catalogue
from engine.archive.derived import VALUES_FILE, ValueTable
from engine.archive.schema import CATALOGUE_FILE
from engine.batch import reprocess
from engine.batch_view import ArchiveView
from engine.errors import EngineWarning
from engine.pipeline import evaluate_points
from engine.results import STANDARD_VALUES, RunResults, band_value_name
from tests.benchmarks._timing import best_of

MACHINES, POINTS_PER_MACHINE, RUNS_PER_POINT = 20, 10, 100
TARGET_S = 2.0
START_S = 1_785_000_000.0        # 2026-07-25, s since 1970 UTC
DAY_S = 86400.0


def bench_plan() -> AlarmPlan:
    iso = default_plan(2, "rigid")
    one_x = Band(name="1x", measure="band_rms", alert=2.0, danger=4.0, unit="mm/s",
                 scale="rms", low=0.9, high=1.1, basis="order")
    return AlarmPlan(name="bench", bands=iso.bands + (one_x,), origin="benchmark")


def build(path: Path) -> int:
    """Build the synthetic archive; returns the number of runs."""
    plan = bench_plan()
    points = []
    with create_archive(path, plant_name="Bench Works") as arc:
        arc.add_site("Bench")
        for m in range(MACHINES):
            tag = f"M-{m:03d}"
            arc.add_machine("Bench", tag, nominal_rpm=1480.0, iso_group=2, foundation="rigid")
            for k in range(POINTS_PER_MACHINE):
                arc.add_point("Bench", tag, f"point {k} H", direction="H", unit="g")
                points.append(f"Bench/{tag}/point {k} H")
        arc.set_plans(dict.fromkeys(points, plan))
    rng = np.random.default_rng(7)
    digest = plan.digest()
    overall_name = band_value_name(plan.bands[0].name)
    cat, rows = Catalogue(), []
    for n, point in enumerate(points):
        drift = 0.06 if n % 5 == 0 else 0.0          # mm/s per day
        for i in range(RUNS_PER_POINT):
            rid = hashlib.sha256(f"{point}/{i}".encode()).hexdigest()[:20]
            taken = START_S + i * DAY_S
            row = dict.fromkeys(COLUMNS, math.nan)
            row.update(run_id=rid, point=point, path=f"runs/none/{rid}.h5", state="",
                       quality="ok", taken_s=taken, imported_s=taken, rpm=1480.0)
            cat.append(row)
            overall = 1.2 + drift * i + 0.1 * rng.standard_normal()
            one_x = 0.6 + 0.5 * drift * i + 0.05 * rng.standard_normal()
            values = dict.fromkeys(STANDARD_VALUES, math.nan)
            values.update({"overall_velocity_mm_s": overall, "1x_mm_s": one_x, "rpm": 1480.0,
                           overall_name: overall, band_value_name("1x"): one_x})
            rows.append(RunResults(run_id=rid, point=point, taken_s=taken, rpm=1480.0,
                                   values=values, quality="ok", plan_digest=digest))
    cat.write(path / CATALOGUE_FILE)
    table = ValueTable()
    table.upsert(rows)
    table.write(path / VALUES_FILE)
    return len(rows)


def main() -> int:
    warnings.simplefilter("ignore", EngineWarning)
    tmp = Path(tempfile.mkdtemp(prefix="bench-evaluate-"))
    try:
        path = tmp / "bench.shaftwatch"
        n = build(path)
        summary = reprocess(path, what="evaluate", workers=1)
        ours = best_of(lambda: reprocess(path, what="evaluate", workers=1), repeat=3)
        with open_archive(path, mode="w") as arc:
            view_s = best_of(lambda: evaluate_points(ArchiveView(arc)), repeat=3)
            bare_s = best_of(lambda: evaluate_points(arc), repeat=3)
        load = os.getloadavg()
        states = {s: list(summary.states.values()).count(s)
                  for s in sorted(set(summary.states.values()))}
        print(f"archive: {n} runs, {len(summary.states)} points, {summary.events} events, "
              f"states {states}, remeasured {summary.remeasured}")
        print(f"reprocess(what='evaluate') end to end: {ours:.3f} s "
              f"(target < {TARGET_S:g} s) {'met' if ours < TARGET_S else 'NOT met'}")
        print(f"evaluate_points through the batch view: {view_s:.3f} s; on the bare "
              f"archive (reference): {bare_s:.3f} s; ratio {view_s / bare_s:.2f}")
        print(f"load average (1, 5, 15 min) on {os.cpu_count()} cores: "
              f"{load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")
        return 0 if ours < TARGET_S else 1
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    raise SystemExit(main())
