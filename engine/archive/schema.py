"""Names, versions and property rules of the archive layout (see docs/archive-schema.md).

Everything that fixes the on-disk form lives here: file names, the schema version this
code writes and reads, the properties of machines and points with their types and
defaults, the validation of names typed by a user, and the migration of older layouts.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from datetime import UTC, datetime

import h5py
import numpy as np
from h5py import h5a, h5t

from .. import __version__
from ..errors import ArchiveError, InputError
from ..recording import DIRECTIONS
from ..units import parse_sensitivity, quantity_of, unit

#: Schema version this code writes; it reads every version up to it.
SCHEMA_VERSION = 1
#: Value of the ``created_by`` attribute of new files.
CREATED_BY = f"Shaftwatch {__version__}"

PLANT_FILE = "plant.h5"
PREV_SUFFIX = ".prev"
TMP_SUFFIX = ".tmp"
CATALOGUE_FILE = "catalogue.h5"
LOCK_FILE = "writer.lock"
RUNS_DIR = "runs"
RUN_SUFFIX = ".h5"

#: Empty groups created in plant.h5 for later parts of the product; a writer keeps
#: whatever it finds in them (and in any other group it does not know).
RESERVED_PLANT_GROUPS = ("library/bearings", "events", "findings")
RESERVED_MACHINE_GROUPS = ("model",)
RESERVED_POINT_GROUPS = ("alarm_plan", "bearing")
#: Group names of run files kept for later parts (spectra, envelope, findings, alarms).
RESERVED_RUN_GROUPS = ("spectrum", "envelope", "findings", "alarms")

#: Machine properties: name -> (type, default).  NaN / "" / 0 mean "not set".
MACHINE_FIELDS: dict[str, tuple[type, object]] = {
    "name": (str, ""),
    "description": (str, ""),
    "nominal_rpm": (float, math.nan),
    "power_kw": (float, math.nan),
    "iso_group": (int, 0),
    "foundation": (str, ""),
}
#: Point properties: name -> (type, default).
POINT_FIELDS: dict[str, tuple[type, object]] = {
    "location": (str, ""),
    "direction": (str, ""),
    "unit": (str, "g"),
    "sensitivity_v_per_unit": (float, math.nan),
    "fmax_hz": (float, math.nan),
    "lines": (int, 1600),
    "window": (str, "hann"),
    "averages": (int, 0),
    "overlap": (float, 0.5),
    "channel": (int, -1),
    "shaft": (str, ""),
}
FOUNDATIONS = ("rigid", "flexible")
ISO_GROUPS = (0, 1, 2)

class NewerSchemaError(ArchiveError):
    """A file was written by a newer Shaftwatch than this one."""


_BAD_NAME = re.compile(r"[/\x00-\x1f\x7f]")


def now_utc() -> datetime:
    """The current time, UTC."""
    return datetime.now(UTC)


def iso_utc(moment: datetime) -> str:
    """ISO-8601 text of a moment in UTC with microseconds and a ``Z`` (naive = UTC)."""
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=UTC)
    return moment.astimezone(UTC).isoformat(timespec="microseconds").replace("+00:00", "Z")


def parse_time(text: str | datetime, *, field: str = "time") -> datetime:
    """A timezone-aware UTC datetime from ISO-8601 text (naive text is read as UTC).

    Raises
    ------
    InputError
        When the text is not an ISO-8601 date or date and time.
    """
    if isinstance(text, datetime):
        moment = text
    else:
        try:
            moment = datetime.fromisoformat(str(text).strip())
        except ValueError:
            raise InputError(f"{field} {text!r} is not an ISO-8601 date or time; write it "
                             "like 2026-08-03 or 2026-08-03T08:15:00Z") from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=UTC)
    return moment.astimezone(UTC)


def check_name(name: str, what: str) -> str:
    """A site, machine-tag or point name as stored, or InputError saying what is wrong.

    Names become HDF5 group names: no ``/``, no control characters, not ``.`` or
    ``..``, no leading or trailing blanks, at most 100 characters.
    """
    if not isinstance(name, str) or not name:
        raise InputError(f"{what} name must be a non-empty text, got {name!r}")
    if name != name.strip() or _BAD_NAME.search(name) or name in (".", "..") \
            or len(name) > 100:
        raise InputError(f"{what} name {name!r} is not usable: no '/', no control "
                         "characters, no leading or trailing blanks, not '.' or '..', "
                         "at most 100 characters")
    return name


def split_point_path(path: str) -> tuple[str, str, str]:
    """``"Site/Machine/Point"`` as its three names, or InputError."""
    parts = str(path).split("/")
    if len(parts) != 3:
        raise InputError(f"point {path!r} must be written SITE/MACHINE/POINT "
                         "(three names separated by '/')")
    site, tag, name = parts
    return (check_name(site, "site"), check_name(tag, "machine tag"),
            check_name(name, "point"))


def point_key(site: str, tag: str, name: str, taken: set[str] = frozenset()) -> str:
    """Folder name of a point's runs: a readable slug, unique ignoring case.

    ``taken`` holds the keys already used (compared in lower case, since the folder
    may live on a file system that ignores case); ``-2``, ``-3``, ... is appended on a
    clash.
    """
    slug = "--".join(re.sub(r"[^A-Za-z0-9._-]+", "-", part).strip("-.") or "x"
                     for part in (site, tag, name))
    used = {k.lower() for k in taken}
    key, n = slug, 2
    while key.lower() in used:
        key, n = f"{slug}-{n}", n + 1
    return key


def _typed(value, kind: type, field: str, what: str):
    try:
        if kind is str:
            if not isinstance(value, str):
                raise TypeError
            return value
        if kind is int:
            if isinstance(value, bool) or float(value) != int(value):
                raise TypeError
            return int(value)
        return float(value)
    except (TypeError, ValueError, OverflowError):
        raise InputError(f"{what}: {field} must be {kind.__name__}, got {value!r}") from None


def machine_props(props: dict, *, what: str) -> tuple[dict, dict[str, float] | None]:
    """Validated machine properties (known names only) and the speed ratios, if given.

    ``props`` may hold the keys of :data:`MACHINE_FIELDS` and ``ratios`` (a mapping of
    shaft name to speed ratio, shaft speed over the machine's reference speed).
    ``None`` values mean "not set".
    """
    props = dict(props)
    ratios = props.pop("ratios", None)
    unknown = sorted(set(props) - set(MACHINE_FIELDS))
    if unknown:
        raise InputError(f"{what}: unknown machine propert{'y' if len(unknown) == 1 else 'ies'} "
                         f"{', '.join(unknown)}; expected {', '.join(MACHINE_FIELDS)} or ratios")
    out = {}
    for key, value in props.items():
        kind, default = MACHINE_FIELDS[key]
        out[key] = default if value is None else _typed(value, kind, key, what)
    if "iso_group" in out and out["iso_group"] not in ISO_GROUPS:
        raise InputError(f"{what}: iso_group must be 1 or 2 (ISO 20816-3 machine group), "
                         f"got {out['iso_group']}")
    if out.get("foundation", "") not in ("",) + FOUNDATIONS:
        raise InputError(f"{what}: foundation must be 'rigid' or 'flexible', "
                         f"got {out['foundation']!r}")
    for key in ("nominal_rpm", "power_kw"):
        v = out.get(key, math.nan)
        if not math.isnan(v) and not (math.isfinite(v) and v > 0):
            raise InputError(f"{what}: {key} must be a positive number, got {v!r}")
    if ratios is not None:
        checked = {}
        for shaft, ratio in dict(ratios).items():
            check_name(str(shaft), "shaft")
            r = _typed(ratio, float, f"speed ratio of shaft {shaft!r}", what)
            if not (math.isfinite(r) and r > 0):
                raise InputError(f"{what}: speed ratio of shaft {shaft!r} must be a "
                                 f"positive number, got {ratio!r}")
            checked[str(shaft)] = r
        ratios = checked
    return out, ratios


def point_props(props: dict, *, what: str, current_unit: str = "g"
                ) -> tuple[dict, list[str] | None]:
    """Validated point properties and the mapping patterns, if given.

    Accepts the keys of :data:`POINT_FIELDS`, ``sensitivity`` (V per unit as a number,
    or text such as ``"100mV/g"``), ``mapping_patterns`` (file-name globs) and
    ``quantity`` (checked against the unit, never stored on its own).
    """
    # Imported here: engine.spectrum pulls in scipy.signal, which a reader of the
    # archive (or a writer that only imports runs) does not need.
    from ..spectrum import MAX_LINES, MIN_LINES
    from ..windows import window_name

    props = dict(props)
    patterns = props.pop("mapping_patterns", None)
    quantity = props.pop("quantity", None)
    if "sensitivity" in props:
        props["sensitivity_v_per_unit"] = props.pop("sensitivity")
    unknown = sorted(set(props) - set(POINT_FIELDS))
    if unknown:
        raise InputError(f"{what}: unknown point propert{'y' if len(unknown) == 1 else 'ies'} "
                         f"{', '.join(unknown)}; expected {', '.join(POINT_FIELDS)}, "
                         "sensitivity or mapping_patterns")
    out = {}
    sens = props.pop("sensitivity_v_per_unit", None)
    for key, value in props.items():
        kind, default = POINT_FIELDS[key]
        out[key] = default if value is None else _typed(value, kind, key, what)
    sym = current_unit
    if "unit" in out:
        sym = out["unit"] = unit(out["unit"], source=what, field="unit").symbol
    if quantity is not None and quantity != quantity_of(sym):
        raise InputError(f"{what}: quantity {quantity!r} does not match unit {sym} "
                         f"({quantity_of(sym)})")
    if sens is not None:
        if isinstance(sens, str):
            v_per_unit, sens_unit = parse_sensitivity(sens, default_unit=sym)
            if sens_unit != sym:
                raise InputError(f"{what}: sensitivity {sens!r} is per {sens_unit} but the "
                                 f"point's unit is {sym}")
        else:
            v_per_unit = _typed(sens, float, "sensitivity", what)
            if not math.isnan(v_per_unit) and not (math.isfinite(v_per_unit) and v_per_unit > 0):
                raise InputError(f"{what}: sensitivity must be a positive number of volts "
                                 f"per {sym}, got {sens!r}")
        out["sensitivity_v_per_unit"] = v_per_unit
    if out.get("direction", "") not in ("",) + DIRECTIONS:
        raise InputError(f"{what}: direction must be one of {', '.join(DIRECTIONS)}, "
                         f"got {out['direction']!r}")
    if "window" in out:
        out["window"] = window_name(out["window"])
    if "lines" in out and not MIN_LINES <= out["lines"] <= MAX_LINES:
        raise InputError(f"{what}: lines must be between {MIN_LINES} and {MAX_LINES}, "
                         f"got {out['lines']}")
    if "overlap" in out and not 0.0 <= out["overlap"] <= 0.9:
        raise InputError(f"{what}: overlap must be between 0 and 0.9, got {out['overlap']}")
    if "averages" in out and out["averages"] < 0:
        raise InputError(f"{what}: averages must be 0 (every frame) or more, "
                         f"got {out['averages']}")
    if "channel" in out and out["channel"] < -1:
        raise InputError(f"{what}: channel must be -1 (first non-tach channel) or a "
                         f"channel number, got {out['channel']}")
    fmax = out.get("fmax_hz", math.nan)
    if not math.isnan(fmax) and not (math.isfinite(fmax) and fmax > 0):
        raise InputError(f"{what}: fmax_hz must be a positive number of Hz, got {fmax!r}")
    if patterns is not None:
        if isinstance(patterns, str):
            patterns = [patterns]
        patterns = [str(p) for p in patterns]
        if any(not p.strip() or "/" in p or "\\" in p for p in patterns):
            raise InputError(f"{what}: mapping patterns are globs on a file name "
                             f"(no folders), got {patterns!r}")
    return out, patterns


def string_array(values) -> np.ndarray:
    """A numpy array of variable-length UTF-8 strings for an HDF5 attribute or dataset."""
    return np.array([str(v) for v in values], dtype=h5py.string_dtype("utf-8"))


def text(value) -> str:
    """An HDF5 string attribute (bytes or str) as str."""
    return value.decode("utf-8") if isinstance(value, bytes) else str(value)


def stored_version(f: h5py.File, source: str) -> int:
    """The schema version of an open file; ArchiveError when newer than this code."""
    raw = f.attrs.get("schema_version", 0)
    try:
        version = int(raw)
    except (TypeError, ValueError):
        raise ArchiveError(f"{source}: attribute schema_version {raw!r} is not a whole "
                           "number") from None
    if version > SCHEMA_VERSION:
        raise NewerSchemaError(f"{source}: written by a newer Shaftwatch (schema {version}, "
                           f"this version reads up to {SCHEMA_VERSION}); update Shaftwatch")
    if version < 0:
        raise ArchiveError(f"{source}: schema_version {version} is not valid")
    return version


_MEMORY_TYPES = {str: (h5py.string_dtype(), h5t.py_create(h5py.string_dtype())),
                 int: (np.dtype("<i8"), h5t.py_create(np.dtype("<i8"))),
                 float: (np.dtype("<f8"), h5t.py_create(np.dtype("<f8")))}


_NOT_READ = object()


def _read_scalar(a, kind):
    """A scalar attribute read straight into memory of its known type, or
    ``_NOT_READ`` when its stored type does not allow that (h5py then reads it)."""
    dtype, mtype = _MEMORY_TYPES[kind]
    buf = np.zeros((), dtype=dtype)
    try:
        a.read(buf, mtype=mtype)
    except (TypeError, ValueError, OSError):
        return _NOT_READ
    value = buf[()]
    return value.decode("utf-8", "surrogateescape") if isinstance(value, bytes) else value


def read_attrs(g: h5py.HLObject, kinds: dict[str, type], arrays: tuple[str, ...] = ()
                ) -> tuple[dict, dict]:
    """Known scalar attributes of a group or dataset read straight into their type, and
    the others (``arrays`` are known attributes read the ordinary way).

    h5py's ``attrs[name]`` asks HDF5 for the type of every attribute; reading the
    known ones into a preset memory type is about three times faster, which is most of
    the time of opening an archive with many points.  Anything unexpected (an array, a
    type HDF5 cannot convert) is read the ordinary way.
    """
    known, gid = {}, g.id
    for name, kind in kinds.items():
        try:
            a = h5a.open(gid, name.encode("utf-8"))
        except KeyError:
            continue
        value = _read_scalar(a, kind) if a.shape == () else _NOT_READ
        known[name] = g.attrs[name] if value is _NOT_READ else value
    for name in arrays:
        if name in g.attrs:
            known[name] = g.attrs[name]
    extra = {}
    if h5a.get_num_attrs(gid) > len(known):
        extra = {k: g.attrs[k] for k in g.attrs if k not in known}
    return known, extra


#: HDF5 memory type of a variable-length UTF-8 string.
STRING_MEMORY_TYPE = _MEMORY_TYPES[str][1]



def _v0_to_v1(f: h5py.File) -> None:
    """Schema 0 (before the first release) had no ``created_by``, no reserved groups and
    points without ``key``, ``mapping_patterns`` or analysis settings."""
    if "created_by" not in f.attrs:
        f.attrs["created_by"] = "unknown (upgraded from schema 0)"
    f.attrs.setdefault("plant_name", "")
    for name in RESERVED_PLANT_GROUPS:
        f.require_group(name)
    sites = f.require_group("sites")
    for site_name, site in sites.items():
        site.attrs.setdefault("name", site_name)
        site.attrs.setdefault("description", "")
        for tag, machine in site.require_group("machines").items():
            for field, (_, default) in MACHINE_FIELDS.items():
                machine.attrs.setdefault(field, default)
            machine.attrs.setdefault("tag", tag)
            for name in RESERVED_MACHINE_GROUPS:
                machine.require_group(name)
            for pname, point in machine.require_group("points").items():
                for field, (_, default) in POINT_FIELDS.items():
                    point.attrs.setdefault(field, default)
                point.attrs.setdefault("quantity", quantity_of(text(point.attrs["unit"])))
                if "mapping_patterns" not in point.attrs:
                    point.attrs["mapping_patterns"] = string_array([])
                if "key" not in point.attrs:
                    # Schema 0 named run folders by the plain slug of the point path.
                    point.attrs["key"] = point_key(site_name, tag, pname)
                for name in RESERVED_POINT_GROUPS:
                    point.require_group(name)


#: Upgrade steps: version -> function that brings an open r+ plant file to version + 1.
MIGRATIONS: dict[int, Callable[[h5py.File], None]] = {0: _v0_to_v1}


def migrate(f: h5py.File, source: str) -> list[str]:
    """Upgrade an open (writable) plant file to :data:`SCHEMA_VERSION`, step by step.

    Returns
    -------
    list of str
        One line per step applied, for the notices of the archive.
    """
    version = stored_version(f, source)
    done = []
    while version < SCHEMA_VERSION:
        MIGRATIONS[version](f)
        version += 1
        f.attrs["schema_version"] = np.int64(version)
        done.append(f"{source}: upgraded from schema {version - 1} to {version}")
    return done
