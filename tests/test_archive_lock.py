"""One writer at a time: the writer lock, stale locks, readers beside a writer."""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
from pathlib import Path

import pytest
from _archive_helpers import POINT, new_archive, recording

from engine.archive import open_archive
from engine.errors import ArchiveError, EngineWarning

ROOT = Path(__file__).resolve().parents[1]
pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")

HOLD = """
import sys, warnings
warnings.simplefilter("ignore")
from engine.archive import open_archive
arc = open_archive(sys.argv[1], mode="w", command="holder test")
print("ready", flush=True)
sys.stdin.readline()
"""


def _holder(folder: Path) -> subprocess.Popen:
    proc = subprocess.Popen([sys.executable, "-c", HOLD, str(folder)], cwd=ROOT,
                            stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "ready"
    return proc


def test_second_writer_is_refused_with_pid_host_and_command(tmp_path):
    new_archive(tmp_path / "a").close()
    proc = _holder(tmp_path / "a")
    try:
        with pytest.raises(ArchiveError) as err:
            open_archive(tmp_path / "a", mode="w")
        text = str(err.value)
        assert f"pid {proc.pid}" in text and socket.gethostname() in text
        assert "command holder test" in text and "being written by" in text
        with open_archive(tmp_path / "a") as reader:  # readers need no lock
            assert reader.point(POINT).name == "motor DE H"
    finally:
        proc.kill()
        proc.wait()


def test_stale_lock_of_a_dead_process_is_taken_over(tmp_path):
    new_archive(tmp_path / "a").close()
    proc = _holder(tmp_path / "a")
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    lock = json.loads((tmp_path / "a" / "writer.lock").read_text())
    assert lock["pid"] == proc.pid  # left behind by the killed writer
    with pytest.warns(EngineWarning, match=rf"took over the lock of pid {proc.pid}.*stale"):
        writer = open_archive(tmp_path / "a", mode="w")
    with writer:
        assert json.loads((tmp_path / "a" / "writer.lock").read_text())["pid"] == os.getpid()
        writer.import_recording(recording(1), POINT)
    assert not (tmp_path / "a" / "writer.lock").exists()


def test_lock_of_another_host_needs_force(tmp_path):
    new_archive(tmp_path / "a").close()
    (tmp_path / "a" / "writer.lock").write_text(json.dumps(
        {"pid": 1, "host": "survey-laptop", "started": "2026-08-03T08:00:00Z",
         "command": "shaftwatch import"}))
    with pytest.raises(ArchiveError, match="pid 1 on host survey-laptop since 2026-08-03"):
        open_archive(tmp_path / "a", mode="w")
    with pytest.warns(EngineWarning, match="forced"):
        writer = open_archive(tmp_path / "a", mode="w", force=True)
    writer.close()


def test_readers_work_while_a_writer_writes(tmp_path):
    writer = new_archive(tmp_path / "a")
    try:
        first = writer.import_recording(recording(2), POINT)
        writer.flush()
        reader = open_archive(tmp_path / "a")
        assert [r.run_id for r in reader.runs()] == [first.run_id]
        second = writer.import_recording(recording(3), POINT)  # not yet in catalogue.h5
        reader.reload()
        assert {r.run_id for r in reader.runs()} == {first.run_id, second.run_id}
        rec, info = reader.read_run(second.run_id)
        assert info.point == POINT and rec.n_samples == 4096
        assert reader.check() == []
        reader.close()
    finally:
        writer.close()


def test_a_closed_writer_gives_the_lock_back(tmp_path):
    arc = new_archive(tmp_path / "a")
    assert (tmp_path / "a" / "writer.lock").exists()
    arc.close()
    assert not (tmp_path / "a" / "writer.lock").exists()
    with pytest.raises(ArchiveError, match="closed"):
        arc.add_site("late")
    open_archive(tmp_path / "a", mode="w").close()


def test_an_old_unreadable_lock_is_stale(tmp_path):
    # An empty lock file is one being written by a writer that has just created it;
    # once it is older than the grace time, it is a left-over and is taken over.
    new_archive(tmp_path / "a").close()
    lock = tmp_path / "a" / "writer.lock"
    lock.write_text("")
    old = lock.stat().st_mtime - 60
    os.utime(lock, (old, old))
    with pytest.warns(EngineWarning, match="unreadable lock file"):
        open_archive(tmp_path / "a", mode="w").close()
