"""Reprocessing 2,000 runs with two worker processes against one (run on demand:
``python -m tests.benchmarks.bench_reprocess``).

The archive: the Demo Works machines with steady speed (P-101, P-102, F-201, B-301,
G-401; 15 points), 2,000 runs of 0.5 s at 25.6 kHz spread over the sixteen demo weeks
(each week's recording taken several times, with a little independent noise so that
every run is distinct), analysed at 400 lines up to 1 kHz.  Each batch computes the
spectra, envelope, levels, peaks, findings and band values of every run, writes the
results files, the value table and the alarms (``reprocess(..., resume=False)``).

Both batches run in this process one after the other on copies of the same archive;
the speed-up is the one-worker time over the two-worker time (target ≥ 1.7).  The
one-worker batch runs in this process (no pool), so the two-worker time also pays for
starting the pool and for sending every run out and its results back.  The CPU time
of the calling process and of its workers is printed beside the wall times, and the
load average before and after, since other work on the machine takes cores from the
workers.
"""

from __future__ import annotations

import math
import os
import resource
import shutil
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

from engine.archive import create_archive, open_archive
from engine.batch import reprocess
from engine.demo_plant import PLANT, demo_recording
from engine.errors import EngineWarning
from engine.kinematics import model_from_demo
from engine.recording import Channel, Recording

N_RUNS = 2000
DURATION_S = 0.5
FS_HZ = 25600.0
MACHINES = ("P-101", "P-102", "F-201", "B-301", "G-401")
TARGET = 1.7
SETTINGS = {"fmax_hz": 1000.0, "lines": 400, "window": "hann", "overlap": 0.5}


def build(path: Path) -> int:
    """The benchmark archive (imported, not analysed); returns the number of runs."""
    site = PLANT.site
    machines = [PLANT.machine(t) for t in MACHINES]
    points = [(m, p) for m in machines for p in m.points]
    copies = math.ceil(N_RUNS / (len(points) * PLANT.weeks))
    rng = np.random.default_rng(2026)
    n = 0
    with create_archive(path, plant_name="Bench Works") as arc:
        arc.add_site(site)
        for m in machines:
            arc.add_machine(site, m.tag, nominal_rpm=m.nominal_rpm, iso_group=m.iso_group,
                            foundation=m.foundation, ratios=dict(m.shafts))
            for p in m.points:
                arc.add_point(site, m.tag, p.name, location=p.location, shaft=p.shaft,
                              direction=p.direction, unit="g", **SETTINGS)
            arc.set_machine_model(site, m.tag, model_from_demo(m))
        for week in range(1, PLANT.weeks + 1):
            for m, p in points:
                rec = demo_recording(m.tag, p.name, week, fs_hz=FS_HZ, duration_s=DURATION_S)
                x = rec.channels[0].samples
                for c in range(copies):
                    if n >= N_RUNS:
                        break
                    noisy = x + 1e-4 * rng.standard_normal(x.size)
                    run = Recording(fs_hz=rec.fs_hz, channels=[Channel(
                        noisy, "g", name=rec.channels[0].name,
                        direction=rec.channels[0].direction)], source=rec.source,
                        rpm=rec.rpm, taken=rec.taken.replace(hour=8 + c))
                    arc.import_recording(run, f"{site}/{m.tag}/{p.name}", taken=run.taken,
                                         rpm=run.rpm)
                    n += 1
    return n


def _cpu() -> tuple[float, float]:
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime, kids.ru_utime + kids.ru_stime


def timed(path: Path, workers: int):
    load = os.getloadavg()[0]
    cpu0 = _cpu()
    t0 = time.perf_counter()
    summary = reprocess(path, workers=workers, resume=False)
    wall = time.perf_counter() - t0
    cpu1 = _cpu()
    own, kids = cpu1[0] - cpu0[0], cpu1[1] - cpu0[1]
    # Workers forked by a fork server are its children, not ours: their CPU is not seen.
    kids_text = (f"workers {kids:.1f}, i.e. {(own + kids) / wall:.2f} cores on average"
                 if kids > 0 or workers == 1 else "workers not counted (fork-server children)")
    print(f"{workers} worker(s): {wall:7.1f} s wall, {len(summary.done)} runs done, "
          f"{len(summary.failed)} failed, on {summary.where}; CPU s: this process "
          f"{own:.1f}, {kids_text}; load average {load:.2f} before, "
          f"{os.getloadavg()[0]:.2f} after", flush=True)
    return wall, summary


def same_values(a: Path, b: Path, sample: int = 50) -> float:
    """Largest difference of any value between the two archives over a sample of runs."""
    worst = 0.0
    with open_archive(a) as x, open_archive(b) as y:
        ids = [r.run_id for r in x.runs()]
        for rid in ids[:: max(1, len(ids) // sample)]:
            va, vb = x.results(rid).values, y.results(rid).values
            for k, v in va.items():
                if not (math.isnan(v) and math.isnan(vb[k])):
                    worst = max(worst, abs(v - vb[k]))
    return worst


def main() -> int:
    warnings.simplefilter("ignore", EngineWarning)
    tmp = Path(tempfile.mkdtemp(prefix="bench-reprocess-"))
    try:
        base = tmp / "base.shaftwatch"
        t0 = time.perf_counter()
        n = build(base)
        print(f"built {n} runs of {DURATION_S:g} s at {FS_HZ:g} Hz in "
              f"{time.perf_counter() - t0:.1f} s", flush=True)
        one, two = tmp / "one.shaftwatch", tmp / "two.shaftwatch"
        shutil.copytree(base, one)
        shutil.copytree(base, two)
        # Alternate 1, 2, 1, 2 workers and keep each one's best: the two cores are
        # shared, and a slow spell should not fall on one side only.
        t1, s1 = timed(one, 1)
        t2, s2 = timed(two, 2)
        t1 = min(t1, timed(one, 1)[0])
        t2 = min(t2, timed(two, 2)[0])
        ratio = t1 / t2
        diff = same_values(one, two)
        print(f"speed-up with 2 workers: {ratio:.2f} (target ≥ {TARGET:g}) "
              f"{'met' if ratio >= TARGET else 'NOT met'}; per run {t1 / n * 1e3:.1f} ms "
              f"against {t2 / n * 1e3:.1f} ms; largest value difference {diff:.3g}")
        print(f"machine: {os.cpu_count()} cores, load average (1, 5, 15 min) now "
              + " ".join(f"{v:.2f}" for v in os.getloadavg()))
        return 0 if ratio >= TARGET and not s1.failed and not s2.failed else 1
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
