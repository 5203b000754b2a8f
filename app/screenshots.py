"""Render every view of the demo plant to PNG, for the README.

Run in a real window on a virtual screen (Debian's ``xvfb``)::

    xvfb-run -s "-screen 0 1600x1000x24" .venv/bin/python -m app.screenshots resources/screenshots

The demo archive is built into a temporary folder (about a minute), the main window is
shown at 1500 × 940, and each view is captured once its work has finished.  Settings go
to a temporary file, so the user's own preferences are not touched.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from PySide6.QtCore import QSettings, QStandardPaths
from PySide6.QtWidgets import QApplication
from pyqtgraph.util.garbage_collector import GarbageCollector

SHOTS = (
    # (file, tab, point, what the view shows)
    ("run-view.png", "Run", "Demo Works/P-102/pump DE H",
     "P-102's pump bearing in danger: spectrum, envelope with BPFO markers, findings"),
    ("trend-view.png", "Trend", "Demo Works/F-201/fan DE H",
     "F-201's growing fan imbalance: overall velocity with alert/danger lines and forecast"),
    ("runup-view.png", "Run-up", "Demo Works/M-501/mixer DE H",
     "M-501's run-up: speed profile, order spectrum, Campbell diagram, order cuts"),
    ("live-view.png", "Live", "Demo Works/P-101/pump DE H",
     "the simulated machine live: waveform, spectrum, scrolling waterfall"),
    ("setup-view.png", "Setup", "Demo Works/P-102/pump DE H",
     "the alarm plan editor: bands on the spectrum with alert and danger handles"),
)


def _settle(app: QApplication, ctx, seconds: float) -> None:
    """Process events for ``seconds`` and until no job runs (at most 60 s more)."""
    end = time.monotonic() + seconds
    limit = end + 60.0
    while time.monotonic() < end or (ctx.jobs.running() and time.monotonic() < limit):
        app.processEvents()
        time.sleep(0.01)


def render(out: Path, archive: Path | None = None, *, theme: str = "light") -> list[Path]:
    """Write the screenshots to ``out``; returns their paths."""
    from engine.demo_archive import build_demo_archive

    from .context import AppContext, Preferences
    from .main_window import MainWindow
    from .theme import apply_theme

    app = QApplication.instance() or QApplication(sys.argv[:1])
    garbage = GarbageCollector(interval=1.0)   # collect on the GUI thread only (app/main.py)
    QStandardPaths.setTestModeEnabled(True)
    tmp = Path(tempfile.mkdtemp(prefix="shaftwatch-shots-"))
    if archive is None:
        archive = build_demo_archive(tmp / "demo-works.shaftwatch")
    prefs = Preferences(QSettings(str(tmp / "prefs.ini"), QSettings.Format.IniFormat))
    prefs.set("view/theme", theme)
    ctx = AppContext(archive, prefs=prefs)
    apply_theme(app, ctx.palette)
    window = MainWindow(ctx)
    window.resize(1500, 940)
    window.show()
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for name, tab, point, _ in SHOTS:
        window.select_point(point)
        for i in range(window.tabs.count()):
            if window.tabs.tabText(i).replace("&", "") == tab:
                window.tabs.setCurrentIndex(i)
        _settle(app, ctx, 1.5)
        view = window.view(tab)
        if tab == "Live" and view is not None:
            view.start()
            _settle(app, ctx, 3.0)
        path = out / name
        window.grab().save(str(path))
        if tab == "Live" and view is not None:
            view.stop()
        written.append(path)
    window.close()
    ctx.close()
    garbage.timer.stop()
    return written


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(prog="python -m app.screenshots", description=__doc__,
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("out", type=Path, help="folder for the PNG files")
    p.add_argument("--archive", type=Path, help="an archive to show (default: a new demo)")
    p.add_argument("--theme", choices=("light", "dark"), default="light")
    args = p.parse_args(argv)
    for path in render(args.out, args.archive, theme=args.theme):
        print(path)
    return 0


if __name__ == "__main__":
    sys.exit(main())
