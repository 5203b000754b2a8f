"""Crash-safe file replacement and the one-writer lock.

Every file of an archive is written under a temporary name in its own folder, flushed
to the disk (``fsync``), and then renamed over its final name (``os.replace`` is atomic
on POSIX and Windows); the folder is flushed too, so that the rename itself survives a
power cut.  A reader therefore only ever sees complete files.

The writer lock is a small JSON file created with ``O_CREAT | O_EXCL`` (only one process
can create it).  A lock left by a process that no longer runs on this host is stale and
is taken over with a notice.
"""

from __future__ import annotations

import errno
import json
import os
import shutil
import socket
import sys
import time
import uuid
from dataclasses import dataclass
from pathlib import Path

from ..errors import ArchiveError
from .schema import LOCK_FILE, PLANT_FILE, PREV_SUFFIX, TMP_SUFFIX, iso_utc, now_utc


def fsync_file(path: str | os.PathLike) -> None:
    """Flush a closed file's data to the disk."""
    fd = os.open(path, os.O_RDWR | getattr(os, "O_BINARY", 0))
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def fsync_dir(path: str | os.PathLike) -> None:
    """Flush a folder's entries (the renames in it) to the disk; a no-op on Windows,
    where folders cannot be opened and renames are journalled by NTFS."""
    if os.name == "nt":
        return
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    except OSError as exc:  # some network file systems refuse fsync on a folder
        if exc.errno not in (errno.EINVAL, errno.ENOTSUP, errno.EBADF):
            raise
    finally:
        os.close(fd)


def commit(tmp: Path, final: Path) -> None:
    """Make a fully written temporary file the real one: fsync, rename, fsync folder."""
    fsync_file(tmp)
    os.replace(tmp, final)
    fsync_dir(final.parent)


def commit_plant(folder: Path, tmp: Path, *, keep_prev: bool) -> None:
    """Replace ``plant.h5`` by ``tmp``, first keeping the current one as ``plant.h5.prev``.

    The previous file is kept through a hard link (a copy where the file system has
    none), so that ``plant.h5`` never goes missing; ``keep_prev=False`` leaves ``.prev``
    alone (used when the current ``plant.h5`` is the damaged one).
    """
    plant = folder / PLANT_FILE
    fsync_file(tmp)
    if keep_prev and plant.exists():
        prev = folder / (PLANT_FILE + PREV_SUFFIX)
        prev_tmp = folder / (PLANT_FILE + PREV_SUFFIX + TMP_SUFFIX)
        prev_tmp.unlink(missing_ok=True)
        try:
            os.link(plant, prev_tmp)
        except OSError:
            shutil.copyfile(plant, prev_tmp)
            fsync_file(prev_tmp)
        os.replace(prev_tmp, prev)
    os.replace(tmp, plant)
    fsync_dir(folder)


#: An empty or unreadable lock younger than this is being written, not stale, s.
LOCK_WRITE_GRACE_S = 2.0


def _age_s(path: Path) -> float:
    try:
        return time.time() - path.stat().st_mtime
    except FileNotFoundError:
        return 0.0


def pid_alive(pid: int) -> bool:
    """Whether process ``pid`` runs on this host (a zombie counts as dead)."""
    if pid <= 0:
        return False
    if os.name == "nt":
        import ctypes  # only on Windows: os.kill(pid, 0) would terminate the process there

        kernel32 = ctypes.windll.kernel32
        handle = kernel32.OpenProcess(0x1000, False, pid)  # PROCESS_QUERY_LIMITED_INFORMATION
        if not handle:
            return False
        code = ctypes.c_ulong()
        try:
            kernel32.GetExitCodeProcess(handle, ctypes.byref(code))
        finally:
            kernel32.CloseHandle(handle)
        return code.value == 259  # STILL_ACTIVE
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as f:
            return f.read().rsplit(")", 1)[1].split()[0] != "Z"
    except (OSError, IndexError):
        return True


@dataclass(frozen=True)
class LockInfo:
    """Who holds the writer lock: process id, host, start time (ISO) and command."""

    pid: int
    host: str
    started: str
    command: str
    token: str = ""

    def describe(self) -> str:
        return (f"pid {self.pid} on host {self.host} since {self.started} "
                f"(command {self.command})")


def read_lock(path: Path) -> LockInfo | None:
    """The lock's content, ``None`` when there is no lock file; unreadable content is
    reported as a lock of pid 0 (which is always stale)."""
    try:
        raw = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    try:
        d = json.loads(raw)
        return LockInfo(int(d["pid"]), str(d["host"]), str(d["started"]),
                        str(d.get("command", "")), str(d.get("token", "")))
    except (ValueError, KeyError, TypeError):
        return LockInfo(0, socket.gethostname(), "unknown", "unreadable lock file")


class WriterLock:
    """The ``writer.lock`` of an archive folder, held while a writer is open.

    Parameters
    ----------
    folder : Path
        The archive folder.
    command : str
        What the writer does, stored in the lock for whoever meets it.
    """

    def __init__(self, folder: Path, command: str):
        self.path = folder / LOCK_FILE
        self.info = LockInfo(os.getpid(), socket.gethostname(), iso_utc(now_utc()),
                             command or " ".join(sys.argv) or "python", uuid.uuid4().hex)
        self.held = False

    def acquire(self, *, force: bool = False) -> list[str]:
        """Create the lock, taking over a stale one (or any one with ``force``).

        Returns
        -------
        list of str
            Notices about a lock taken over.

        Raises
        ------
        ArchiveError
            When another live writer holds the lock and ``force`` is false.
        """
        notices = []
        for _ in range(100):
            try:
                fd = os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                other = read_lock(self.path)
                if other is None:
                    continue
                if other.pid == 0 and _age_s(self.path) < LOCK_WRITE_GRACE_S:
                    time.sleep(0.05)  # another writer has just created it and is filling it in
                    continue
                stale = other.host == socket.gethostname() and not pid_alive(other.pid)
                if not (stale or force):
                    raise ArchiveError(f"archive {self.path.parent} is being written by "
                                       f"{other.describe()}") from None
                # Move the old lock aside under a unique name: of two processes taking
                # over at once only one rename succeeds.
                aside = self.path.with_name(f"{self.path.name}.{uuid.uuid4().hex}{TMP_SUFFIX}")
                try:
                    os.replace(self.path, aside)
                except FileNotFoundError:
                    continue
                aside.unlink(missing_ok=True)
                why = "stale: that process no longer runs" if stale else "forced"
                notices.append(f"{self.path}: took over the lock of {other.describe()} ({why})")
                continue
            with os.fdopen(fd, "w", encoding="utf-8") as f:
                json.dump({"pid": self.info.pid, "host": self.info.host,
                           "started": self.info.started, "command": self.info.command,
                           "token": self.info.token}, f)
                f.flush()
                os.fsync(f.fileno())
            self.held = True
            return notices
        raise ArchiveError(f"archive {self.path.parent}: could not create {self.path.name} "
                           "(other writers keep taking it); try again")

    def release(self) -> None:
        """Remove the lock if it is still ours."""
        if not self.held:
            return
        self.held = False
        current = read_lock(self.path)
        if current is not None and current.token == self.info.token:
            self.path.unlink(missing_ok=True)
