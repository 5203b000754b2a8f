"""Alarm plans: a point's bands, what each measures, and its alert and danger levels.

A plan is a list of bands.  Each band names what it measures (:data:`MEASURES`), where
(a frequency range in Hz, or in orders of the point's shaft speed so that it follows
speed), in which unit and scale, and the two levels.  :meth:`AlarmPlan.validate` checks
all of it and names the band and the field of every problem; which units, scales and
edges fit each measure is set out in :mod:`engine.alarms.rules`.

Plan file format (``shaftwatch-alarm-plan``, version 1)
-------------------------------------------------------
A UTF-8 JSON object::

    {"format": "shaftwatch-alarm-plan", "version": 1,
     "plan": {"name": "P-101 motor DE", "origin": "user", "note": "",
              "bands": [{"name": "1x", "measure": "band_rms", "unit": "mm/s",
                         "scale": "rms", "low": 0.8, "high": 1.2, "basis": "order",
                         "alert": 2.8, "danger": 4.5}]}}

Every band field of :class:`Band` may be given; ``name``, ``measure``, ``alert`` and
``danger`` must be; the others take the defaults of :class:`Band` (``low`` / ``high``
``null`` or absent for no edges).  Unknown fields are refused (a misspelt field would
otherwise be silently dropped).  A file whose name ends ``.toml`` holds the same
structure in TOML: top-level ``format`` and ``version``, a ``[plan]`` table and one
``[[plan.bands]]`` table per band, with ``low``/``high`` left out for no edges.  A
file without ``origin`` gets ``"file <name>"``.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
import tomllib
from dataclasses import asdict, dataclass
from pathlib import Path

from ..errors import InputError
from ..levels import velocity_band_for
from ..units import unit
from .rules import (BAND_FIELDS, BAND_SCALES, BASES, DEFECTS, DIMENSIONLESS,
                    MEASURE_QUANTITIES, MEASURES, band_fields, check_band, finite_rpm,
                    is_number, text_field)

__all__ = ["AlarmPlan", "BAND_FIELDS", "BAND_SCALES", "BASES", "Band", "DEFECTS",
           "DIMENSIONLESS", "FILE_FORMAT", "FILE_VERSION", "MEASURES", "MEASURE_QUANTITIES",
           "plan_to_toml", "read_plan_file", "write_plan_file"]

FILE_FORMAT = "shaftwatch-alarm-plan"
FILE_VERSION = 1
_PLAN_KEYS = ("name", "bands", "origin", "note")


@dataclass(frozen=True)
class Band:
    """One alarm band.

    Attributes
    ----------
    name : str
        Unique within a plan, e.g. ``"overall velocity"``, ``"1x"``, ``"envelope BPFO"``.
    measure : str
        One of :data:`MEASURES`.
    alert, danger : float
        Levels in ``unit`` and ``scale``; a value at or above a level has crossed it.
    unit : str
        An :mod:`engine.units` symbol; ``"1"`` for crest factor and kurtosis.
    scale : str
        ``rms``, ``peak`` or ``pp``; ``""`` for crest factor and kurtosis.
    low, high : float or None
        Band edges, Hz (basis ``hz``) or orders of the point's shaft speed (basis
        ``order``).
    basis : str
        ``hz`` or ``order``.
    defect : str
        For measure ``defect``: one of :data:`DEFECTS` of the point's bearing.
    """

    name: str
    measure: str
    alert: float
    danger: float
    unit: str = "mm/s"
    scale: str = "rms"
    low: float | None = None
    high: float | None = None
    basis: str = "hz"
    defect: str = ""

    def edges_hz(self, rpm: float) -> tuple[float, float] | None:
        """The band's edges in Hz at a shaft speed.

        Parameters
        ----------
        rpm : float
            Speed of the point's shaft, rev/min (NaN or None when unknown).

        Returns
        -------
        (low_hz, high_hz) or None
            ``None`` when the band has no frequency range (defect, crest factor,
            kurtosis, envelope without edges) or is in orders and the speed is unknown.
            ``overall`` without edges gives the ISO broadband range for the speed.
        """
        r = finite_rpm(rpm)
        if self.low is None or self.high is None:
            return velocity_band_for(r) if self.measure == "overall" else None
        if self.basis == "order":
            if r is None:
                return None
            shaft_hz = r / 60.0
            return float(self.low) * shaft_hz, float(self.high) * shaft_hz
        return float(self.low), float(self.high)

    @property
    def quantity(self) -> str:
        """``acceleration``, ``velocity``, ``displacement`` or ``"1"`` (dimensionless)."""
        return "1" if self.unit == "1" else unit(self.unit).quantity

    def validate(self, *, fmax_hz: float | None = None, envelope_fmax_hz: float | None = None,
                 rpm: float | None = None, source: str = "alarm plan") -> None:
        """Check this band alone; see :meth:`AlarmPlan.validate`."""
        check_band(self, fmax_hz=fmax_hz, envelope_fmax_hz=envelope_fmax_hz, rpm=rpm,
                   source=source)

    def as_dict(self) -> dict:
        d = asdict(self)
        for key in ("alert", "danger", "low", "high"):
            if d[key] is not None:
                d[key] = float(d[key])
        return d


@dataclass(frozen=True)
class AlarmPlan:
    """A point's alarm plan.

    Attributes
    ----------
    name : str
    bands : tuple of Band
    origin : str
        Where the levels came from, e.g. ``"ISO 20816-3 group 2, rigid (generic)"``,
        ``"baseline of 5 runs (sigma)"``, ``"file plant.json"``, ``"user"``.
    note : str
        Free text shown with the plan.
    """

    name: str
    bands: tuple[Band, ...]
    origin: str = "user"
    note: str = ""

    def __post_init__(self) -> None:
        if not isinstance(self.bands, tuple):
            object.__setattr__(self, "bands", tuple(self.bands))

    def band(self, name: str) -> Band:
        """The band called ``name``; InputError when the plan has none."""
        for b in self.bands:
            if b.name == name:
                return b
        raise InputError(f"alarm plan {self.name!r} has no band {name!r}; its bands are "
                         + ", ".join(repr(b.name) for b in self.bands))

    @property
    def band_names(self) -> tuple[str, ...]:
        return tuple(b.name for b in self.bands)

    def validate(self, *, fmax_hz: float | None = None, source: str = "alarm plan",
                 rpm: float | None = None, envelope_fmax_hz: float | None = None) -> None:
        """Check the whole plan.

        Parameters
        ----------
        fmax_hz : float, optional, keyword-only
            Fmax of the point's spectrum, Hz; bands reaching above it are refused.
        source : str
            Named first in every message (a file name, ``"alarm plan"``).
        rpm : float, optional
            Shaft speed, rev/min; order bands are checked against Fmax at this speed
            (without it they are checked when measured).
        envelope_fmax_hz : float, optional
            Fmax of the envelope spectrum, Hz, for envelope bands.

        Raises
        ------
        InputError
            Naming the band and the field: an unknown measure, basis, defect, unit or
            scale; a unit that does not fit the measure; levels not positive or alert
            not below danger; low not below high; a band above Fmax; a duplicate name;
            a plan without a name or without bands.
        """
        if not isinstance(self.name, str) or not self.name.strip():
            raise InputError(f"{source}: name must be a non-empty text, got {self.name!r}")
        if not self.bands:
            raise InputError(f"{source}: plan {self.name!r} has no bands; add at least one")
        seen: set[str] = set()
        for b in self.bands:
            if not isinstance(b, Band):
                raise InputError(f"{source}: bands must be Band objects, got "
                                 f"{type(b).__name__}")
            check_band(b, fmax_hz=fmax_hz, envelope_fmax_hz=envelope_fmax_hz, rpm=rpm,
                       source=source)
            if b.name in seen:
                raise InputError(f"{source}: band {b.name!r}: name is used by more than one "
                                 "band; band names must be unique")
            seen.add(b.name)
        for key in ("origin", "note"):
            if not isinstance(getattr(self, key), str):
                raise InputError(f"{source}: {key} must be text, got {getattr(self, key)!r}")

    def as_dict(self) -> dict:
        """Plain dict (JSON-ready) of the plan; :meth:`from_dict` reads it back."""
        return {"name": self.name, "origin": self.origin, "note": self.note,
                "bands": [b.as_dict() for b in self.bands]}

    @classmethod
    def from_dict(cls, data, *, source: str = "alarm plan") -> AlarmPlan:
        """A validated plan from :meth:`as_dict`'s structure (see the module notes).

        Raises
        ------
        InputError
            Naming ``source``, the band and the field of the first problem.
        """
        if not isinstance(data, dict):
            raise InputError(f"{source}: the plan must be a table/object, got "
                             f"{type(data).__name__}")
        unknown = sorted(set(data) - set(_PLAN_KEYS))
        if unknown:
            raise InputError(f"{source}: unknown plan field {unknown[0]!r}; expected "
                             + ", ".join(_PLAN_KEYS))
        name = text_field(data.get("name"), "name", source, required=True)
        raw_bands = data.get("bands")
        if not isinstance(raw_bands, list):
            raise InputError(f"{source}: bands must be a list of bands, got "
                             f"{type(raw_bands).__name__}")
        bands = tuple(Band(**band_fields(d, i, source)) for i, d in enumerate(raw_bands))
        plan = cls(name=name, bands=bands,
                   origin=text_field(data.get("origin", "user"), "origin", source),
                   note=text_field(data.get("note", ""), "note", source))
        plan.validate(source=source)
        return plan

    def digest(self) -> str:
        """First 16 hex digits of the SHA-256 of the plan's canonical JSON.

        Canonical: keys sorted, no spaces, numbers as floats, ASCII.  Two plans with
        the same digest evaluate every run alike.  (A plan that does not validate
        still has a digest; NaN is written as the token ``NaN``.)
        """
        text = json.dumps(self.as_dict(), sort_keys=True, separators=(",", ":"),
                          ensure_ascii=True, allow_nan=True)
        return hashlib.sha256(text.encode("ascii")).hexdigest()[:16]


def _document(plan: AlarmPlan) -> dict:
    return {"format": FILE_FORMAT, "version": FILE_VERSION, "plan": plan.as_dict()}


def read_plan_file(path) -> AlarmPlan:
    """Read an alarm plan file (JSON, or TOML when the name ends ``.toml``).

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    AlarmPlan
        Validated; origin ``"file <name>"`` when the file gives none.

    Raises
    ------
    InputError
        Naming the file and the problem: unreadable, not JSON/TOML (with line and
        column), another format or a newer version, or a bad plan (band and field).
    """
    p = Path(path)
    src = str(p)
    try:
        raw = p.read_bytes()
    except OSError as e:
        raise InputError(f"{src}: cannot read the alarm plan file ({e.strerror or e})") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        raise InputError(f"{src}: not UTF-8 text (byte {e.start})") from None
    if p.suffix.lower() == ".toml":
        try:
            doc = tomllib.loads(text)
        except tomllib.TOMLDecodeError as e:
            raise InputError(f"{src}: not valid TOML: {e}") from None
    else:
        try:
            doc = json.loads(text)
        except json.JSONDecodeError as e:
            raise InputError(f"{src}: not valid JSON at line {e.lineno} column {e.colno}: "
                             f"{e.msg}") from None
    if not isinstance(doc, dict):
        raise InputError(f"{src}: an alarm plan file holds an object with format, version "
                         "and plan")
    if doc.get("format") != FILE_FORMAT:
        raise InputError(f"{src}: format must be {FILE_FORMAT!r}, got {doc.get('format')!r}")
    version = doc.get("version")
    if not isinstance(version, int) or isinstance(version, bool) or not 1 <= version <= FILE_VERSION:
        raise InputError(f"{src}: version {version!r} is not readable; this version reads "
                         f"1 to {FILE_VERSION}")
    body = doc.get("plan")
    if isinstance(body, dict) and "origin" not in body:
        body = {**body, "origin": f"file {p.name}"}
    return AlarmPlan.from_dict(body, source=src)


def _toml_string(s: str) -> str:
    # JSON string escapes (\" \\ \n \t \u00e9) are TOML basic-string escapes too; DEL
    # must be escaped in TOML and JSON leaves it as it is.
    return json.dumps(s, ensure_ascii=False).replace("\x7f", "\\u007F")


def _toml_value(v) -> str:
    if isinstance(v, str):
        return _toml_string(v)
    if isinstance(v, bool) or not is_number(v):
        raise InputError(f"cannot write {v!r} to TOML")
    return repr(float(v)) if not isinstance(v, int) else str(v)


def plan_to_toml(plan: AlarmPlan) -> str:
    """The plan file's structure as TOML text (``low``/``high`` left out when None)."""
    doc = _document(plan)
    out = [f"format = {_toml_value(doc['format'])}", f"version = {doc['version']}", "",
           "[plan]"]
    body = doc["plan"]
    out += [f"{k} = {_toml_value(body[k])}" for k in ("name", "origin", "note")]
    for band in body["bands"]:
        out += ["", "[[plan.bands]]"]
        out += [f"{k} = {_toml_value(v)}" for k, v in band.items() if v is not None]
    return "\n".join(out) + "\n"


def write_plan_file(plan: AlarmPlan, path) -> None:
    """Write a plan file (TOML when the name ends ``.toml``, JSON otherwise).

    The plan is validated first and the file replaced in one step (written beside it
    and renamed), so a failed write leaves any earlier file as it was.

    Raises
    ------
    InputError
        A bad plan, or a file that cannot be written (naming the file).
    """
    p = Path(path)
    plan.validate(source=str(p))
    if p.suffix.lower() == ".toml":
        text = plan_to_toml(plan)
    else:
        text = json.dumps(_document(plan), indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".tmp", dir=p.parent or ".")
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, p)
        tmp = None
    except OSError as e:
        raise InputError(f"{p}: cannot write the alarm plan file ({e.strerror or e})") from None
    finally:
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)
