"""The catalogue: one row per run in column datasets, a cache of the run files.

``catalogue.h5`` holds one 1-D dataset per column, all of the same length.  It holds
nothing that cannot be read again from the run files, so it can be deleted and rebuilt
at any time; trend queries and the asset tree read only this file.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, fields
from datetime import UTC, datetime
from pathlib import Path

import h5py
import numpy as np

from ..errors import ArchiveError, InputError
from .runfile import SUMMARY_VALUES
from .safety import commit
from .schema import (CREATED_BY, SCHEMA_VERSION, TMP_SUFFIX, iso_utc, now_utc, parse_time,
                     stored_version, text)

#: Text columns (stored as fixed-length UTF-8).
STRING_COLUMNS = ("run_id", "point", "path", "state", "quality")
#: Number columns (float64; NaN when unknown).  Times are seconds since 1970-01-01 UTC.
FLOAT_COLUMNS = ("taken_s", "imported_s", "rpm") + SUMMARY_VALUES + (
    "velocity_band_low_hz", "velocity_band_high_hz")
COLUMNS = STRING_COLUMNS + FLOAT_COLUMNS
#: Values that can be trended.
TREND_VALUES = ("rpm",) + SUMMARY_VALUES


@dataclass(frozen=True)
class CatalogueRow:
    """One run as the catalogue lists it (units as in the column names; NaN = unknown)."""

    run_id: str
    point: str
    path: str
    state: str
    quality: str
    taken_s: float
    imported_s: float
    rpm: float
    velocity_rms_mm_s: float
    acceleration_rms_g: float
    acceleration_peak_g: float
    displacement_pp_um: float
    crest_factor: float
    kurtosis: float
    skewness: float
    velocity_band_low_hz: float
    velocity_band_high_hz: float

    @property
    def taken(self) -> datetime:
        """When the run was taken, UTC."""
        return datetime.fromtimestamp(self.taken_s, UTC)

    def as_dict(self) -> dict:
        d = {k: getattr(self, k) for k in _ROW_FIELDS}
        d["taken"] = iso_utc(self.taken)
        d["imported_at"] = iso_utc(datetime.fromtimestamp(self.imported_s, UTC))
        for k, v in d.items():
            if isinstance(v, float) and math.isnan(v):
                d[k] = None
        return d


_ROW_FIELDS = tuple(f.name for f in fields(CatalogueRow))


def row_from_attrs(attrs: Mapping, summary: Mapping, quality: str, path: str) -> dict:
    """A catalogue row from a run's root and ``/summary`` attributes.

    The same function serves an import (with the attributes about to be written) and a
    rebuild (with the attributes read back), so both give identical rows.
    """
    band = np.asarray(summary.get("velocity_band_hz", [math.nan, math.nan]), dtype=float)
    row = {"run_id": text(attrs["run_id"]), "point": text(attrs["point"]), "path": path,
           "state": text(attrs.get("state", "")), "quality": quality,
           "taken_s": parse_time(text(attrs["taken"])).timestamp(),
           "imported_s": parse_time(text(attrs["imported_at"])).timestamp(),
           "rpm": float(attrs["rpm"]),
           "velocity_band_low_hz": float(band[0]), "velocity_band_high_hz": float(band[1])}
    for k in SUMMARY_VALUES:
        row[k] = float(summary.get(k, math.nan))
    return row


def _empty_columns() -> dict[str, np.ndarray]:
    cols = {k: np.zeros(0, dtype="S1") for k in STRING_COLUMNS}
    cols.update({k: np.zeros(0, dtype=np.float64) for k in FLOAT_COLUMNS})
    return cols


class Catalogue:
    """Columns of the run rows in memory (text columns as UTF-8 bytes)."""

    def __init__(self, columns: dict[str, np.ndarray] | None = None):
        self._cols = columns if columns is not None else _empty_columns()
        self._pending: list[dict] = []
        self._index: dict[str, int] | None = None

    # -- rows -----------------------------------------------------------------------
    def __len__(self) -> int:
        return int(self._cols["run_id"].size) + len(self._pending)

    @property
    def columns(self) -> dict[str, np.ndarray]:
        self._settle()
        return self._cols

    def append(self, row: Mapping) -> None:
        """Add one row (a mapping with every column)."""
        missing = [k for k in COLUMNS if k not in row]
        if missing:
            raise ArchiveError(f"catalogue row lacks {', '.join(missing)}")
        self._pending.append(dict(row))
        if self._index is not None:
            self._index[text(row["run_id"])] = len(self) - 1

    def extend(self, rows: Iterable[Mapping]) -> None:
        for r in rows:
            self.append(r)

    def _settle(self) -> None:
        if not self._pending:
            return
        new = {}
        for k in STRING_COLUMNS:
            added = np.array([str(r[k]).encode("utf-8") for r in self._pending])
            new[k] = np.concatenate([self._cols[k], added]) if self._cols[k].size else added
        for k in FLOAT_COLUMNS:
            added = np.array([float(r[k]) for r in self._pending], dtype=np.float64)
            new[k] = np.concatenate([self._cols[k], added])
        self._cols, self._pending = new, []

    def _idx(self) -> dict[str, int]:
        if self._index is None:
            ids = self.columns["run_id"]
            self._index = {v.decode("ascii"): i for i, v in enumerate(ids.tolist())}
        return self._index

    def has(self, run_id: str) -> bool:
        return run_id in self._idx()

    def run_ids(self) -> list[str]:
        return list(self._idx())

    def row(self, i: int) -> CatalogueRow:
        c = self.columns
        values = {k: c[k][i].decode("utf-8") for k in STRING_COLUMNS}
        values.update({k: float(c[k][i]) for k in FLOAT_COLUMNS})
        return CatalogueRow(**values)

    def get(self, run_id: str) -> CatalogueRow | None:
        i = self._idx().get(run_id)
        return None if i is None else self.row(i)

    def resolve(self, prefix: str) -> str:
        """The run id that is ``prefix`` or starts with it (at least 6 digits)."""
        if self.has(prefix):
            return prefix
        if len(prefix) >= 6:
            hits = [r for r in self._idx() if r.startswith(prefix)]
            if len(hits) == 1:
                return hits[0]
            if len(hits) > 1:
                raise InputError(f"run {prefix!r} is ambiguous: {', '.join(sorted(hits)[:5])}…")
        raise InputError(f"no run {prefix!r} in the archive")

    # -- queries ----------------------------------------------------------------------
    def select(self, *, point: str | None = None, since_s: float | None = None) -> np.ndarray:
        """Indices of the rows of ``point`` taken at or after ``since_s``, by time taken."""
        c = self.columns
        mask = np.ones(c["run_id"].size, dtype=bool)
        if point is not None:
            mask &= c["point"] == point.encode("utf-8")
        if since_s is not None:
            mask &= c["taken_s"] >= since_s
        idx = np.flatnonzero(mask)
        return idx[np.argsort(c["taken_s"][idx], kind="stable")]

    def rows(self, indices) -> list[CatalogueRow]:
        return [self.row(int(i)) for i in indices]

    def trend(self, point: str, value: str) -> tuple[np.ndarray, np.ndarray]:
        """Times taken (s since 1970 UTC) and values of one column for one point."""
        if value not in TREND_VALUES:
            raise InputError(f"cannot trend {value!r}; expected one of {', '.join(TREND_VALUES)}")
        idx = self.select(point=point)
        c = self.columns
        return c["taken_s"][idx].copy(), c[value][idx].copy()

    def latest_by_point(self) -> dict[str, CatalogueRow]:
        """The last run taken at each point."""
        c = self.columns
        if not c["run_id"].size:
            return {}
        order = np.lexsort((c["taken_s"], c["point"]))
        points = c["point"][order]
        last = np.flatnonzero(np.append(points[1:] != points[:-1], True))
        return {c["point"][order[i]].decode("utf-8"): self.row(int(order[i])) for i in last}

    # -- files --------------------------------------------------------------------------
    def write(self, path: Path) -> None:
        """Write the catalogue atomically (temporary file, fsync, rename)."""
        c = self.columns
        tmp = path.with_name(path.name + TMP_SUFFIX)
        with h5py.File(tmp, "w", locking=False) as f:
            f.attrs["schema_version"] = np.int64(SCHEMA_VERSION)
            f.attrs["created_by"] = CREATED_BY
            f.attrs["written_at"] = iso_utc(now_utc())
            f.attrs["n_rows"] = np.int64(c["run_id"].size)
            f.attrs["description"] = ("cache of the run files' summaries, one row per run; "
                                      "rebuilt from runs/ at any time")
            for k in STRING_COLUMNS:
                # A numpy dtype carrying h5py's UTF-8 tag, so no conversion is asked of HDF5.
                tagged = h5py.string_dtype("utf-8", max(1, c[k].dtype.itemsize))
                f.create_dataset(k, data=c[k].astype(tagged))
            for k in FLOAT_COLUMNS:
                f.create_dataset(k, data=c[k], dtype="<f8")
        commit(tmp, path)

    @classmethod
    def read(cls, path: Path) -> Catalogue:
        """Read ``catalogue.h5``; ArchiveError when it is damaged or incomplete."""
        try:
            f = h5py.File(path, "r", locking=False)
        except (OSError, ValueError) as exc:
            raise ArchiveError(f"{path}: cannot be opened as HDF5 ({exc})") from None
        with f:
            stored_version(f, str(path))
            missing = [k for k in COLUMNS if k not in f]
            if missing:
                raise ArchiveError(f"{path}: missing column(s) {', '.join(missing)}")
            try:
                cols = {k: np.asarray(f[k][()]) for k in COLUMNS}
            except OSError as exc:
                raise ArchiveError(f"{path}: columns cannot be read ({exc})") from None
        lengths = {v.shape for v in cols.values()}
        if len(lengths) != 1 or len(next(iter(lengths))) != 1:
            raise ArchiveError(f"{path}: columns have unequal lengths {sorted(lengths)}")
        for k in STRING_COLUMNS:
            if cols[k].dtype.kind != "S":
                cols[k] = np.array([text(v).encode("utf-8") for v in cols[k]],
                                   dtype="S") if cols[k].size else np.zeros(0, "S1")
        for k in FLOAT_COLUMNS:
            cols[k] = cols[k].astype(np.float64)
        return cls(cols)


def rows_equal(a: Mapping, b: Mapping) -> list[str]:
    """Names of the columns in which two rows differ (NaN equals NaN).

    ``state`` is left out: it is the alarm evaluation's (values.h5), not the run file's.
    """
    out = []
    for k in COLUMNS:
        if k == "state":
            continue
        x, y = a[k], b[k]
        if k in FLOAT_COLUMNS:
            if not (float(x) == float(y) or (math.isnan(float(x)) and math.isnan(float(y)))):
                out.append(k)
        elif text(x) != text(y):
            out.append(k)
    return out
