"""The asset tree in ``plant.h5``: sites, machines and points, read and edited.

Reading builds a small in-memory model (:class:`Plant`) and closes the file, so that a
writer can replace the file while readers work.  Edits are made on a fresh copy of the
file (every group and attribute copied, known or not), which is then committed by
:func:`engine.archive.safety.commit_plant`.
"""

from __future__ import annotations

import math
import shutil
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import h5py
import numpy as np
from h5py import h5d, h5s

from ..errors import ArchiveError, InputError
from ..units import quantity_of
from .schema import (
    CREATED_BY,
    MACHINE_FIELDS,
    POINT_FIELDS,
    RESERVED_MACHINE_GROUPS,
    RESERVED_PLANT_GROUPS,
    RESERVED_POINT_GROUPS,
    SCHEMA_VERSION,
    iso_utc,
    now_utc,
    STRING_MEMORY_TYPE,
    point_key,
    read_attrs,
    split_point_path,
    stored_version,
    string_array,
    text,
)


def _value(raw, kind: type, default):
    if raw is None:
        return default
    if kind is str:
        return text(raw)
    try:
        return kind(raw)
    except (TypeError, ValueError):
        return default


def _number_text(value: float) -> float | None:
    return None if isinstance(value, float) and math.isnan(value) else value


@dataclass
class PointInfo:
    """A measurement point with its properties (see ``POINT_FIELDS`` in the schema).

    Attributes
    ----------
    site, machine, name : str
    key : str
        Folder of the point's runs under ``runs/``.
    props : dict
        ``location``, ``direction``, ``unit``, ``quantity``, ``sensitivity_v_per_unit``
        (V per unit, NaN when not set), ``fmax_hz`` (Hz, NaN = fs/2.56), ``lines``,
        ``window``, ``averages`` (0 = every frame), ``overlap`` (fraction) and
        ``channel`` (-1 = the first channel that is not the tachometer).
    mapping_patterns : list of str
        File-name globs that map files to this point on import.
    extra : dict
        Attributes this version does not know (kept as they are).
    """

    site: str
    machine: str
    name: str
    key: str
    props: dict
    mapping_patterns: list[str] = field(default_factory=list)
    extra: dict = field(default_factory=dict)

    @property
    def path(self) -> str:
        return f"{self.site}/{self.machine}/{self.name}"

    def as_dict(self) -> dict:
        d = {"name": self.name, "path": self.path, "key": self.key}
        d.update({k: _number_text(v) for k, v in self.props.items()})
        d["mapping_patterns"] = list(self.mapping_patterns)
        return d


@dataclass
class MachineInfo:
    """A machine: properties (``MACHINE_FIELDS``), speed ratios of its shafts and points."""

    site: str
    tag: str
    props: dict
    ratios: dict[str, float] = field(default_factory=dict)
    points: dict[str, PointInfo] = field(default_factory=dict)
    extra: dict = field(default_factory=dict)

    def as_dict(self) -> dict:
        d = {"tag": self.tag}
        d.update({k: _number_text(v) for k, v in self.props.items()})
        d["ratios"] = dict(self.ratios)
        d["points"] = [p.as_dict() for p in self.points.values()]
        return d


@dataclass
class SiteInfo:
    """A site (one works or plant area) and its machines."""

    name: str
    description: str = ""
    machines: dict[str, MachineInfo] = field(default_factory=dict)

    def as_dict(self) -> dict:
        return {"name": self.name, "description": self.description,
                "machines": [m.as_dict() for m in self.machines.values()]}


@dataclass
class Plant:
    """Everything ``plant.h5`` says, read once."""

    name: str
    schema_version: int
    created_by: str
    created_at: str
    sites: dict[str, SiteInfo] = field(default_factory=dict)

    def points(self) -> Iterator[PointInfo]:
        for site in self.sites.values():
            for machine in site.machines.values():
                yield from machine.points.values()

    def keys(self) -> set[str]:
        return {p.key for p in self.points()}

    def site(self, name: str) -> SiteInfo:
        if name not in self.sites:
            known = ", ".join(self.sites) or "none yet"
            raise InputError(f"no site {name!r} in the archive; sites: {known}")
        return self.sites[name]

    def machine(self, site: str, tag: str) -> MachineInfo:
        s = self.site(site)
        if tag not in s.machines:
            known = ", ".join(s.machines) or "none yet"
            raise InputError(f"no machine {tag!r} at site {site!r}; machines: {known}")
        return s.machines[tag]

    def point(self, path: str) -> PointInfo:
        site, tag, name = split_point_path(path)
        m = self.machine(site, tag)
        if name not in m.points:
            known = ", ".join(m.points) or "none yet"
            raise InputError(f"no point {name!r} on machine {site}/{tag}; points: {known}")
        return m.points[name]

    def point_by_key(self, key: str) -> PointInfo | None:
        for p in self.points():
            if p.key == key:
                return p
        return None


