"""A panel that shows something of one point, read and computed in a job.

The trend view's tabs (trend, waterfall, compare) share this behaviour: a new point, or
a change of what the panel shows, starts a job through ``AppContext.jobs``; the job of
an older request is cancelled and its result, should it still arrive, is dropped; a
hidden panel only notes that it is out of date and loads when it is shown, so that the
tabs the user does not look at cost nothing.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from typing import Any

from PySide6.QtCore import Signal
from PySide6.QtGui import QShowEvent
from PySide6.QtWidgets import QWidget

from . import dialogs
from .context import AppContext

log = logging.getLogger("shaftwatch.app")


class PointPanel(QWidget):
    """Base of the panels of the trend view.

    A subclass sets ``job_title`` and ``failure_text`` and defines
    ``job_fn() -> fn(progress, cancel)`` (what to compute for the current request, built
    on the GUI thread, run on a worker thread), ``draw(result)`` (show a result) and
    ``clear(text)`` (show nothing but a line of text).

    Signals
    -------
    shown(object)
        A result was drawn (tests wait for it).
    failed(str)
        The job failed; the message was shown in a dialog.
    message(str)
        A line for the status bar.
    """

    shown = Signal(object)
    failed = Signal(str)
    message = Signal(str)

    job_title = "Read the archive"
    failure_text = "The archive could not be read"

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.point: str | None = None
        self.run_id: str | None = None
        self.result: Any = None
        self.job = None
        self.error_box = None
        self._stale = False
        self._generation = 0

    # -- requests ---------------------------------------------------------------------
    def set_point(self, point: str | None, run_id: str | None) -> None:
        """Show ``point`` (and ``run_id`` where the panel uses one): now when visible,
        else as soon as the panel is shown."""
        self.point, self.run_id = point, run_id
        self.request()

    def request(self) -> None:
        """What the panel shows has changed: load it now when visible."""
        self._stale = True
        if self.isVisible():
            self.refresh()

    def holds(self, point: str) -> bool:
        """True when the panel shows ``point``, is reading it, or will when shown."""
        if self.point != point:
            return False
        running = self.job is not None and not self.job.done
        return self._stale or running or self.result is not None

    def showEvent(self, event: QShowEvent) -> None:
        super().showEvent(event)
        if self._stale:
            self.refresh()

    def refresh(self) -> None:
        """Start the job of the current request (cancelling an older one)."""
        self._stale = False
        self._generation += 1
        if self.job is not None and not self.job.done:
            self.job.cancel()
        if not self.point:
            self.result = None
            self.clear("Pick a point in the asset tree.")
            return
        try:
            fn = self.job_fn()
        except Exception as exc:  # noqa: BLE001 - shown as a dialog, details logged
            self._failed(self._generation, str(exc), repr(exc))
            return
        self.start(fn)

    def start(self, fn: Callable) -> None:
        """Run ``fn(progress, cancel)`` as this panel's job; its result goes to draw()."""
        gen = self._generation
        self.job = self.ctx.jobs.run(
            fn, title=self.job_title,
            on_done=lambda result, g=gen: self._done(g, result),
            on_error=lambda msg, details, g=gen: self._failed(g, msg, details),
            on_progress=lambda done, total, text, g=gen: self._progress(g, done, total, text))

    # -- results ----------------------------------------------------------------------
    def _done(self, generation: int, result: Any) -> None:
        if generation != self._generation:
            return                          # the user asked for something else meanwhile
        self.result = result
        try:
            self.draw(result)
        except Exception as exc:  # noqa: BLE001 - a drawing bug must not close the app
            log.exception("%s: drawing failed", type(self).__name__)
            self._failed(generation, f"{self.failure_text}: {type(exc).__name__}: {exc}",
                         repr(exc))
            return
        self.shown.emit(result)

    def _failed(self, generation: int, message: str, details: str) -> None:
        if generation != self._generation:
            return
        self.result = None
        self.clear(f"{self.failure_text}.")
        self.error_box = dialogs.show_error(self.window(), self.failure_text, message,
                                            advice=dialogs.advice_for(message),
                                            details=details)
        self.failed.emit(message)

    def _progress(self, generation: int, done: int, total: int, text: str) -> None:
        if generation == self._generation and text:
            self.message.emit(f"{self.job_title}: {text}")

    def redraw(self) -> None:
        """Draw the last result again (theme or unit system changed)."""
        if self.result is not None:
            self.draw(self.result)
