"""Derived data: each run's analysis results, the value table and the event log.

``results/<point key>/<run id>.h5``
    One file per run, written by the analysis (on import, or by ``engine.batch``):
    the velocity and envelope spectra, the named values, labelled peaks and findings.
    Unlike a run file it may be replaced (reprocessing with new settings), always
    atomically (temporary name, fsync, rename).
``values.h5``
    One row per analysed run: run id, point, time taken, quality, every value as a
    float64 column, and the alarm state, zone and worst band of the plan in force.
    Trends, the asset tree's states and the alarm evaluation read only this table.
    Values are rebuilt from the results files at any time; states by evaluation.
``events.h5``
    Every change of a point's alarm state, with the run, the band and the value, and
    the user's acknowledgement.

The layout of each file is in docs/archive-schema.md.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import fields
from pathlib import Path

import h5py
import numpy as np

from ..errors import ArchiveError
from ..results import RunResults
from .safety import commit
from .schema import CREATED_BY, SCHEMA_VERSION, TMP_SUFFIX, iso_utc, now_utc

RESULTS_DIR, VALUES_FILE, EVENTS_FILE = "results", "values.h5", "events.h5"
#: Text columns of the value table; every other column is a float64 value.
TEXT_COLUMNS = ("run_id", "point", "quality", "state", "zone", "worst_band", "plan_digest")
EVENT_TEXT = ("point", "run_id", "band", "previous", "state", "acknowledged_by", "note")
EVENT_FLOAT = ("time_s", "value", "level", "acknowledged_at")
_NO_ROWS = np.zeros(0, dtype=np.intp)
_SPECTRUM_ATTRS = ("unit", "scale", "window", "fmax_hz", "lines", "resolution_hz",
                   "enbw_hz", "fs_hz", "averages", "frame_length", "overlap", "averaging")


# -- one run's results file --------------------------------------------------------------
def _put_spectrum(f: h5py.File, name: str, s) -> None:
    d = f.create_dataset(name, data=s.amplitude.astype(np.float32), compression="gzip",
                         shuffle=True)
    for k in _SPECTRUM_ATTRS:
        v = getattr(s, k)
        d.attrs[k] = v if isinstance(v, str) else float(v)


def _get_spectrum(f: h5py.File, name: str):
    """The ``engine.spectrum.Spectrum`` stored as ``name``, or None."""
    d = f.get(name)
    if d is None:
        return None
    from ..spectrum import Spectrum  # scipy.signal only when a spectrum is read
    a = d.attrs
    amp = np.asarray(d[()], dtype=np.float64)
    scale = str(a["scale"])
    to_rms = {"rms": 1.0, "peak": 1.0 / math.sqrt(2.0), "pp": 1.0 / (2.0 * math.sqrt(2.0))}
    ms = (amp * to_rms.get(scale, 1.0)) ** 2
    n = amp.size
    return Spectrum(frequency_hz=np.arange(n) * float(a["resolution_hz"]), amplitude=amp,
                    mean_square=ms, unit=str(a["unit"]), scale=scale, window=str(a["window"]),
                    fmax_hz=float(a["fmax_hz"]), lines=int(a["lines"]),
                    resolution_hz=float(a["resolution_hz"]), enbw_hz=float(a["enbw_hz"]),
                    fs_hz=float(a["fs_hz"]), averages=int(a["averages"]),
                    frame_length=int(a["frame_length"]), overlap=float(a["overlap"]),
                    averaging=str(a["averaging"]))


def write_results_file(path: Path, r: RunResults) -> None:
    """Write one run's results atomically to ``path``."""
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + TMP_SUFFIX)
    with h5py.File(tmp, "w", locking=False) as f:
        f.attrs["schema_version"] = np.int64(SCHEMA_VERSION)
        f.attrs["created_by"] = CREATED_BY
        f.attrs["computed_at"] = iso_utc(now_utc())
        f.attrs["run_id"], f.attrs["point"] = r.run_id, r.point
        f.attrs["taken_s"], f.attrs["rpm"] = float(r.taken_s), float(r.rpm)
        f.attrs["quality"], f.attrs["plan_digest"] = r.quality, r.plan_digest
        f.attrs["settings_json"] = json.dumps(r.settings, sort_keys=True)
        f.attrs["values_json"] = json.dumps(
            {k: (None if math.isnan(v) else float(v)) for k, v in r.values.items()})
        f.attrs["peaks_json"] = json.dumps(r.labelled_peaks)
        f.attrs["envelope_peaks_json"] = json.dumps(r.envelope_peaks)
        f.attrs["findings_json"] = json.dumps(r.findings)
        f.attrs["envelope_band_hz"] = (np.array(r.envelope_band_hz, dtype=np.float64)
                                       if r.envelope_band_hz else np.array([np.nan, np.nan]))
        if r.spectrum is not None:
            _put_spectrum(f, "spectrum", r.spectrum)
        if r.envelope is not None:
            _put_spectrum(f, "envelope", r.envelope)
    commit(tmp, path)


