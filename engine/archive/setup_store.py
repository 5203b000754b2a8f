"""What a plant's setup adds to the asset tree: machine models, the bearing list and
the alarm plans, all kept in ``plant.h5`` as JSON text attributes (one self-describing
document per object, readable with any HDF5 tool and any JSON reader).

=====================================  =============================================
``/sites/<s>/machines/<m>/model``      attribute ``json``: the machine model
                                       (``engine.kinematics.MachineModel.as_dict``)
``/library/bearings``                  attribute ``json``: list of bearing geometries
                                       (``engine.bearings.BearingGeometry`` fields)
``/sites/<s>/machines/<m>/points/<p>/alarm_plan``
                                       attribute ``json``: the point's alarm plan
                                       (``engine.alarms.plan.AlarmPlan.as_dict``)
=====================================  =============================================

Every edit goes through :meth:`Archive._edit`, so it is atomic and keeps ``.prev``.
"""

from __future__ import annotations

import json
from dataclasses import asdict

import h5py

from ..bearings import BearingGeometry
from ..errors import ArchiveError, InputError

MODEL_GROUP, PLAN_GROUP, LIBRARY_GROUP = "model", "alarm_plan", "library/bearings"


def _machine_path(site: str, tag: str) -> str:
    return f"sites/{site}/machines/{tag}"


def _point_path(point: str) -> str:
    site, tag, name = point.split("/", 2)
    return f"{_machine_path(site, tag)}/points/{name}"


def _read_json(plant_file, group: str, what: str):
    """The ``json`` attribute of ``group`` in ``plant_file``, or None when not set."""
    try:
        with h5py.File(plant_file, "r") as f:
            g = f.get(group)
            raw = None if g is None else g.attrs.get("json")
    except OSError as exc:
        raise ArchiveError(f"{plant_file}: cannot read {what}: {exc}") from None
    if raw is None or raw == "":
        return None
    if isinstance(raw, bytes):
        raw = raw.decode("utf-8")
    try:
        return json.loads(raw)
    except json.JSONDecodeError as exc:
        raise ArchiveError(f"{plant_file}: {what} is not valid JSON ({exc})") from None


def _write_json(f: h5py.File, group: str, data) -> None:
    g = f.require_group(group)
    g.attrs["json"] = json.dumps(data, sort_keys=True)