def read_plant(path: Path) -> Plant:
    """Read ``plant.h5`` (or its ``.prev``) into a :class:`Plant`.

    Raises
    ------
    ArchiveError
        When the file cannot be opened or lacks the ``sites`` group, or when it was
        written by a newer schema.
    """
    src = str(path)
    try:
        f = h5py.File(path, "r", locking=False)
    except (OSError, ValueError) as exc:
        raise ArchiveError(f"{src}: cannot be opened as HDF5 ({exc})") from None
    with f:
        version = stored_version(f, src)
        if "sites" not in f:
            raise ArchiveError(f"{src}: has no 'sites' group; not a Shaftwatch plant file")
        plant = Plant(name=text(f.attrs.get("plant_name", "")), schema_version=version,
                      created_by=text(f.attrs.get("created_by", "")),
                      created_at=text(f.attrs.get("created_at", "")))
        try:
            for site_name, g_site in f["sites"].items():
                site = SiteInfo(site_name, text(g_site.attrs.get("description", "")))
                plant.sites[site_name] = site
                machines = g_site.get("machines", {})
                for tag, g_m in machines.items():
                    site.machines[tag] = read_machine(site_name, tag, g_m)
        except (OSError, KeyError, TypeError) as exc:
            raise ArchiveError(f"{src}: the asset tree cannot be read ({exc})") from None
    return plant


def _read_ratios(g: h5py.Group) -> dict[str, float]:
    """The ``speed_ratios`` datasets of a machine group ({} when absent)."""
    try:
        shafts = h5d.open(g.id, b"speed_ratios/shaft")
        ratios = h5d.open(g.id, b"speed_ratios/ratio")
    except KeyError:
        return {}
    if shafts.shape != ratios.shape or len(shafts.shape) != 1:
        raise ArchiveError(f"{g.file.filename}: {g.name}/speed_ratios: 'shaft' and 'ratio' "
                           "must be 1-D datasets of the same length")
    names = np.empty(shafts.shape, dtype=h5py.string_dtype())
    values = np.empty(ratios.shape, dtype=np.float64)
    try:
        shafts.read(h5s.ALL, h5s.ALL, names, mtype=STRING_MEMORY_TYPE)
        ratios.read(h5s.ALL, h5s.ALL, values)
    except (TypeError, ValueError, OSError):  # unusual types: let h5py convert them
        names = g["speed_ratios/shaft"][()]
        values = g["speed_ratios/ratio"][()]
    return {text(k): float(v) for k, v in zip(names, values)}


_MACHINE_KINDS = {k: kind for k, (kind, _) in MACHINE_FIELDS.items()} | {"tag": str}
_POINT_KINDS = ({k: kind for k, (kind, _) in POINT_FIELDS.items()}
                | {"quantity": str, "key": str})


def read_machine(site: str, tag: str, g: h5py.Group) -> MachineInfo:
    """A machine group of plant.h5 (with its points) as a :class:`MachineInfo`."""
    attrs, extra = read_attrs(g, _MACHINE_KINDS)
    props = {k: _value(attrs.get(k), kind, default)
             for k, (kind, default) in MACHINE_FIELDS.items()}
    m = MachineInfo(site, tag, props, _read_ratios(g), extra=extra)
    for name, g_p in g.get("points", {}).items():
        pattrs, pextra = read_attrs(g_p, _POINT_KINDS, ("mapping_patterns",))
        pprops = {k: _value(pattrs.get(k), kind, default)
                  for k, (kind, default) in POINT_FIELDS.items()}
        quantity = pattrs.get("quantity")
        pprops["quantity"] = (text(quantity) if quantity is not None
                              else quantity_of(pprops["unit"]))
        key = pattrs.get("key")
        patterns = pattrs.get("mapping_patterns", [])
        m.points[name] = PointInfo(site, tag, name,
                                   # schema-0 points have no key: derived as migration does
                                   text(key) if key is not None else point_key(site, tag, name),
                                   pprops, [text(p) for p in np.atleast_1d(patterns)],
                                   extra=pextra)
    return m


def _copy_attrs(src: h5py.AttributeManager, dst: h5py.AttributeManager) -> None:
    for name in src:
        dst.create(name, src[name], dtype=src.get_id(name).dtype)