def read_results_file(path: Path) -> RunResults:
    """One run's results; ArchiveError naming the file when it is damaged."""
    try:
        with h5py.File(path, "r", locking=False) as f:
            a = f.attrs
            band = np.asarray(a.get("envelope_band_hz", [np.nan, np.nan]), dtype=float)
            values = {k: (math.nan if v is None else float(v))
                      for k, v in json.loads(a["values_json"]).items()}
            return RunResults(
                run_id=str(a["run_id"]), point=str(a["point"]), taken_s=float(a["taken_s"]),
                rpm=float(a["rpm"]), settings=json.loads(a["settings_json"]),
                spectrum=_get_spectrum(f, "spectrum"), envelope=_get_spectrum(f, "envelope"),
                envelope_band_hz=None if np.isnan(band).any() else (float(band[0]),
                                                                    float(band[1])),
                values=values, labelled_peaks=json.loads(a["peaks_json"]),
                envelope_peaks=json.loads(a["envelope_peaks_json"]),
                findings=json.loads(a["findings_json"]), quality=str(a["quality"]),
                plan_digest=str(a["plan_digest"]))
    except (OSError, KeyError, ValueError) as exc:
        raise ArchiveError(f"{path}: results file cannot be read ({exc})") from None


# -- the value table ---------------------------------------------------------------------
class ValueTable:
    """Rows of analysed runs as columns in memory (text as Python str objects)."""

    def __init__(self):
        self.cols: dict[str, np.ndarray] = {k: np.zeros(0, dtype=object) for k in TEXT_COLUMNS}
        self.cols["taken_s"] = np.zeros(0)
        self._index: dict[str, int] = {}
        self._by_point: dict[str, np.ndarray] | None = None

    def __len__(self) -> int:
        return int(self.cols["run_id"].size)

    def value_names(self) -> list[str]:
        return [k for k in self.cols if k not in TEXT_COLUMNS and k != "taken_s"]

    def _reindex(self) -> None:
        self._index = {rid: i for i, rid in enumerate(self.cols["run_id"])}
        self._by_point = None

    def index(self, run_id: str) -> int | None:
        return self._index.get(run_id)

    def upsert(self, rows: list[RunResults]) -> None:
        """Add or replace the rows of ``rows`` (states are cleared for replaced rows)."""
        if not rows:
            return
        n_old = len(self)
        new_ids = [r.run_id for r in rows if r.run_id not in self._index]
        n = n_old + len(dict.fromkeys(new_ids))
        names = set(self.value_names())
        for r in rows:
            names.update(r.values)
        grown: dict[str, np.ndarray] = {}
        for k in TEXT_COLUMNS:
            col = np.empty(n, dtype=object)
            col[:n_old] = self.cols[k]
            col[n_old:] = ""
            grown[k] = col
        for k in ["taken_s", *sorted(names)]:
            col = np.full(n, np.nan)
            if k in self.cols:
                col[:n_old] = self.cols[k]
            grown[k] = col
        self.cols = grown
        self._by_point = None
        nxt = n_old
        for r in rows:
            i = self._index.get(r.run_id)
            if i is None:
                i = self._index[r.run_id] = nxt
                nxt += 1
            self.cols["run_id"][i], self.cols["point"][i] = r.run_id, r.point
            self.cols["quality"][i], self.cols["plan_digest"][i] = r.quality, r.plan_digest
            self.cols["state"][i] = self.cols["zone"][i] = self.cols["worst_band"][i] = ""
            self.cols["taken_s"][i] = r.taken_s
            for k in names:
                if k not in ("taken_s",):
                    self.cols[k][i] = r.values.get(k, math.nan)

    def rows_of(self, point: str) -> np.ndarray:
        """Indices of ``point``'s rows in time order (equal times in row order)."""
        return self._groups().get(point, _NO_ROWS)

    def _groups(self) -> dict[str, np.ndarray]:
        """Row indices of every point, built once per change of the rows (a scan of the
        whole table per point would cost more than the evaluation it serves)."""
        if self._by_point is None:
            pts, taken = self.cols["point"], self.cols["taken_s"]
            groups: dict[str, np.ndarray] = {}
            if pts.size:
                names, inverse = np.unique(pts.astype(str), return_inverse=True)
                order = np.lexsort((taken, inverse))          # stable: ties keep row order
                ends = np.cumsum(np.bincount(inverse, minlength=names.size))
                starts = np.concatenate(([0], ends[:-1]))
                groups = {str(n): order[a:b] for n, a, b in zip(names, starts, ends)}
            self._by_point = groups
        return self._by_point

    def write(self, path: Path) -> None:
        tmp = path.with_name(path.name + TMP_SUFFIX)
        with h5py.File(tmp, "w", locking=False) as f:
            f.attrs["schema_version"] = np.int64(SCHEMA_VERSION)
            f.attrs["created_by"] = CREATED_BY
            f.attrs["written_at"] = iso_utc(now_utc())
            f.attrs["description"] = ("values of every analysed run and its alarm state; "
                                      "values rebuilt from results/, states by evaluation")
            sdt = h5py.string_dtype("utf-8")
            for k, col in self.cols.items():
                if k in TEXT_COLUMNS:
                    f.create_dataset(k, data=np.asarray(col, dtype=object), dtype=sdt)
                else:
                    f.create_dataset(k, data=col, dtype="<f8")
        commit(tmp, path)

    @classmethod
    def read(cls, path: Path) -> ValueTable:
        t = cls()
        try:
            with h5py.File(path, "r", locking=False) as f:
                cols = {}
                for k in f:
                    raw = f[k][()]
                    if k in TEXT_COLUMNS:
                        cols[k] = np.array([v.decode("utf-8") if isinstance(v, bytes) else str(v)
                                            for v in raw], dtype=object)
                    else:
                        cols[k] = np.asarray(raw, dtype=np.float64)
        except (OSError, ValueError) as exc:
            raise ArchiveError(f"{path}: cannot be read ({exc})") from None
        missing = [k for k in (*TEXT_COLUMNS, "taken_s") if k not in cols]
        if missing or len({c.size for c in cols.values()}) != 1:
            raise ArchiveError(f"{path}: damaged value table (missing or unequal columns)")
        t.cols = cols
        t._reindex()
        return t


