"""The kill test: a writer killed with SIGKILL at random moments never damages the archive.

A writer process imports runs, edits the asset tree and rebuilds the catalogue in a
loop, printing each committed change; it is killed after a seeded random delay, 20
times over.  After each kill the archive must open, ``check()`` must find nothing wrong
(the interrupted run is simply absent) and every run and edit reported before the kill
must be there with its samples intact (SHA-256 by hashlib, FIPS 180-4).
"""

from __future__ import annotations

import hashlib
import random
import select
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from _archive_helpers import POINT, new_archive

from engine.archive import open_archive

ROOT = Path(__file__).resolve().parents[1]
KILLS = 20

WRITER = r"""
import hashlib, random, sys, warnings
import numpy as np
warnings.simplefilter("ignore")
from engine.archive import open_archive
from engine.recording import Channel, Recording

folder, seed = sys.argv[1], int(sys.argv[2])
rnd = random.Random(seed)
points = ["Works/P-101/motor DE H", "Works/P-101/pump DE H"]
arc = open_archive(folder, mode="w", command=f"kill test {seed}")
print("OPEN", flush=True)
i = 0
while True:
    op = rnd.random()
    i += 1
    if op < 0.8:
        rng = np.random.default_rng(seed * 100_000 + i)
        x = rng.standard_normal(int(rng.integers(4096, 150_000)))  # 1 or 2 chunks
        digest = hashlib.sha256(x.astype("<f8").tobytes()).hexdigest()
        r = arc.import_recording(Recording(5120.0, [Channel(x, "g")], source="k.wav"),
                                 points[i % 2], notes=f"{seed}/{i}")
        print("RUN", r.run_id, digest, flush=True)
    elif op < 0.9:
        tag = f"M-{seed}-{i}"
        arc.add_machine("Works", tag, nominal_rpm=1000.0 + i)
        print("MACHINE", tag, flush=True)
    elif op < 0.97:
        lines = rnd.choice([400, 800, 1600, 3200, 6400])
        arc.update_point(points[0], lines=lines)
        print("LINES", lines, flush=True)
    else:
        arc.rebuild()
        print("REBUILD", flush=True)
"""


def _complete_lines(text: str) -> list[list[str]]:
    lines = text.split("\n")
    return [ln.split() for ln in lines[:-1] if ln.strip()]  # the last may be cut short


@pytest.mark.slow  # about 40 s: 20 writer processes, each started, run and killed
@pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")
def test_archive_survives_sigkill_at_random_moments(tmp_path):
    folder = tmp_path / "kill.shaftwatch"
    new_archive(folder, points=2).close()
    rnd = random.Random(20260803)
    runs: dict[str, str] = {}
    machines: set[str] = set()
    lines_value = None
    for kill in range(KILLS):
        proc = subprocess.Popen([sys.executable, "-c", WRITER, str(folder), str(kill + 1)],
                                cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL)
        # Wait until the writer has the archive open (start-up time varies with the
        # machine's load), then kill it at a random moment of its work.
        ready, _, _ = select.select([proc.stdout], [], [], 60.0)
        assert ready and proc.stdout.readline().strip() == b"OPEN", "writer did not start"
        time.sleep(rnd.uniform(0.02, 0.9))
        proc.send_signal(signal.SIGKILL)
        out, _ = proc.communicate()
        new_runs = {}
        for words in _complete_lines(out.decode()):
            if words[0] == "RUN":
                new_runs[words[1]] = words[2]
            elif words[0] == "MACHINE":
                machines.add(words[1])
            elif words[0] == "LINES":
                lines_value = int(words[1])
        runs.update(new_runs)
        with open_archive(folder) as arc:
            assert arc.check() == [], f"after kill {kill + 1}"
            listed = {r.run_id for r in arc.runs()}
            assert set(runs) <= listed
            assert len(listed - set(runs)) <= 1  # at most the run cut off before its print
            for rid, digest in new_runs.items():
                # check() has just verified every stored sample against its stored
                # SHA-256 (older runs too); a new run's must be the writer's own,
                # computed before the import.
                assert arc.run_info(rid).channels[0]["sha256"] == digest
            assert machines <= set(arc.plant.sites["Works"].machines)
            if lines_value is not None:
                assert arc.point(POINT).props["lines"] == lines_value
    assert len(runs) >= KILLS // 2, "the writer should have committed runs between kills"
    last = next(iter(runs))
    rec, _ = open_archive(folder).read_run(last)  # and the samples themselves read back
    assert hashlib.sha256(rec.channels[0].samples.astype("<f8").tobytes()).hexdigest() \
        == runs[last]
    with open_archive(folder, mode="w") as arc:  # a writer after the last kill
        assert arc.check() == []
    assert not list(folder.rglob("*.tmp"))
