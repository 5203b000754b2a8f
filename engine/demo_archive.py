"""Build the archive of the invented Demo Works plant (PRODUCT.md, "Demo plant").

Every machine and point of :data:`engine.demo_plant.PLANT`, sixteen weekly surveys of
simulated recordings with their developing faults, and M-501's run-up with a
tachometer channel — deterministic, so every build is the same archive.
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

from .archive import create_archive
from .demo_plant import PLANT, demo_recording
from .errors import EngineError

#: Analysis settings stored on every demo point (the trade's usual survey setup).
POINT_SETTINGS = {"fmax_hz": 1000.0, "lines": 1600, "window": "hann", "overlap": 0.5}

DEFAULT_NAME = "demo-works.shaftwatch"


class Cancelled(EngineError):
    """The build was cancelled; the partial archive is removed."""


def demo_runs() -> list[tuple[str, str, int]]:
    """(machine tag, point name, week) of every run in the demo archive, in time order."""
    return [(m.tag, p.name, week)
            for week in range(1, PLANT.weeks + 1)
            for m in PLANT.machines for p in m.points]


def build_demo_archive(
    path: str | Path,
    *,
    duration_s: float = 2.0,
    progress: Callable[[int, int, str], None] | None = None,
    cancelled: Callable[[], bool] | None = None,
) -> Path:
    """Create the demo archive at ``path`` (which must not exist yet).

    Parameters
    ----------
    path : str or Path
    duration_s : float, keyword-only
        Length of each steady-speed run, s (the run-up keeps its own 10 s).
    progress : callable(done, total, label), optional
    cancelled : callable() -> bool, optional
        Polled between runs; when it returns True the build stops and the partial
        archive is removed.

    Returns
    -------
    Path of the archive.
    """
    path = Path(path)
    runs = demo_runs()
    site = PLANT.site
    try:
        with create_archive(path, plant_name=site, command="build demo archive") as arc:
            _add_assets(arc)
            for i, (tag, point, week) in enumerate(runs):
                if cancelled is not None and cancelled():
                    raise Cancelled(f"{path}: demo build cancelled after {i} of "
                                    f"{len(runs)} runs; nothing was kept")
                rec = demo_recording(tag, point, week, duration_s=duration_s)
                arc.import_recording(rec, f"{site}/{tag}/{point}", taken=rec.taken,
                                     rpm=rec.rpm, notes=f"demo survey week {week}",
                                     source=f"demo-{tag}-{point.replace(' ', '-')}"
                                            f"-week{week:02d}",
                                     taken_source="demo plant schedule")
                if progress is not None:
                    progress(i + 1, len(runs), f"{tag} {point} week {week}")
    except Cancelled:
        shutil.rmtree(path, ignore_errors=True)
        raise
    return path


def _add_assets(arc) -> None:
    site = PLANT.site
    arc.add_site(site, description="Invented municipal water-treatment works (demo data)")
    for m in PLANT.machines:
        arc.add_machine(site, m.tag, name=m.name, description=m.description,
                        nominal_rpm=m.nominal_rpm, power_kw=m.power_kw,
                        iso_group=m.iso_group, foundation=m.foundation,
                        ratios={name: ratio for name, ratio in m.shafts})
        for p in m.points:
            arc.add_point(site, m.tag, p.name, location=p.location,
                          direction=p.direction, unit="g", **POINT_SETTINGS)