# -- the event log -----------------------------------------------------------------------
def write_events(path: Path, events: list) -> None:
    tmp = path.with_name(path.name + TMP_SUFFIX)
    with h5py.File(tmp, "w", locking=False) as f:
        f.attrs["schema_version"] = np.int64(SCHEMA_VERSION)
        f.attrs["created_by"] = CREATED_BY
        sdt = h5py.string_dtype("utf-8")
        for k in EVENT_TEXT:
            f.create_dataset(k, data=np.array([getattr(e, k) for e in events], dtype=object),
                             dtype=sdt)
        for k in EVENT_FLOAT:
            f.create_dataset(k, data=np.array(
                [math.nan if getattr(e, k) is None else getattr(e, k) for e in events],
                dtype=np.float64))
    commit(tmp, path)


def read_events(path: Path) -> list:
    from ..alarms.evaluate import Event

    if not path.exists():
        return []
    try:
        with h5py.File(path, "r", locking=False) as f:
            cols = {k: f[k][()] for k in (*EVENT_TEXT, *EVENT_FLOAT)}
    except (OSError, KeyError) as exc:
        raise ArchiveError(f"{path}: event log cannot be read ({exc})") from None
    names = {f.name for f in fields(Event)}
    out = []
    for i in range(len(cols["point"])):
        kw = {k: (cols[k][i].decode("utf-8") if isinstance(cols[k][i], bytes) else str(cols[k][i]))
              for k in EVENT_TEXT if k in names}
        kw.update({k: float(cols[k][i]) for k in EVENT_FLOAT if k in names})
        if math.isnan(kw.get("level", 0.0)):
            kw["level"] = None
        out.append(Event(**kw))
    return out


def results_path(archive: Path, point_key: str, run_id: str) -> Path:
    return archive / RESULTS_DIR / point_key / f"{run_id}.h5"


def scan_results(archive: Path) -> list[Path]:
    """Every results file on disk (temporaries left out)."""
    root = archive / RESULTS_DIR
    if not root.is_dir():
        return []
    return sorted(Path(d) / n for d, _, names in os.walk(root) for n in names
                  if n.endswith(".h5"))
