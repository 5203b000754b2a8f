"""The app's log file: details of every error (tracebacks included) for whoever looks into
a problem, while the user sees a plain dialog.

The log rotates (1 MB, five old files kept) in the user's data folder
(``QStandardPaths.AppDataLocation``/logs/shaftwatch.log).
"""

from __future__ import annotations

import logging
import logging.handlers
import sys
import threading
from collections.abc import Callable
from pathlib import Path
from types import TracebackType

from PySide6.QtCore import QStandardPaths

LOGGER_NAME = "shaftwatch"
LOG_FILE = "shaftwatch.log"
MAX_BYTES = 1_000_000
BACKUPS = 5
_FORMAT = "%(asctime)s %(levelname)-7s %(name)s [%(threadName)s] %(message)s"


def data_folder() -> Path:
    """The user's data folder for Shaftwatch (created when missing).

    Needs the application's organisation and name set first (``app.main`` does it), so
    that the folder is ``…/Shaftwatch/Shaftwatch`` and not Python's.
    """
    folder = Path(QStandardPaths.writableLocation(
        QStandardPaths.StandardLocation.AppDataLocation))
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def setup_logging(folder: str | Path | None = None, *, level: int = logging.INFO) -> Path:
    """Send the ``shaftwatch`` loggers to a rotating file; return the file's path.

    Parameters
    ----------
    folder : path-like, optional
        Where the log goes; default ``data_folder()/logs``.
    level : int, keyword-only
        Lowest level written (logging.INFO by default).

    Calling it again with the same file adds no second handler.
    """
    folder = Path(folder) if folder is not None else data_folder() / "logs"
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / LOG_FILE
    logger = logging.getLogger(LOGGER_NAME)
    logger.setLevel(level)
    for h in logger.handlers:
        if isinstance(h, logging.handlers.RotatingFileHandler) \
                and Path(h.baseFilename) == path.resolve():
            return path
    handler = logging.handlers.RotatingFileHandler(path, maxBytes=MAX_BYTES,
                                                   backupCount=BACKUPS, encoding="utf-8")
    handler.setFormatter(logging.Formatter(_FORMAT))
    logger.addHandler(handler)
    return path


def log_path() -> Path | None:
    """The file the ``shaftwatch`` logger writes to, when :func:`setup_logging` ran."""
    for h in logging.getLogger(LOGGER_NAME).handlers:
        if isinstance(h, logging.handlers.RotatingFileHandler):
            return Path(h.baseFilename)
    return None


def install_excepthook(report: Callable[[str, str], None]) -> None:
    """Log any uncaught exception (GUI thread or other threads) and show it plainly.

    ``report(message, details)`` is called on the GUI thread's exceptions with a one-line
    message and the traceback text; it must not raise.
    """
    log = logging.getLogger(LOGGER_NAME + ".app")

    def hook(kind: type[BaseException], exc: BaseException, tb: TracebackType | None) -> None:
        if issubclass(kind, KeyboardInterrupt):
            sys.__excepthook__(kind, exc, tb)
            return
        log.error("uncaught exception", exc_info=(kind, exc, tb))
        import traceback

        details = "".join(traceback.format_exception(kind, exc, tb))
        report(f"{kind.__name__}: {exc}", details)

    def thread_hook(args: threading.ExceptHookArgs) -> None:
        log.error("uncaught exception in thread %s", getattr(args.thread, "name", "?"),
                  exc_info=(args.exc_type, args.exc_value, args.exc_traceback))

    sys.excepthook = hook
    threading.excepthook = thread_hook
