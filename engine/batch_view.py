"""The writer archive as a batch sees it: the asset tree read once, value rows grouped
by point once.

A batch holds the archive's writer lock from start to end, so nothing else changes the
machine models, shafts or alarm plans meanwhile.  :class:`ArchiveView` wraps the open
:class:`engine.archive.Archive` and answers every call with the archive's own method,
except:

* ``machine_model``, ``point_shaft`` and ``plan`` are read once per batch (each read
  otherwise opens ``plant.h5``); a change made through the view (``set_plans``,
  ``clear_plan``, ...) forgets them;
* ``value_rows`` and ``point_states`` give the archive's answers from a per-point index
  of the value table, built once per change of its rows, instead of a scan of the
  whole table for every point (for a 20,000-run archive the scans alone took longer
  than the evaluation they served).

The pipeline's functions take the view wherever they take an archive.
"""

from __future__ import annotations

import math

import numpy as np

_EMPTY = np.zeros(0, dtype=np.intp)
_DAY = 86400.0
#: Archive methods that change what the view remembers.
_CHANGES = ("set_plan", "set_plans", "clear_plan", "set_machine_model", "update_point",
            "update_machine", "rebuild", "reload")


class ArchiveView:
    """An open writer :class:`~engine.archive.Archive` with the reads a batch repeats
    made once (see the module notes)."""

    def __init__(self, arc):
        self._arc = arc
        self._memo: dict = {}
        self._groups: dict[str, np.ndarray] = {}
        self._groups_of: tuple | None = None

    def __getattr__(self, name: str):
        attr = getattr(self._arc, name)
        if name in _CHANGES:
            def changing(*args, **kwargs):
                self._memo.clear()
                self._groups_of = None
                return attr(*args, **kwargs)
            return changing
        return attr

    @property
    def archive(self):
        """The archive itself."""
        return self._arc

    # -- the asset tree, read once --------------------------------------------------------
    def _once(self, key: tuple, read):
        if key not in self._memo:
            self._memo[key] = read()
        return self._memo[key]

    def machine_model(self, site: str, tag: str):
        return self._once(("model", site, tag), lambda: self._arc.machine_model(site, tag))

    def point_shaft(self, point: str) -> str:
        return self._once(("shaft", point), lambda: self._arc.point_shaft(point))

    def plan(self, point: str):
        return self._once(("plan", point), lambda: self._arc.plan(point))

    # -- the value table by point ---------------------------------------------------------
    def _index(self) -> dict[str, np.ndarray]:
        """Row indices of each point, in time order (as ``ValueTable.rows_of``: by time
        taken, equal times in row order)."""
        t = self._arc._values_table()
        pts, taken = t.cols["point"], t.cols["taken_s"]
        if self._groups_of is not None and self._groups_of[0] is pts \
                and self._groups_of[1] is taken:
            return self._groups
        groups: dict[str, np.ndarray] = {}
        if pts.size:
            names, inverse = np.unique(pts, return_inverse=True)
            order = np.lexsort((taken, inverse))        # stable: ties keep row order
            ends = np.cumsum(np.bincount(inverse, minlength=names.size))
            starts = np.concatenate(([0], ends[:-1]))
            groups = {str(n): order[a:b] for n, a, b in zip(names, starts, ends)}
        self._groups, self._groups_of = groups, (pts, taken)
        return groups

    def value_rows(self, point: str) -> dict[str, np.ndarray]:
        """As :meth:`Archive.value_rows`."""
        t = self._arc._values_table()
        idx = self._index().get(point, _EMPTY)
        return {k: v[idx] for k, v in t.cols.items()}

    def point_states(self) -> dict[str, dict]:
        """As :meth:`Archive.point_states`."""
        from .archive.derived_store import NO_DATA_AFTER_DAYS

        t = self._arc._values_table()
        groups = self._index()
        newest = float(np.nanmax(t.cols["taken_s"])) if len(t) else math.nan
        overall = t.cols.get("overall_velocity_mm_s")
        out = {}
        for p in self._arc.points():
            idx = groups.get(p.path, _EMPTY)
            entry = {"state": "no data", "zone": "", "overall_mm_s": math.nan, "run_id": "",
                     "taken_s": math.nan, "worst_band": "", "quality": ""}
            if idx.size:
                i = idx[-1]
                entry.update(state=t.cols["state"][i] or "", zone=t.cols["zone"][i],
                             run_id=t.cols["run_id"][i], taken_s=float(t.cols["taken_s"][i]),
                             worst_band=t.cols["worst_band"][i], quality=t.cols["quality"][i],
                             overall_mm_s=float(overall[i]) if overall is not None
                             else math.nan)
                if newest - entry["taken_s"] > NO_DATA_AFTER_DAYS * _DAY:
                    entry["state"] = "no data"
            elif self._arc.runs(p.path):
                entry["state"] = ""          # runs, but none analysed yet
            out[p.path] = entry
        return out
