"""Small archives with results we choose, for the trend and alarm-command tests (not
collected as tests).

Runs are real (tiny recordings imported into the archive, so that every run id exists
in the catalogue); their analysis results are built here with the values and spectra a
test needs and kept with ``Archive.store_results``, so that the expected trends, zones
and states follow from numbers written in the test.
"""

from __future__ import annotations

import math
import warnings
import zlib
from datetime import UTC, datetime, timedelta

import numpy as np

from engine.archive import create_archive
from engine.errors import EngineWarning
from engine.recording import Channel, Recording
from engine.results import STANDARD_VALUES, RunResults
from engine.spectrum import Spectrum, SpectrumSettings, compute_spectrum

SITE = "Test Works"
START = datetime(2026, 1, 5, 8, 0, tzinfo=UTC)
WEEK_S = 7 * 86400.0


def week_time(week: int, minutes: int = 0) -> datetime:
    """Week 1 is START; one survey a week."""
    return START + timedelta(days=7 * (week - 1), minutes=minutes)


def tiny_recording(seed: int) -> Recording:
    """1024 samples of noise in g (enough for the import's quality checks)."""
    rng = np.random.default_rng(seed)
    return Recording(fs_hz=2560.0, channels=[Channel(rng.normal(0.0, 0.01, 1024), "g")],
                     source=f"tiny{seed}.wav")


def new_archive(path, machines: dict[str, tuple[int | None, str | None, list[str]]]):
    """An archive, open for writing, with machines ``tag: (iso group, foundation,
    [point names])`` (group/foundation None for a machine without them)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EngineWarning)
        arc = create_archive(path, plant_name=SITE)
    arc.add_site(SITE)
    for tag, (group, foundation, names) in machines.items():
        props = {"nominal_rpm": 1480.0}
        if group is not None:
            props.update(iso_group=group, foundation=foundation)
        arc.add_machine(SITE, tag, **props)
        for name in names:
            last = name.rsplit(" ", 1)[-1]
            arc.add_point(SITE, tag, name, direction=last if last in "HVAR" else "H",
                          unit="g", fmax_hz=1000.0, lines=800)
    return arc


def tone_spectrum(tones: dict[float, float], *, fs_hz: float = 2560.0, lines: int = 800,
                  fmax_hz: float = 1000.0, seconds: float = 4.0, seed: int = 0) -> Spectrum:
    """Velocity spectrum (mm/s RMS) of velocity sines ``{f_hz: v_rms_mm_s}`` with a
    little noise, computed by engine.spectrum (Hann, the point's lines)."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(fs_hz * seconds)) / fs_hz
    x = 1e-4 * rng.standard_normal(t.size)
    for f, v in tones.items():
        x = x + v * math.sqrt(2.0) * np.sin(2 * math.pi * f * t + rng.uniform(0, 2 * math.pi))
    return compute_spectrum(x, fs_hz, unit_in="mm/s", unit_out="mm/s",
                            settings=SpectrumSettings(fmax_hz=fmax_hz, lines=lines,
                                                      scale="rms"))


def line_spectrum(amplitudes: np.ndarray, *, resolution_hz: float = 1.25) -> Spectrum:
    """A spectrum whose lines hold exactly ``amplitudes`` (mm/s RMS)."""
    a = np.asarray(amplitudes, dtype=float)
    lines = a.size - 1
    return Spectrum(frequency_hz=np.arange(a.size) * resolution_hz, amplitude=a,
                    mean_square=a ** 2, unit="mm/s", scale="rms", window="hann",
                    fmax_hz=lines * resolution_hz, lines=lines, resolution_hz=resolution_hz,
                    enbw_hz=1.5 * resolution_hz, fs_hz=2.56 * lines * resolution_hz,
                    averages=1, frame_length=int(2.56 * lines), overlap=0.5,
                    averaging="linear")


def add_run(arc, point: str, week: int, *, values: dict | None = None, rpm: float = math.nan,
            spectrum: Spectrum | None = None, peaks: list | None = None, minutes: int = 0,
            quality: str = "ok") -> str:
    """Import a tiny run at ``point`` in ``week`` and keep results with these values
    (the standard values not given are NaN).  Returns the run id."""
    taken = week_time(week, minutes)
    seed = zlib.crc32(f"{point}|{week}|{minutes}".encode())
    rid = arc.import_recording(tiny_recording(seed), point, taken=taken,
                               source=f"{point.replace('/', '_')}-w{week}-{minutes}").run_id
    vals = dict.fromkeys(STANDARD_VALUES, math.nan)
    vals.update(values or {})
    arc.store_results([RunResults(run_id=rid, point=point, taken_s=taken.timestamp(), rpm=rpm,
                                  spectrum=spectrum, values=vals, labelled_peaks=peaks or [],
                                  quality=quality)])
    return rid
