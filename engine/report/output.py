"""Writing a report file safely: target checks, progress and cancel, atomic rename."""

from __future__ import annotations

import contextlib
import os
import secrets
from collections.abc import Callable, Iterator
from pathlib import Path

from ..errors import InputError
from . import ReportCancelled


def check_target(path, suffix: str) -> Path:
    """The target path, checked: right suffix (any case), existing folder, not a folder.

    Parameters
    ----------
    path : str or os.PathLike
    suffix : str
        ``".pdf"`` or ``".html"``.

    Raises
    ------
    InputError
        Naming the path and what is wrong with it.
    """
    target = Path(path)
    if target.suffix.lower() != suffix:
        raise InputError(f"{target}: this renderer writes {suffix} files, got "
                         f"{target.suffix or 'no suffix'!r}")
    if target.is_dir():
        raise InputError(f"{target}: is a folder, not a report file")
    if not target.parent.is_dir():
        raise InputError(f"{target}: the folder {target.parent} does not exist")
    return target


def is_cancelled(cancel) -> bool:
    """True when ``cancel`` (None, a callable or an object with ``is_set()``) says stop."""
    if cancel is None:
        return False
    is_set = getattr(cancel, "is_set", None)
    if callable(is_set):
        return bool(is_set())
    return bool(cancel())


class Job:
    """Progress and cancel of one report: ``step`` after each section, ``check`` between
    smaller pieces of work.

    Parameters
    ----------
    target : Path
        The report's path, for the cancel message.
    total : int
        Number of steps (sections plus the final write).
    progress : callable(done, total, text) or None
    cancel : callable returning bool, object with ``is_set()``, or None
    """

    def __init__(self, target: Path, total: int,
                 progress: Callable[[int, int, str], None] | None, cancel) -> None:
        self.target = target
        self.total = total
        self.done = 0
        self._progress = progress
        self._cancel = cancel

    def check(self) -> None:
        """Raise :class:`ReportCancelled` when cancel says stop."""
        if is_cancelled(self._cancel):
            raise ReportCancelled(f"{self.target}: report cancelled; no file written")

    def step(self, text: str) -> None:
        """One step done: report it, then honour a cancel request."""
        self.done += 1
        if self._progress is not None:
            self._progress(self.done, self.total, text)
        self.check()

    def finish(self, text: str) -> None:
        """The last step (the file is in place): report it; too late to cancel."""
        self.done = self.total
        if self._progress is not None:
            self._progress(self.done, self.total, text)


@contextlib.contextmanager
def atomic_file(target: Path) -> Iterator[Path]:
    """A temporary path beside ``target``, renamed over it when the block succeeds.

    On any exception (a cancel included) the temporary file is deleted and ``target``
    is left as it was.  The rename is ``os.replace``, atomic within one file system.
    """
    # Not tempfile.mkstemp: its files are private (mode 0600); a report is for sharing,
    # so the file is created with the user's ordinary permissions (umask).
    tmp = target.parent / f".{target.name}.{secrets.token_hex(6)}.part"
    try:
        tmp.touch(exist_ok=False)  # O_EXCL: never an existing file
    except OSError as exc:
        raise InputError(f"{target}: cannot write in {target.parent} "
                         f"({exc.strerror or exc})") from None
    try:
        yield tmp
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise
