"""Fixtures of the app tests: the demo archive (built once per session), preferences in a
temporary file, a context and a main window over the demo archive, and a copy of part
of the demo archive with one run file damaged.

Fixtures
--------
demo_archive_path (session, from tests/conftest.py)
    Path of the demo archive built once per session; read it, never write to it
    (``demo_archive_copy`` is a writable copy).
prefs
    ``app.context.Preferences`` kept in a temporary INI file (the user's own settings
    are never touched).
app_context
    ``AppContext`` over ``demo_archive_path`` with ``prefs``; closed after the test.
main_window
    ``MainWindow`` over ``app_context``, shown (offscreen), 1400 × 900.
damaged_archive
    ``(path, point, run_id, run_file)``: a copy of the demo archive's plant, catalogue
    and derived files with only the runs of ``P102_DE`` (Demo Works/P-102/pump DE H),
    whose latest run file is overwritten with bytes that are not HDF5.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import shutil  # noqa: E402
from pathlib import Path  # noqa: E402

import pytest  # noqa: E402
from PySide6.QtCore import QSettings, QStandardPaths  # noqa: E402

from engine.archive import open_archive  # noqa: E402

QStandardPaths.setTestModeEnabled(True)  # nothing lands in the user's data folder


@pytest.fixture(autouse=True)
def collect_garbage_on_the_gui_thread():
    """Python's cyclic garbage collector must not run in a job's worker thread: it may
    delete Qt objects of an earlier test there, which deadlocks against the GUI thread
    (seen: a worker in ``QObject::~QObject`` waiting for the GIL while the GUI thread
    deleted widgets).  During a test it is off; it runs on this thread in between, as
    the app's own timer does (app/main.py)."""
    import gc

    gc.collect()
    gc.disable()
    yield
    gc.enable()
    gc.collect()

P102_DE = "Demo Works/P-102/pump DE H"


@pytest.fixture
def prefs(tmp_path):
    from app.context import Preferences

    return Preferences(QSettings(str(tmp_path / "prefs.ini"), QSettings.Format.IniFormat))


@pytest.fixture
def app_context(qapp, demo_archive_path, prefs):
    from app.context import AppContext

    ctx = AppContext(demo_archive_path, prefs=prefs)
    yield ctx
    ctx.close()


@pytest.fixture
def main_window(qtbot, app_context):
    from app.main_window import MainWindow

    w = MainWindow(app_context)
    qtbot.addWidget(w)
    w.resize(1400, 900)
    w.show()
    qtbot.waitExposed(w)
    yield w
    app_context.jobs.stop_all()


@pytest.fixture
def damaged_archive(demo_archive_path, tmp_path):
    """A partial copy of the demo archive whose latest P-102 pump DE H run is garbage."""
    with open_archive(demo_archive_path) as arc:
        rows = arc.runs(P102_DE)
    keep = Path(rows[-1].path).parent.name            # runs/<point key>
    dst = tmp_path / "damaged.shaftwatch"

    def skip(folder: str, names: list[str]) -> list[str]:
        if Path(folder).name == "runs" and Path(folder).parent == demo_archive_path:
            return [n for n in names if n != keep]
        return [n for n in names if n == "writer.lock"]

    shutil.copytree(demo_archive_path, dst, ignore=skip)
    run_file = dst / rows[-1].path
    run_file.write_bytes(b"this is not an HDF5 file" * 100)
    return dst, P102_DE, rows[-1].run_id, run_file
