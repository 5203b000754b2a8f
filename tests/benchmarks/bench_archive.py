"""Archive benchmarks (run on demand: ``python -m tests.benchmarks.bench_archive``).

1. Import of a 500 MB float WAV (streamed: read in blocks, hashed, compressed and
   written chunk by chunk) against a plain copy of the same file with fsync (target
   ≤ 4×), and the import's peak resident memory (target < 300 MB), measured in a fresh
   process.
2. Trend of one value of one point in a 20,000-run archive (target < 50 ms), against
   reading the same catalogue columns with bare h5py and numpy.
3. Asset tree of that archive, opening included (target < 300 ms), against a bare h5py
   walk of plant.h5 plus the catalogue columns.

The 20,000-run archive is built synthetically: a real plant.h5 and a catalogue of
20,000 rows, with empty placeholder run files so that opening scans a realistic
``runs/`` folder (the placeholders are never opened).  Big files live in /tmp and are
deleted afterwards.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import struct
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import h5py
import numpy as np

from engine.archive import create_archive, open_archive
from engine.archive.catalogue import Catalogue
from tests.benchmarks._timing import best_of, report

ROOT = Path(__file__).resolve().parents[2]
WAV_BYTES = 500 * 1000 * 1000
FS_HZ = 25600
N_RUNS = 20_000


def write_big_wav(path: Path, n_bytes: int = WAV_BYTES, channels: int = 2) -> None:
    """A 32-bit float WAV of machine-like signal, written block by block."""
    frames = n_bytes // (4 * channels)
    data = frames * 4 * channels
    header = (b"RIFF" + struct.pack("<I", 36 + data) + b"WAVE" + b"fmt "
              + struct.pack("<IHHIIHH", 16, 3, channels, FS_HZ, FS_HZ * 4 * channels,
                            4 * channels, 32)
              + b"data" + struct.pack("<I", data))
    rng = np.random.default_rng(1)
    block = 1 << 20
    with open(path, "wb") as f:
        f.write(header)
        for start in range(0, frames, block):
            n = min(block, frames - start)
            t = (start + np.arange(n)) / FS_HZ
            x = np.empty((n, channels), np.float32)
            for c in range(channels):
                x[:, c] = (0.2 * np.sin(2 * np.pi * 24.6 * t + c) + 0.05 * np.sin(
                    2 * np.pi * 123.0 * t) + 0.03 * rng.standard_normal(n))
            f.write(x.tobytes())


def _worker_import(wav: str, archive: str) -> None:
    """Run in a fresh process: import one WAV, print seconds and peak RSS as JSON."""
    warnings.simplefilter("ignore")
    arc = create_archive(archive, plant_name="bench")
    arc.add_site("S")
    arc.add_machine("S", "M")
    arc.add_point("S", "M", "P")
    t0 = time.perf_counter()
    arc.import_wav_file(wav, "S/M/P")  # what `shaftwatch import` does with a large WAV
    arc.close()
    seconds = time.perf_counter() - t0
    usage = resource.getrusage(resource.RUSAGE_SELF)
    print(json.dumps({"seconds": seconds, "maxrss_mb": usage.ru_maxrss / 1024.0,
                      "cpu_s": usage.ru_utime + usage.ru_stime}))


def _copy_with_fsync(src: Path, dst: Path) -> None:
    shutil.copyfile(src, dst)
    fd = os.open(dst, os.O_RDWR)
    os.fsync(fd)
    os.close(fd)


def bench_import(tmp: Path) -> bool:
    wav = tmp / "big.wav"
    write_big_wav(wav)
    copy = tmp / "copy.wav"

    def do_copy():
        copy.unlink(missing_ok=True)
        _copy_with_fsync(wav, copy)

    ref = best_of(do_copy, repeat=3)
    copy.unlink(missing_ok=True)
    runs = []
    for i in range(3):  # the best of three: the machine may be busy with other work
        out = subprocess.run(
            [sys.executable, "-m", "tests.benchmarks.bench_archive", "--worker-import",
             str(wav), str(tmp / f"a{i}.shaftwatch")],
            cwd=ROOT, check=True, capture_output=True, text=True)
        runs.append(json.loads(out.stdout.strip().splitlines()[-1]))
        shutil.rmtree(tmp / f"a{i}.shaftwatch")
    ours = min(r["seconds"] for r in runs)
    rss = max(r["maxrss_mb"] for r in runs)
    ok = report(f"import of a {wav.stat().st_size / 1e6:.0f} MB float WAV", ours, ref, 4.0,
                ref_name="file copy + fsync")
    walls = ", ".join(f"{r['seconds']:.2f}" for r in runs)
    cpu = min(r["cpu_s"] for r in runs)
    print(f"  import wall times {walls} s; CPU time of the import process {cpu:.1f} s "
          "(decoding, SHA-256, compression in 2 threads, summary)")
    print(f"  peak resident memory of the import process: {rss:.0f} MB (target < 300 MB) "
          f"{'met' if rss < 300 else 'NOT met'}")
    wav.unlink()
    return ok and rss < 300


def build_big_archive(path: Path, n_runs: int = N_RUNS, machines: int = 40,
                      points_per_machine: int = 3) -> list[str]:
    """A plant of ``machines`` × ``points_per_machine`` points and ``n_runs`` catalogue
    rows spread over them; returns the point paths."""
    warnings.simplefilter("ignore")
    rng = np.random.default_rng(7)
    with create_archive(path, plant_name="big") as arc:
        arc.add_site("Works")
        for m in range(machines):
            arc.add_machine("Works", f"P-{100 + m}", nominal_rpm=1480.0, iso_group=2,
                            foundation="rigid", ratios={"motor": 1.0, "pump": 1.0})
            for p in range(points_per_machine):
                arc.add_point("Works", f"P-{100 + m}", f"point {p} H", direction="H",
                              mapping_patterns=[f"P-{100 + m}_{p}_*.wav"])
        points = [p for p in arc.points()]
    rows = []
    start = 1.75e9
    for i in range(n_runs):
        p = points[i % len(points)]
        rid = f"{i:020x}"
        rel = f"runs/{p.key}/{rid}.h5"
        rows.append({"run_id": rid, "point": p.path, "path": rel, "state": "",
                     "quality": "ok", "taken_s": start + 3600.0 * i,
                     "imported_s": start + 3600.0 * i + 60, "rpm": 1480.0,
                     "velocity_rms_mm_s": float(rng.gamma(4, 0.4)),
                     "acceleration_rms_g": 0.05, "acceleration_peak_g": 0.2,
                     "displacement_pp_um": 20.0, "crest_factor": 4.0, "kurtosis": 3.0,
                     "skewness": 0.0, "velocity_band_low_hz": 10.0,
                     "velocity_band_high_hz": 1000.0})
        folder = path / "runs" / p.key
        folder.mkdir(parents=True, exist_ok=True)
        (folder / f"{rid}.h5").touch()
    cat = Catalogue()
    cat.extend(rows)
    cat.write(path / "catalogue.h5")
    return [p.path for p in points]


def _absolute(name: str, ours: float, reference: float, limit_s: float, ref_name: str) -> bool:
    ok = ours < limit_s
    print(f"{name}: ours {ours * 1e3:.2f} ms (target < {limit_s * 1e3:g} ms) "
          f"{'met' if ok else 'NOT met'}; {ref_name} {reference * 1e3:.2f} ms, "
          f"ratio {ours / reference:.2f}")
    return ok


def bench_queries(tmp: Path) -> bool:
    path = tmp / "big.shaftwatch"
    points = build_big_archive(path)
    point = points[5]
    arc = open_archive(path)

    def ours_trend():
        t, v = arc.trend(point, "velocity_rms_mm_s")
        assert t.size == len(range(5, N_RUNS, len(points)))

    def ref_trend():
        with h5py.File(path / "catalogue.h5", "r") as f:
            sel = f["point"][()] == point.encode()
            t = f["taken_s"][()][sel]
            v = f["velocity_rms_mm_s"][()][sel]
            order = np.argsort(t)
            return t[order], v[order]

    def open_and_trend():
        with open_archive(path) as a:
            a.trend(point, "velocity_rms_mm_s")

    def ours_tree():
        with open_archive(path) as a:
            tree = a.tree()
        assert sum(p["runs"] for m in tree[0]["machines"] for p in m["points"]) == N_RUNS

    def ref_tree():
        with h5py.File(path / "plant.h5", "r") as f:
            out = []
            for m in f["sites/Works/machines"].values():
                out.append(dict(m.attrs))
                for p in m["points"].values():
                    out.append(dict(p.attrs))
        with h5py.File(path / "catalogue.h5", "r") as f:
            for k in f:
                f[k][()]
        return out

    t_trend, r_trend = best_of(ours_trend), best_of(ref_trend)
    t_open_trend = best_of(open_and_trend)
    t_tree, r_tree = best_of(ours_tree), best_of(ref_tree)
    arc.close()
    ok1 = _absolute(f"trend of one value of one point, {N_RUNS} runs (archive open)",
                    t_trend, r_trend, 0.05, "bare h5py read of 3 catalogue columns")
    print(f"  opening the archive and the trend together: {t_open_trend * 1e3:.1f} ms")
    ok2 = _absolute(f"asset tree of {len(points)} points and {N_RUNS} runs, opening included",
                    t_tree, r_tree, 0.3, "bare h5py walk of plant.h5 + catalogue read")
    shutil.rmtree(path)
    return ok1 and ok2


def main() -> int:
    if len(sys.argv) == 4 and sys.argv[1] == "--worker-import":
        _worker_import(sys.argv[2], sys.argv[3])
        return 0
    tmp = Path(tempfile.mkdtemp(prefix="shaftwatch-bench-", dir="/tmp"))
    try:
        ok = bench_queries(tmp)
        ok = bench_import(tmp) and ok
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
