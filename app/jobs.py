"""Heavy work off the GUI thread: a job runs a plain function in a worker thread and
reports progress, its result or its error back to the GUI thread through Qt signals.

A job's function has the engine's long-work signature::

    fn(progress, cancel) -> result

where ``progress(done, total, text)`` may be called from the worker thread and
``cancel()`` returns True once the user asked to stop.  The GUI never blocks on a job.
"""

from __future__ import annotations

import logging
import threading
import traceback
from collections.abc import Callable
from typing import Any

from PySide6.QtCore import QObject, Qt, QThread, Signal

from engine.errors import EngineError

log = logging.getLogger("shaftwatch.app")


class Cancelled(EngineError):
    """The user stopped a job."""


class Job(QObject):
    """One piece of work on its own thread.

    Signals
    -------
    progress(int, int, str)
        Work done, work in all (0: unknown) and a line of text.
    finished(object)
        The function's result (on the GUI thread).
    failed(str, str)
        A plain message for the user and the details (traceback) for the log.
    cancelled()
        The function stopped because the user asked it to.
    """

    progress = Signal(int, int, str)
    finished = Signal(object)
    failed = Signal(str, str)
    cancelled = Signal()

    def __init__(self, fn: Callable[..., Any], title: str, parent: QObject | None = None):
        super().__init__(parent)
        self.title = title
        self._fn = fn
        self._stop = threading.Event()
        self._thread = QThread()
        self._thread.setObjectName(f"job: {title}")
        self._worker = _Worker(self)
        self._worker.moveToThread(self._thread)
        self._thread.started.connect(self._worker.run)
        # Direct: quit() is thread-safe and must not wait for the GUI thread, which may
        # be the one waiting for this thread to end.
        self._worker.done.connect(self._thread.quit, Qt.ConnectionType.DirectConnection)
        self.done = False

    def start(self) -> Job:
        self._thread.start()
        return self

    def cancel(self) -> None:
        """Ask the function to stop (it stops at its next check)."""
        self._stop.set()

    def is_cancelled(self) -> bool:
        return self._stop.is_set()

    def wait(self, ms: int = 30000) -> bool:
        """Block until the thread has ended (for tests and shutdown)."""
        return self._thread.wait(ms)

    def is_running(self) -> bool:
        return self._thread.isRunning()


class _Worker(QObject):
    done = Signal()

    def __init__(self, job: Job):
        super().__init__()
        self._job = job

    def run(self) -> None:
        job = self._job
        try:
            def progress(done: int, total: int, text: str = "") -> None:
                job.progress.emit(int(done), int(total), str(text))

            result = job._fn(progress, job.is_cancelled)
        except Cancelled:
            job.done = True
            job.cancelled.emit()
        except EngineError as exc:          # bad input, archive problems: the user's words
            job.done = True
            log.warning("%s failed: %s", job.title, exc)
            job.failed.emit(str(exc), traceback.format_exc())
        except Exception as exc:  # noqa: BLE001 - a bug must reach the log, not kill the app
            job.done = True
            log.exception("%s failed", job.title)
            job.failed.emit(f"{job.title} failed: {type(exc).__name__}: {exc}",
                            traceback.format_exc())
        else:
            job.done = True
            if job.is_cancelled():
                job.cancelled.emit()
            else:
                job.finished.emit(result)
        finally:
            self.done.emit()


class JobRunner(QObject):
    """Starts jobs and keeps them alive until they end.

    Signals
    -------
    busy(bool)
        True while any job runs (for the status bar).
    """

    busy = Signal(bool)

    def __init__(self, parent: QObject | None = None):
        super().__init__(parent)
        self._jobs: list[Job] = []

    def run(self, fn: Callable[..., Any], *, title: str,
            on_done: Callable[[Any], None] | None = None,
            on_error: Callable[[str, str], None] | None = None,
            on_progress: Callable[[int, int, str], None] | None = None,
            on_cancelled: Callable[[], None] | None = None) -> Job:
        """Run ``fn(progress, cancel)`` on a worker thread; callbacks run on the GUI thread."""
        job = Job(fn, title, self)
        if on_done:
            job.finished.connect(on_done)
        if on_error:
            job.failed.connect(on_error)
        if on_progress:
            job.progress.connect(on_progress)
        if on_cancelled:
            job.cancelled.connect(on_cancelled)
        job.finished.connect(lambda *_: self._forget(job))
        job.failed.connect(lambda *_: self._forget(job))
        job.cancelled.connect(lambda: self._forget(job))
        self._jobs.append(job)
        self.busy.emit(True)
        return job.start()

    def _forget(self, job: Job) -> None:
        job.wait(5000)
        if job in self._jobs:
            self._jobs.remove(job)
        self.busy.emit(bool(self._jobs))

    def running(self) -> list[Job]:
        return [j for j in self._jobs if not j.done]

    def stop_all(self, ms: int = 10000) -> None:
        """Cancel every job and wait for the threads (on window close)."""
        for job in list(self._jobs):
            job.cancel()
        for job in list(self._jobs):
            job.wait(ms)
