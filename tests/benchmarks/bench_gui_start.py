"""Desktop app: time from process start to a usable window on the demo archive, and the
time to switch from one point to the next.

Run as ``python -m tests.benchmarks.bench_gui_start [ARCHIVE]`` (default: the demo
archive in a temporary folder, built first — about a minute).  The app runs in a child
process (offscreen unless a display is set) with its own settings and data folders
(``XDG_CONFIG_HOME``, ``XDG_DATA_HOME`` in a temporary folder), so the user's settings
are never touched.

Targets: a usable window within 2.5 s of the process start; a point switch (click to
spectra drawn) within 150 ms.  The reference measured in the same run is a bare
PySide6 process that shows an empty QMainWindow.
"""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

START_TARGET_S = 2.5
SWITCH_TARGET_S = 0.150
_BARE = ("from PySide6.QtWidgets import QApplication, QMainWindow\n"
         "from PySide6.QtCore import QTimer\n"
         "app = QApplication([])\nw = QMainWindow()\nw.show()\n"
         "QTimer.singleShot(0, lambda: (print('ready', flush=True), app.quit()))\n"
         "app.exec()\n")


def _env(home: str) -> dict:
    """The child's environment: its own settings and data folders under ``home``, so
    that neither the user's settings nor the user's demo archive are used or changed."""
    env = dict(os.environ)
    if not env.get("DISPLAY") and not env.get("WAYLAND_DISPLAY"):
        env.setdefault("QT_QPA_PLATFORM", "offscreen")
    env["XDG_CONFIG_HOME"] = str(Path(home) / "config")
    env["XDG_DATA_HOME"] = str(Path(home) / "data")
    return env


def _time_to_ready(cmd: list[str], home: str) -> tuple[float, subprocess.Popen]:
    """Seconds from starting ``cmd`` to its first ``ready`` line, and the process."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, text=True, env=_env(home),
                            cwd=Path(__file__).resolve().parents[2])
    for line in proc.stdout:
        if line.startswith("ready"):
            return time.perf_counter() - t0, proc
    raise RuntimeError(f"{cmd[:3]}: the process ended before its window was ready "
                       f"(exit status {proc.wait()})")


def child(archive: str) -> None:
    """In the child process: start the app, report ``ready``, then time point switches."""
    from PySide6.QtCore import QTimer

    from app.main import create

    app, controller = create([archive])
    window = controller.window
    if window is None:
        raise SystemExit(f"{archive}: the archive did not open")

    def ready() -> None:
        print("ready", flush=True)
        QTimer.singleShot(0, lambda: switches(app, window))

    QTimer.singleShot(0, ready)
    app.exec()


def switches(app, window) -> None:
    view = window.view("Run")
    points = window.tree.points()
    drawn: list[str] = []
    view.computed.connect(lambda a: drawn.append(a.point))

    def switch(point: str) -> tuple[float, float]:
        drawn.clear()
        t0 = time.perf_counter()
        window.select_point(point)
        gui = time.perf_counter() - t0
        while point not in drawn:
            app.processEvents()
            time.sleep(0.0005)
        app.processEvents()          # the repaint of the new curves, markers and bands
        return gui, time.perf_counter() - t0

    first = [switch(p) for p in points]
    again = [switch(p) for p in points]
    print(json.dumps({"points": len(points), "first": first, "again": again}), flush=True)
    app.quit()


def main(argv: list[str]) -> int:
    if argv[:1] == ["--child"]:
        child(argv[1])
        return 0
    with tempfile.TemporaryDirectory(prefix="sw-bench-") as tmp:
        if argv:
            archive = argv[0]
        else:
            from engine.demo_archive import build_demo_archive

            archive = str(Path(tmp) / "demo-works.shaftwatch")
            print("building the demo archive …", flush=True)
            build_demo_archive(archive)
        bare, proc = _time_to_ready([sys.executable, "-c", _BARE], tmp)
        proc.wait()
        ours, proc = _time_to_ready([sys.executable, "-m", "tests.benchmarks.bench_gui_start",
                                     "--child", archive], tmp)
        out, _ = proc.communicate(timeout=600)
    result = json.loads(out.strip().splitlines()[-1])
    ok_start = ours <= START_TARGET_S
    print(f"start to usable window: ours {ours:.2f} s, bare PySide6 window {bare:.2f} s, "
          f"ratio {ours / bare:.1f} (target ≤ {START_TARGET_S:g} s) "
          f"{'met' if ok_start else 'NOT met'}")
    ok = ok_start
    for name, rows in (("first visit", result["first"]), ("second visit", result["again"])):
        gui = [g for g, _ in rows]
        full = [f for _, f in rows]
        tail = full[1:] if name == "first visit" else full   # the first includes warm-up
        met = max(tail) <= SWITCH_TARGET_S
        ok &= met
        print(f"point switch, {name} ({result['points']} points): click to spectra drawn "
              f"median {statistics.median(full) * 1e3:.0f} ms, max {max(tail) * 1e3:.0f} ms"
              + (f" (first, with warm-up, {full[0] * 1e3:.0f} ms)" if name == "first visit"
                 else "")
              + f"; GUI thread busy median {statistics.median(gui) * 1e3:.0f} ms "
              f"(target ≤ {SWITCH_TARGET_S * 1e3:.0f} ms) {'met' if met else 'NOT met'}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
