"""Small builders shared by the archive tests (not collected as tests)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

from engine.archive import create_archive
from engine.recording import Channel, Recording

FS_HZ = 5120.0
POINT = "Works/P-101/motor DE H"
START = datetime(2026, 8, 3, 8, 0, tzinfo=UTC)


def recording(seed: int, *, n: int = 4096, channels: int = 1, fs_hz: float = FS_HZ,
              tone_hz: float = 100.0, amplitude_g: float = 0.5) -> Recording:
    """A tone in noise, in g, different for every seed."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / fs_hz
    chans = [Channel(amplitude_g * np.sin(2 * np.pi * tone_hz * t + c)
                     + 0.01 * rng.standard_normal(n), "g", name=f"ch{c + 1}", direction="H")
             for c in range(channels)]
    return Recording(fs_hz=fs_hz, channels=chans, source=f"seed{seed}.wav")


def new_archive(path: Path, *, points: int = 1):
    """An archive with one site, machine P-101 and ``points`` points, open for writing."""
    arc = create_archive(path, plant_name="Test Works")
    arc.add_site("Works")
    arc.add_machine("Works", "P-101", name="Raw-water pump 1", nominal_rpm=1480.0,
                    power_kw=75.0, iso_group=2, foundation="rigid",
                    ratios={"motor": 1.0, "pump": 1.0})
    names = ["motor DE H", "pump DE H", "pump DE V", "pump NDE A"]
    for name in names[:points]:
        arc.add_point("Works", "P-101", name, location=name.rsplit(" ", 1)[0],
                      direction=name.rsplit(" ", 1)[1], unit="g")
    return arc


def taken(week: int) -> datetime:
    return START + timedelta(days=7 * week)
