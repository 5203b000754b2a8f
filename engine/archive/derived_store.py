"""The archive's derived data as ``Archive`` methods (mixed into ``Archive``).

Results files, the value table and the event log are described in
:mod:`engine.archive.derived`.  A reader loads the value table on first use; a writer
keeps changes in memory and writes them with the catalogue (:meth:`Archive.flush`).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np

from ..errors import ArchiveError, InputError
from ..results import RunResults
from .derived import (EVENTS_FILE, VALUES_FILE, ValueTable, read_events, read_results_file,
                      results_path, scan_results, write_events, write_results_file)

#: A point whose latest run is this much older than the archive's newest run is
#: "no data" (common practice: a monthly route missed once; documented default).
NO_DATA_AFTER_DAYS = 45.0
_DAY = 86400.0


class DerivedStore:
    """Results, values, states and events of an archive."""

    _vtable: ValueTable | None = None
    _vdirty: bool = False
    _events_cache: list | None = None
    _edirty: bool = False

    # -- loading ------------------------------------------------------------------------
    def _values_table(self) -> ValueTable:
        if self._vtable is None:
            path = self.path / VALUES_FILE
            try:
                self._vtable = ValueTable.read(path) if path.exists() else None
            except ArchiveError as exc:
                self._notice(f"{exc}; the value table is rebuilt from the results files")
                self._vtable = None
            if self._vtable is None:
                self._vtable = self._rebuild_values()
        return self._vtable

    def _rebuild_values(self) -> ValueTable:
        t = ValueTable()
        rows = []
        for p in scan_results(self.path):
            try:
                rows.append(read_results_file(p))
            except ArchiveError as exc:
                self._notice(str(exc))
        t.upsert(rows)
        if rows:
            self._vdirty = self.mode == "w"
        return t

    def _reload_derived(self) -> None:
        self._vtable = None
        self._events_cache = None
        self._vdirty = self._edirty = False

    def _flush_derived(self) -> None:
        if self._vdirty and self._vtable is not None:
            self._vtable.write(self.path / VALUES_FILE)
            self._vdirty = False
        if self._edirty and self._events_cache is not None:
            write_events(self.path / EVENTS_FILE, self._events_cache)
            self._edirty = False

    # -- results ------------------------------------------------------------------------
    def results_file(self, run_id: str) -> Path:
        rid = self.resolve_run(run_id)
        row = self._catalogue.get(rid)
        key = Path(row.path).parent.name
        return results_path(self.path, key, rid)

    def results(self, run_id: str) -> RunResults | None:
        """The run's analysis results with its alarm state, or None when not analysed."""
        path = self.results_file(run_id)
        if not path.exists():
            return None
        r = read_results_file(path)
        t = self._values_table()
        i = t.index(r.run_id)
        if i is not None:
            r = replace(r, state=t.cols["state"][i], zone=t.cols["zone"][i])
        plan = self.plan(r.point)
        if plan is not None:
            from ..alarms.evaluate import evaluate_run
            from ..results import band_value_name

            values = {b.name: r.value(band_value_name(b.name)) for b in plan.bands}
            rs = evaluate_run(plan, values, quality=r.quality)
            r.bands = [dict(band=b.band, value=b.value, state=b.state, level=b.level,
                            excess=b.excess) for b in rs.bands]
        return r

    def store_results(self, rows: list[RunResults], *, written: bool = False) -> None:
        """Keep the results of analysed runs: write each file (unless ``written``: a
        worker already did) and update the value table."""
        self._writable()
        for r in rows:
            self.resolve_run(r.run_id)
            if not written:
                write_results_file(self.results_file(r.run_id), r)
        self._values_table().upsert(rows)
        self._vdirty = True

    def analysed_runs(self) -> set[str]:
        t = self._values_table()
        return set(t.cols["run_id"])

    # -- states -------------------------------------------------------------------------
    def set_states(self, run_ids, states, zones, worst_bands, plan_digest: str = "") -> None:
        """Record the alarm state of runs (after an evaluation) in the value table and
        the catalogue's ``state`` column."""
        self._writable()
        t = self._values_table()
        cat = self._catalogue.columns
        cidx = self._catalogue._idx()
        for rid, st, zn, wb in zip(run_ids, states, zones, worst_bands):
            i = t.index(rid)
            if i is None:
                raise InputError(f"{self.path}: run {rid} has no results to evaluate")
            t.cols["state"][i], t.cols["zone"][i], t.cols["worst_band"][i] = st, zn, wb
            if plan_digest:
                t.cols["plan_digest"][i] = plan_digest
            j = cidx.get(rid)
            if j is not None:
                cat["state"] = _set_text(cat["state"], j, st)
        self._vdirty = True
        self._dirty += 1

    def _sync_catalogue_states(self) -> None:
        """Copy the value table's states into the catalogue (after a rebuild)."""
        t = self._values_table()
        if not len(t):
            return
        cat = self._catalogue.columns
        cidx = self._catalogue._idx()
        for rid, st in zip(t.cols["run_id"], t.cols["state"]):
            j = cidx.get(rid)
            if j is not None and st:
                cat["state"] = _set_text(cat["state"], j, st)
        self._dirty += 1

    def values(self, point: str, name: str) -> tuple[np.ndarray, np.ndarray]:
        """(time taken in s since 1970 UTC, value) of ``point``'s analysed runs, in time
        order; ``name`` is a standard value or ``band:<band name>``."""
        self.plant.point(point)
        t = self._values_table()
        if name not in t.cols or name in ("run_id", "point"):
            known = ", ".join(sorted(t.value_names())) or "none yet"
            raise InputError(f"{self.path}: no value {name!r}; stored values: {known}")
        idx = t.rows_of(point)
        return t.cols["taken_s"][idx].copy(), t.cols[name][idx].astype(float)

    def value_rows(self, point: str) -> dict[str, np.ndarray]:
        """Every column of ``point``'s analysed runs, in time order."""
        t = self._values_table()
        idx = t.rows_of(point)
        return {k: v[idx] for k, v in t.cols.items()}

    def point_states(self) -> dict[str, dict]:
        """Each point's state now: its latest analysed run's state, "no data" when it
        has no run or none within :data:`NO_DATA_AFTER_DAYS` of the archive's newest."""
        t = self._values_table()
        newest = float(np.nanmax(t.cols["taken_s"])) if len(t) else math.nan
        out = {}
        for p in self.points():
            idx = t.rows_of(p.path)
            entry = {"state": "no data", "zone": "", "overall_mm_s": math.nan, "run_id": "",
                     "taken_s": math.nan, "worst_band": "", "quality": ""}
            if idx.size:
                i = idx[-1]
                entry.update(state=t.cols["state"][i] or "", zone=t.cols["zone"][i],
                             run_id=t.cols["run_id"][i], taken_s=float(t.cols["taken_s"][i]),
                             worst_band=t.cols["worst_band"][i], quality=t.cols["quality"][i],
                             overall_mm_s=float(t.cols["overall_velocity_mm_s"][i])
                             if "overall_velocity_mm_s" in t.cols else math.nan)
                if newest - entry["taken_s"] > NO_DATA_AFTER_DAYS * _DAY:
                    entry["state"] = "no data"
            elif self.runs(p.path):
                entry["state"] = ""          # runs, but none analysed yet
            out[p.path] = entry
        return out

    # -- events -------------------------------------------------------------------------
    def events(self, point: str | None = None) -> list:
        """The event log (``engine.alarms.evaluate.Event``), oldest first."""
        if self._events_cache is None:
            self._events_cache = read_events(self.path / EVENTS_FILE)
        ev = self._events_cache
        return [e for e in ev if point is None or e.point == point]

    def replace_events(self, point: str, events: list) -> None:
        """Set ``point``'s events (after evaluating its history); acknowledgements of
        events that are still there (same run, band and state) are kept."""
        self._writable()
        old = self.events()
        acks = {(e.run_id, e.band, e.state): e for e in old
                if e.point == point and e.acknowledged_by}
        kept = [e for e in old if e.point != point]
        for e in events:
            a = acks.get((e.run_id, e.band, e.state))
            if a is not None:
                e = replace(e, acknowledged_at=a.acknowledged_at,
                            acknowledged_by=a.acknowledged_by, note=a.note)
            kept.append(e)
        kept.sort(key=lambda e: (e.time_s, e.point))
        self._events_cache = kept
        self._edirty = True

    def acknowledge(self, index: int, *, by: str, note: str = "") -> None:
        """Acknowledge event ``index`` (position in :meth:`events`) with a note."""
        self._writable()
        ev = self.events()
        if not 0 <= index < len(ev):
            raise InputError(f"{self.path}: no event {index}; the log has {len(ev)}")
        if not by.strip():
            raise InputError("acknowledge: say who acknowledges (by)")
        from ..archive.schema import now_utc

        ev[index] = replace(ev[index], acknowledged_at=now_utc().timestamp(),
                            acknowledged_by=by.strip(), note=note)
        self._events_cache = ev
        self._edirty = True


def _set_text(col: np.ndarray, i: int, value: str) -> np.ndarray:
    """Set row ``i`` of a fixed-width bytes column, widening it when needed."""
    b = value.encode("utf-8")
    if col.dtype.itemsize < len(b):
        col = col.astype(f"S{len(b)}")
    col[i] = b
    return col