def copy_plant(source: Path, tmp: Path, *, compact: bool = False) -> h5py.File:
    """A writable copy of ``source`` at ``tmp``; the caller edits and closes it.

    The copy is byte for byte, so every group, dataset and attribute stays as it was,
    known or not.  With ``compact`` the objects are copied one by one into a new file
    instead, which drops the free space that edits leave behind.
    """
    if not compact:
        shutil.copyfile(source, tmp)
        try:
            return h5py.File(tmp, "r+", locking=False)
        except (OSError, ValueError) as exc:
            tmp.unlink(missing_ok=True)
            raise ArchiveError(f"{source}: cannot be opened as HDF5 ({exc})") from None
    try:
        src = h5py.File(source, "r", locking=False)
    except (OSError, ValueError) as exc:
        raise ArchiveError(f"{source}: cannot be opened as HDF5 ({exc})") from None
    dst = h5py.File(tmp, "w", locking=False)
    try:
        with src:
            _copy_attrs(src.attrs, dst.attrs)
            for name in src:
                src.copy(src[name], dst, name=name)
    except BaseException:
        dst.close()
        raise
    return dst


def new_plant(f: h5py.File, plant_name: str) -> None:
    """Lay out an empty plant file of the current schema."""
    f.attrs["schema_version"] = np.int64(SCHEMA_VERSION)
    f.attrs["created_by"] = CREATED_BY
    f.attrs["created_at"] = iso_utc(now_utc())
    f.attrs["plant_name"] = str(plant_name)
    f.create_group("sites")
    for name in RESERVED_PLANT_GROUPS:
        f.require_group(name)


def _set(attrs: h5py.AttributeManager, values: dict, fields: dict) -> None:
    for k, v in values.items():
        kind = fields[k][0] if k in fields else type(v)
        if kind is str:
            attrs[k] = str(v)
        elif kind is int:
            attrs[k] = np.int64(v)
        else:
            attrs[k] = np.float64(v)


def _set_ratios(g: h5py.Group, ratios: dict[str, float]) -> None:
    if "speed_ratios" in g:
        del g["speed_ratios"]
    r = g.create_group("speed_ratios")
    r.attrs["description"] = "speed of each shaft divided by the machine's nominal speed"
    r.create_dataset("shaft", data=string_array(ratios.keys()))
    r.create_dataset("ratio", data=np.array(list(ratios.values()), dtype=np.float64))


def edit_add_site(f: h5py.File, name: str, description: str) -> None:
    sites = f.require_group("sites")
    if name in sites:
        raise InputError(f"site {name!r} already exists")
    g = sites.create_group(name)
    g.attrs["name"] = name
    g.attrs["description"] = str(description)
    g.create_group("machines")


def _machine_group(f: h5py.File, site: str, tag: str) -> h5py.Group:
    g = f.get(f"sites/{site}/machines/{tag}")
    if g is None:
        raise InputError(f"no machine {tag!r} at site {site!r}")
    return g


def edit_add_machine(f: h5py.File, site: str, tag: str, props: dict,
                     ratios: dict[str, float] | None) -> None:
    machines = f.get(f"sites/{site}/machines")
    if machines is None:
        raise InputError(f"no site {site!r}; add it first")
    if tag in machines:
        raise InputError(f"machine {site}/{tag} already exists")
    g = machines.create_group(tag)
    full = {k: default for k, (_, default) in MACHINE_FIELDS.items()}
    full.update(props)
    _set(g.attrs, full, MACHINE_FIELDS)
    g.attrs["tag"] = tag
    _set_ratios(g, ratios or {})
    g.create_group("points")
    for name in RESERVED_MACHINE_GROUPS:
        g.require_group(name)


def edit_update_machine(f: h5py.File, site: str, tag: str, props: dict,
                        ratios: dict[str, float] | None) -> None:
    g = _machine_group(f, site, tag)
    _set(g.attrs, props, MACHINE_FIELDS)
    if ratios is not None:
        _set_ratios(g, ratios)


def edit_add_point(f: h5py.File, path: str, props: dict, patterns: list[str] | None,
                   key: str) -> None:
    site, tag, name = split_point_path(path)
    points = _machine_group(f, site, tag).require_group("points")
    if name in points:
        raise InputError(f"point {path} already exists")
    g = points.create_group(name)
    full = {k: default for k, (_, default) in POINT_FIELDS.items()}
    full.update(props)
    _set(g.attrs, full, POINT_FIELDS)
    g.attrs["quantity"] = quantity_of(full["unit"])
    g.attrs["key"] = key
    g.attrs["mapping_patterns"] = string_array(patterns or [])
    for reserved in RESERVED_POINT_GROUPS:
        g.require_group(reserved)


def edit_update_point(f: h5py.File, path: str, props: dict, patterns: list[str] | None) -> None:
    site, tag, name = split_point_path(path)
    g = f.get(f"sites/{site}/machines/{tag}/points/{name}")
    if g is None:
        raise InputError(f"no point {path}")
    _set(g.attrs, props, POINT_FIELDS)
    if "unit" in props:
        g.attrs["quantity"] = quantity_of(props["unit"])
    if patterns is not None:
        g.attrs["mapping_patterns"] = string_array(patterns)
