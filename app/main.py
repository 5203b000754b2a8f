"""``shaftwatch-gui [ARCHIVE]``: open a plant archive in the desktop app.

Without ARCHIVE the last archive opened is shown again when it still exists, else the
demo plant's archive (built on first use into the user's data folder, in the
background, with a progress dialog that can cancel it).
"""

from __future__ import annotations

import argparse
import logging
import shutil
import sys
import time
from pathlib import Path

from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QIcon
from PySide6.QtWidgets import QApplication, QFileDialog
from pyqtgraph.util.garbage_collector import GarbageCollector

from engine.archive import open_archive
from engine.demo_archive import DEFAULT_NAME, build_demo_archive
from engine.demo_archive import Cancelled as DemoCancelled
from engine.errors import EngineError

from . import dialogs
from .context import APPLICATION, ORGANISATION, RESOURCES, AppContext, Palette, Preferences
from .jobs import Cancelled, JobRunner
from .logsetup import data_folder, install_excepthook, setup_logging
from .main_window import MainWindow
from .theme import apply_theme

log = logging.getLogger("shaftwatch.app")


def demo_archive_location() -> Path:
    """Where the demo archive lives: the user's data folder / demo-works.shaftwatch."""
    return data_folder() / DEFAULT_NAME


def is_archive(path: str | Path) -> bool:
    """True when ``path`` is a folder that opens as an archive."""
    p = Path(path)
    if not p.is_dir():
        return False
    try:
        open_archive(p, mode="r").close()
    except (EngineError, OSError):
        return False
    return True


def build_demo(target: Path, progress, cancel) -> Path:
    """Build the demo archive at ``target`` (a job function).

    The archive is built beside ``target`` and renamed into place when complete, so an
    interrupted build never leaves a half archive under the real name; a folder already
    at ``target`` that does not open is moved aside (never deleted).
    """
    building = target.with_name(target.name + ".building")
    if building.exists():
        shutil.rmtree(building)
    try:
        build_demo_archive(building, progress=progress, cancelled=cancel)
    except DemoCancelled:
        raise Cancelled("the demo build was cancelled") from None
    if target.exists():
        target.rename(target.with_name(f"{target.name}.unreadable-{int(time.time())}"))
    building.rename(target)
    return target


class Shaftwatch(QObject):
    """The application: opens archives in windows and builds the demo archive.

    Signals
    -------
    ready(object)
        A main window is shown and usable (the window).
    """

    ready = Signal(object)

    def __init__(self, app: QApplication, prefs: Preferences):
        super().__init__(app)
        self.app = app
        self.prefs = prefs
        self.window: MainWindow | None = None
        self.jobs = JobRunner(self)
        self.demo_job = None
        self.progress: dialogs.JobProgressDialog | None = None
        app.aboutToQuit.connect(self.jobs.stop_all)   # never leave a job's thread running
        # Python's cyclic garbage collector runs on the GUI thread only (a timer): in a
        # job's worker thread it could delete Qt objects, which deadlocks or crashes Qt.
        self.garbage = GarbageCollector(interval=1.0)

    def start(self, archive: str | None) -> None:
        """Open ``archive``, else the last archive, else the demo archive."""
        if archive:
            self.open(archive)
            return
        last = self.prefs.last_archive
        if last and is_archive(last):
            self.open(last)
            return
        demo = demo_archive_location()
        if is_archive(demo):
            self.open(demo)
        else:
            self.build_demo(demo)

    def open(self, path: str | Path) -> MainWindow | None:
        """Show the archive at ``path`` in a new window (closing the previous one)."""
        path = Path(path)
        try:
            open_archive(path, mode="r").close()
        except (EngineError, OSError) as exc:
            dialogs.show_error(self.window, "The archive could not be opened", str(exc),
                               path=str(path), advice=dialogs.advice_for(str(exc)))
            return None
        old = self.window
        if old is not None:
            old.close()
        ctx = AppContext(path, prefs=self.prefs)
        window = MainWindow(ctx)
        window.open_requested.connect(self.open)
        self.window = window
        self.prefs.set("archive/last", str(path))
        window.show()
        log.info("opened %s", path)
        self.ready.emit(window)
        return window

    def build_demo(self, target: Path) -> None:
        """Build the demo archive in a job with a progress dialog, then open it."""
        job = self.jobs.run(lambda progress, cancel: build_demo(target, progress, cancel),
                            title="Build the demo archive", on_done=self.open,
                            on_error=self._demo_failed, on_cancelled=self._demo_cancelled)
        self.demo_job = job
        self.progress = dialogs.JobProgressDialog(
            job, "Building the demo archive of the invented Demo Works plant "
                 "(first start only)…", None)
        self.progress.show()

    def _demo_failed(self, message: str, details: str) -> None:
        dialogs.show_error(None, "The demo archive could not be built", message,
                           advice="Open an archive of your own with File ▸ Open archive, or "
                                  "start again to retry.", details=details)
        self._ask_for_archive()

    def _demo_cancelled(self) -> None:
        self._ask_for_archive()

    def _ask_for_archive(self) -> None:
        path = QFileDialog.getExistingDirectory(None, "Open a Shaftwatch archive",
                                                str(Path.home()))
        if path:
            self.open(path)
        elif self.window is None:
            self.app.quit()


def parse_args(argv: list[str]) -> argparse.Namespace:
    p = argparse.ArgumentParser(prog="shaftwatch-gui",
                                description="Shaftwatch desktop app: open a plant archive.")
    p.add_argument("archive", nargs="?", help="archive folder (default: the last one "
                                              "opened, else the demo plant)")
    p.add_argument("--theme", choices=("light", "dark"), help="colour theme (remembered)")
    p.add_argument("--units", choices=("SI", "US"), help="unit system (remembered)")
    return p.parse_args(argv)


def create(argv: list[str] | None = None) -> tuple[QApplication, Shaftwatch]:
    """Build the application and start opening an archive (the event loop is not run)."""
    argv = list(sys.argv[1:] if argv is None else argv)
    args = parse_args(argv)
    app = QApplication.instance() or QApplication([sys.argv[0]])
    app.setOrganizationName(ORGANISATION)
    app.setApplicationName(APPLICATION)
    app.setApplicationDisplayName("Shaftwatch")
    app.setWindowIcon(QIcon(str(RESOURCES / "icons" / "shaftwatch.svg")))
    setup_logging()
    install_excepthook(lambda message, details: dialogs.show_error(
        None, "Something went wrong", message,
        advice="Save your work if you can; the details are in the log for a report.",
        details=details))
    prefs = Preferences()
    if args.theme:
        prefs.set("view/theme", args.theme)
    if args.units:
        prefs.set("view/units", args.units)
    apply_theme(app, Palette(prefs.theme))
    controller = Shaftwatch(app, prefs)
    controller.start(args.archive)
    return app, controller


def main(argv: list[str] | None = None) -> int:
    """Entry point of ``shaftwatch-gui``."""
    app, _controller = create(argv)
    return app.exec()


if __name__ == "__main__":
    sys.exit(main())