class SetupStore:
    """Machine models, the bearing list and alarm plans (mixed into ``Archive``)."""

    # -- machine models -----------------------------------------------------------------
    def machine_model(self, site: str, tag: str):
        """The machine's kinematic model (``MachineModel``), or None when none is stored."""
        from ..kinematics import MachineModel

        self.plant.machine(site, tag)
        data = _read_json(self._plant_source, f"{_machine_path(site, tag)}/{MODEL_GROUP}",
                          f"machine model of {site}/{tag}")
        if data is None:
            return None
        return MachineModel.from_dict(data, source=f"{self.path}: {site}/{tag}")

    def set_machine_model(self, site: str, tag: str, model) -> None:
        """Store ``model`` (a ``MachineModel``) for the machine, replacing any other.

        Every point's shaft (``shaft`` property) that is set must be one of the model's
        shafts; the machine's speed ratios are set from the model's resolved ratios.
        """
        machine = self.plant.machine(site, tag)
        names = {s.name for s in model.shafts}
        for p in machine.points.values():
            if p.props.get("shaft") and p.props["shaft"] not in names:
                raise InputError(f"machine model of {site}/{tag}: point {p.name!r} is on "
                                 f"shaft {p.props['shaft']!r}, which the model does not "
                                 f"have (shafts: {', '.join(sorted(names))})")
        data = model.as_dict()
        ratios = dict(model.ratios)
        from .plant import _set_ratios

        def change(f: h5py.File) -> None:
            _write_json(f, f"{_machine_path(site, tag)}/{MODEL_GROUP}", data)
            _set_ratios(f[_machine_path(site, tag)], ratios)

        self._edit(change, machine=(site, tag))

    def _check_shaft(self, site: str, tag: str, point: str, shaft: str | None) -> None:
        """InputError when ``shaft`` is set and the machine's model lacks it."""
        if not shaft:
            return
        model = self.machine_model(site, tag)
        names = [s.name for s in model.shafts] if model is not None else []
        if model is not None and shaft not in names:
            raise InputError(f"point {point}: shaft {shaft!r} is not one of the machine "
                             f"model's shafts ({', '.join(names)})")

    def point_shaft(self, point: str) -> str:
        """The shaft the point sits on: its ``shaft`` property, else the shaft of the
        model's bearing at the point's location, else ``""``."""
        info = self.plant.point(point)
        if info.props.get("shaft"):
            return info.props["shaft"]
        model = self.machine_model(info.site, info.machine)
        if model is None:
            return ""
        loc = info.props.get("location", "")
        for b in model.bearings:
            if loc and b.label == loc:
                return b.shaft
        return ""

    # -- bearing list -------------------------------------------------------------------
    def bearing_library(self) -> list[BearingGeometry]:
        """The archive-wide list of bearing geometries, in the order they were added."""
        data = _read_json(self._plant_source, LIBRARY_GROUP, "bearing list") or []
        out = []
        for i, row in enumerate(data):
            try:
                out.append(BearingGeometry(**row))
            except (TypeError, InputError) as exc:
                raise ArchiveError(f"{self.path}: bearing list entry {i}: {exc}") from None
        return out

    def bearing(self, label: str) -> BearingGeometry:
        """The bearing list's entry ``label`` (InputError listing the labels)."""
        lib = self.bearing_library()
        for b in lib:
            if b.label == label:
                return b
        raise InputError(f"{self.path}: no bearing {label!r} in the bearing list; it has "
                         + (", ".join(repr(b.label) for b in lib) or "no entries"))

    def add_bearing(self, geometry: BearingGeometry, *, replace: bool = False) -> None:
        """Add ``geometry`` to the bearing list (``replace`` an entry of the same label)."""
        lib = self.bearing_library()
        labels = [b.label for b in lib]
        if geometry.label in labels:
            if not replace:
                raise InputError(f"{self.path}: the bearing list already has "
                                 f"{geometry.label!r}; use replace to change it")
            lib[labels.index(geometry.label)] = geometry
        else:
            lib.append(geometry)
        rows = [asdict(b) for b in lib]
        self._edit(lambda f: _write_json(f, LIBRARY_GROUP, rows))

    def remove_bearing(self, label: str) -> None:
        """Remove the entry ``label`` from the bearing list."""
        self.bearing(label)
        rows = [asdict(b) for b in self.bearing_library() if b.label != label]
        self._edit(lambda f: _write_json(f, LIBRARY_GROUP, rows))

    # -- alarm plans --------------------------------------------------------------------
    def plan(self, point: str):
        """The point's alarm plan (``AlarmPlan``), or None when none is set."""
        from ..alarms.plan import AlarmPlan

        self.plant.point(point)
        # Cached per version of plant.h5 (every edit replaces the file): loops over runs
        # ask for the same point's plan again and again.
        try:
            st = self._plant_source.stat()
            version = (str(self._plant_source), st.st_ino, st.st_mtime_ns, st.st_size)
        except OSError:
            version = None
        cache = self.__dict__.setdefault("_plan_cache", {})
        if version is not None and cache.get("version") != version:
            cache.clear()
            cache["version"] = version
        if version is not None and point in cache:
            return cache[point]
        data = _read_json(self._plant_source, f"{_point_path(point)}/{PLAN_GROUP}",
                          f"alarm plan of {point}")
        plan = None if data is None else AlarmPlan.from_dict(
            data, source=f"{self.path}: alarm plan of {point}")
        if version is not None:
            cache[point] = plan
        return plan

    def set_plan(self, point: str, plan) -> None:
        """Store ``plan`` for the point (validated against its Fmax).  The history is not
        re-evaluated here: the batch engine does that (``engine.batch``)."""
        self.set_plans({point: plan})

    def set_plans(self, plans: dict) -> None:
        """Store several points' plans in one edit (copying a plan to many points)."""
        import math

        docs = {}
        for point, plan in plans.items():
            info = self.plant.point(point)
            fmax = info.props.get("fmax_hz")
            plan.validate(fmax_hz=None if fmax is None or math.isnan(fmax) else fmax,
                          source=f"alarm plan of {point}")
            docs[point] = plan.as_dict()

        def change(f: h5py.File) -> None:
            for point, data in docs.items():
                _write_json(f, f"{_point_path(point)}/{PLAN_GROUP}", data)

        self._edit(change)

    def clear_plan(self, point: str) -> None:
        """Remove the point's alarm plan."""
        self.plant.point(point)

        def change(f: h5py.File) -> None:
            g = f.get(f"{_point_path(point)}/{PLAN_GROUP}")
            if g is not None and "json" in g.attrs:
                del g.attrs["json"]

        self._edit(change)
