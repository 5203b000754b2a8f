"""``shaftwatch model`` and ``bearings``: machine models and the archive's bearing list.

``shaftwatch model ARCHIVE SITE/MACHINE`` shows a machine's kinematic model (shafts and
speed ratios, gear pairs, belt drives, blade rows, bearings with their defect orders,
line frequency and poles); ``--set FILE.json`` replaces it with a model file,
``--export FILE.json`` writes it to one, and the editing options add or remove one part
each (several may be given at once: removals are applied first, then additions, and the
result is checked as a whole before anything is stored).  The machine's speed ratios
follow the model.  ``shaftwatch bearings ARCHIVE`` lists, adds and removes entries of
the archive-wide bearing list, from which ``model --add-bearing … --from-list LABEL``
copies a geometry.  ``shaftwatch diagnose`` is registered here too
(:mod:`engine.commands.diagnose_cmds`).

Model file format
-----------------
A UTF-8 JSON object, exactly what :meth:`engine.kinematics.MachineModel.as_dict`
writes (``--export`` writes it; ``--json`` shows it under ``"model"``)::

    {"version": 1,
     "shafts":   [{"name": "motor", "ratio": 1.0}, {"name": "input", "ratio": null},
                  {"name": "output", "ratio": null}],
     "belts":    [{"driver_shaft": "motor", "driven_shaft": "input",
                   "driver_diameter": 180.0, "driven_diameter": 250.0,
                   "belt_length": 2000.0}],
     "gears":    [{"driver_shaft": "input", "driven_shaft": "output",
                   "driver_teeth": 23, "driven_teeth": 67}],
     "blades":   [{"shaft": "output", "count": 4}],
     "bearings": [{"shaft": "input", "label": "gearbox input",
                   "geometry": {"label": "11 x 19.8 mm", "elements": 11,
                                "element_diameter": 19.8, "pitch_diameter": 104.0,
                                "contact_angle_deg": 15.0, "unit": "mm"}}],
     "line_frequency_hz": 50.0, "motor_shaft": "motor", "poles": 4}

* ``shafts`` (at least one): ``ratio`` is the shaft's speed over the reference shaft's
  (the motor, 1.0), or ``null`` when a gear pair or belt from a shaft of known ratio
  gives it.  Every other list may be empty or left out.
* ``gears``: the driven shaft turns at ``driver_teeth / driven_teeth`` of the driver.
* ``belts``: pulley pitch diameters and the optional belt length (``null``: no belt
  frequency) in one length unit, mm by convention; the driven pulley turns at
  ``driver_diameter / driven_diameter`` (within 3 % of the shafts' ratios: creep).
* ``blades``: ``count`` blades or vanes on ``shaft``.
* ``bearings``: ``label`` is where the bearing sits, written as the points' location
  (e.g. ``"pump DE"``), so that a point there gets its defect frequencies;
  ``geometry`` holds the fields of :class:`engine.bearings.BearingGeometry` (diameters
  in ``unit``: ``mm``, ``in`` or ``m``; contact angle in degrees).
* ``line_frequency_hz`` (Hz, ``null`` for none), ``motor_shaft`` and ``poles`` (even,
  needs the other two) give line, 2× line and pole-pass frequencies.

Unknown fields are refused; every error names the file and the field
(``model.json: machine model: gears[0].driver_teeth must be …``).
"""

from __future__ import annotations

import argparse
import json
import os
import re
from pathlib import Path

from ..bearings import BearingGeometry, defect_orders
from ..errors import InputError
from ..kinematics import BearingAt, BeltDrive, BladeRow, GearPair, MachineModel, Shaft
from .archive_cmds import _archive
from .common import add_json_option, emit_json, fmt, print_pairs, print_table
from .peak_labels import read_model_file

_DOC = __doc__ or ""
#: The model file format for ``model --help``: the module notes without reST markup.
MODEL_FORMAT_HELP = re.sub(r":\w+:`~?([^`]+)`", r"\1",
                           _DOC[_DOC.find("Model file format"):]).replace("``", "") \
    if "Model file format" in _DOC else ""
_GEOMETRY = ("elements", "element_diameter", "pitch_diameter", "contact_angle",
             "geometry_unit")
_EDITS = ("remove_shaft", "remove_gear", "remove_belt", "remove_blades", "remove_bearing",
          "add_shaft", "add_gear", "add_belt", "add_blades", "add_bearing",
          "line_frequency", "poles", "motor_shaft")


def add_geometry_options(p: argparse.ArgumentParser, title: str) -> None:
    """Bearing geometry options, all optional (checked together by :func:`geometry`)."""
    g = p.add_argument_group(title)
    g.add_argument("--elements", type=int, metavar="N", help="number of rolling elements")
    g.add_argument("--element-diameter", type=float, metavar="D",
                   help="rolling-element diameter, in --geometry-unit")
    g.add_argument("--pitch-diameter", type=float, metavar="P",
                   help="pitch-circle diameter, in --geometry-unit")
    g.add_argument("--contact-angle", type=float, metavar="DEG",
                   help="contact angle, degrees (default 0)")
    g.add_argument("--geometry-unit", choices=("mm", "in"), metavar="mm|in",
                   help="unit of the diameters (default mm)")


def geometry(args: argparse.Namespace, label: str | None) -> BearingGeometry | None:
    """The geometry the options give (None when none of them is given).

    ``label`` names the geometry; ``None`` makes one from the numbers
    (``"9 × 17.5 mm on 80 mm"``).
    """
    need = {"--elements": args.elements, "--element-diameter": args.element_diameter,
            "--pitch-diameter": args.pitch_diameter}
    extra = {"--contact-angle": args.contact_angle, "--geometry-unit": args.geometry_unit}
    if all(v is None for v in (*need.values(), *extra.values())):
        return None
    missing = [k for k, v in need.items() if v is None]
    if missing:
        raise InputError(f"bearing geometry needs {', '.join(need)} together; missing "
                         + ", ".join(missing))
    unit = args.geometry_unit or "mm"
    angle = 0.0 if args.contact_angle is None else args.contact_angle
    if label is None:
        label = (f"{args.elements} × {args.element_diameter:g} {unit} on "
                 f"{args.pitch_diameter:g} {unit}" + (f", {angle:g}°" if angle else ""))
    return BearingGeometry(label, args.elements, args.element_diameter, args.pitch_diameter,
                           angle, unit)


def _machine_path(text: str) -> tuple[str, str]:
    site, sep, tag = text.partition("/")
    if not sep or not site or not tag or "/" in tag:
        raise InputError(f"machine {text!r} must be written SITE/MACHINE, e.g. "
                         "'Demo Works/P-102'")
    return site, tag


# -- editing -------------------------------------------------------------------------------
def _number(text: str, option: str, what: str, kind=float):
    try:
        return kind(text)
    except ValueError:
        raise InputError(f"{option}: {what} must be a {'whole ' if kind is int else ''}"
                         f"number, got {text!r}") from None


def _part(cls, option: str, *values):
    """A part from the option's values; its field errors name the option."""
    try:
        return cls(*values)
    except InputError as exc:
        raise InputError(f"{option}: {exc}") from None


def _drop(items: list, match, option: str, what: str, known: list[str]) -> list:
    kept = [x for x in items if not match(x)]
    if len(kept) == len(items):
        raise InputError(f"{option}: the model has no {what}; it has "
                         + (", ".join(known) or "none"))
    return kept


def _link_names(items) -> list[str]:
    return [f"{x.driver_shaft} {x.driven_shaft}" for x in items]


def _optional(text: str, option: str, kind):
    return None if text.lower() == "none" else _number(text, option, "the value", kind)


def edited_model(base: MachineModel | None, args: argparse.Namespace, *,
                 ratios: dict[str, float], machine: str, arc=None) -> MachineModel:
    """``base`` with the editing options applied (removals first, then additions).

    Without a ``base`` the edits start from the machine's shafts and speed ratios
    (``ratios``).  ``arc`` gives the bearing list for ``--from-list``.  Raises
    InputError naming the option, or the field of the resulting model.
    """
    if base is not None:
        shafts, gears, belts = list(base.shafts), list(base.gears), list(base.belts)
        blades, bearings = list(base.blades), list(base.bearings)
        line, motor, poles = base.line_frequency_hz, base.motor_shaft, base.poles
    else:
        shafts = [Shaft(n, r) for n, r in ratios.items()]
        gears, belts, blades, bearings, line, motor, poles = [], [], [], [], None, None, None
    if args.remove_shaft:
        shafts = _drop(shafts, lambda s: s.name == args.remove_shaft, "--remove-shaft",
                       f"shaft {args.remove_shaft!r}", [s.name for s in shafts])
    if args.remove_gear:
        a, b = args.remove_gear
        gears = _drop(gears, lambda g: (g.driver_shaft, g.driven_shaft) == (a, b),
                      "--remove-gear", f"gear pair from {a!r} to {b!r}", _link_names(gears))
    if args.remove_belt:
        a, b = args.remove_belt
        belts = _drop(belts, lambda x: (x.driver_shaft, x.driven_shaft) == (a, b),
                      "--remove-belt", f"belt drive from {a!r} to {b!r}", _link_names(belts))
    if args.remove_blades:
        blades = _drop(blades, lambda r: r.shaft == args.remove_blades, "--remove-blades",
                       f"blade row on {args.remove_blades!r}",
                       [f"{r.count} on {r.shaft}" for r in blades])
    if args.remove_bearing:
        bearings = _drop(bearings, lambda b: b.label == args.remove_bearing,
                         "--remove-bearing", f"bearing at {args.remove_bearing!r}",
                         [b.label for b in bearings])
    if args.add_shaft:
        name, sep, value = args.add_shaft.partition("=")
        ratio = _number(value, "--add-shaft", "the ratio") if sep else None
        shaft = _part(Shaft, "--add-shaft", name, ratio)
        if shaft.name in [s.name for s in shafts]:
            raise InputError(f"--add-shaft: the model already has shaft {shaft.name!r}; "
                             "remove it first (--remove-shaft in the same command)")
        shafts.append(shaft)
    if args.add_gear:
        a, b, za, zb = args.add_gear
        gears.append(_part(GearPair, "--add-gear", a, b,
                           _number(za, "--add-gear", "DRIVER_TEETH", int),
                           _number(zb, "--add-gear", "DRIVEN_TEETH", int)))
    if args.add_belt:
        if len(args.add_belt) not in (4, 5):
            raise InputError("--add-belt takes DRIVER DRIVEN D_DRIVER D_DRIVEN [LENGTH], "
                             f"got {len(args.add_belt)} values")
        a, b, *sizes = args.add_belt
        what = ("D_DRIVER", "D_DRIVEN", "LENGTH")
        belts.append(_part(BeltDrive, "--add-belt", a, b,
                           *[_number(v, "--add-belt", w) for v, w in zip(sizes, what)]))
    if args.add_blades:
        shaft, count = args.add_blades
        blades.append(_part(BladeRow, "--add-blades", shaft,
                            _number(count, "--add-blades", "COUNT", int)))
    if args.add_bearing:
        bearings.append(_new_bearing(args, bearings, arc))
    elif args.from_list or geometry(args, "check") is not None:
        raise InputError("--from-list and the bearing geometry options go with "
                         "--add-bearing SHAFT LOCATION")
    if args.line_frequency:
        line = _optional(args.line_frequency, "--line-frequency", float)
        if line is None:
            poles = None
    if args.motor_shaft:
        motor = args.motor_shaft
    if args.poles:
        poles = _optional(args.poles, "--poles", int)
    if poles is not None and motor is None:
        # A model without a motor shaft: the reference shaft (ratio 1.0) drives it.
        motor = next((s.name for s in shafts if s.ratio == 1.0), None)
    try:
        return MachineModel(tuple(shafts), gears=tuple(gears), belts=tuple(belts),
                            blades=tuple(blades), bearings=tuple(bearings),
                            line_frequency_hz=line, motor_shaft=motor, poles=poles)
    except InputError as exc:
        text = str(exc).removeprefix("machine model: ")
        raise InputError(f"machine model of {machine} after the edits: {text}") from None


def _new_bearing(args: argparse.Namespace, bearings: list[BearingAt], arc) -> BearingAt:
    shaft, location = args.add_bearing
    geo = geometry(args, None)
    if (geo is None) == (args.from_list is None):
        raise InputError("--add-bearing needs either --from-list LABEL (an entry of the "
                         "bearing list) or --elements, --element-diameter and "
                         "--pitch-diameter")
    if geo is None:
        geo = arc.bearing(args.from_list)
    if location in [b.label for b in bearings]:
        raise InputError(f"--add-bearing: the model already has a bearing at {location!r}; "
                         "remove it first (--remove-bearing in the same command)")
    return _part(BearingAt, "--add-bearing", shaft, geo, location)


# -- showing -------------------------------------------------------------------------------
def describe(model: MachineModel) -> dict:
    """What follows from a model: resolved ratios and the orders of its parts (orders of
    the reference shaft; a bearing's defect orders are of its own shaft's speed)."""
    r = model.ratios
    syn = None
    if model.poles and model.line_frequency_hz:
        syn = 120.0 * model.line_frequency_hz / model.poles  # synchronous speed, rpm
    return {
        "ratios": r,
        "gears": [{"name": g.name, "ratio": g.ratio,
                   "mesh_order": g.driver_teeth * r[g.driver_shaft]} for g in model.gears],
        "belts": [{"name": b.name, "ratio": b.ratio,
                   "belt_order": None if b.belt_order() is None
                   else b.belt_order() * r[b.driver_shaft]} for b in model.belts],
        "blades": [{"shaft": x.shaft, "count": x.count, "pass_order": x.count * r[x.shaft]}
                   for x in model.blades],
        "bearings": [{"label": b.label, "shaft": b.shaft, "geometry": b.geometry.label,
                      "orders": defect_orders(b.geometry).as_dict()} for b in model.bearings],
        "synchronous_rpm": syn,
    }


def _print_model(machine: str, nominal, model: MachineModel | None, speed_ratios: dict,
                 points: list[dict]) -> None:
    print(f"machine model of {machine}"
          + (f" (nominal {fmt(nominal)} rpm)" if nominal else ""))
    if model is None:
        print("  no machine model stored; speed ratios of the machine: "
              + (", ".join(f"{k} {v:g}" for k, v in speed_ratios.items()) or "none"))
    else:
        d = describe(model)
        print()
        speed = [f"rpm at {fmt(nominal)}"] if nominal else []
        print_table(["shaft", "ratio", "given as"] + speed,
                    [[s.name, d["ratios"][s.name],
                      "ratio" if s.ratio is not None else "from gear/belt"]
                     + ([d["ratios"][s.name] * nominal] if nominal else [])
                     for s in model.shafts])
        if model.gears:
            print()
            print_table(["gear pair", "teeth", "ratio", "mesh order"],
                        [[g.name, f"{g.driver_teeth}/{g.driven_teeth}", x["ratio"],
                          x["mesh_order"]] for g, x in zip(model.gears, d["gears"])])
        if model.belts:
            print()
            print_table(["belt drive", "pulleys", "belt length", "ratio", "belt order"],
                        [[b.name, f"{b.driver_diameter:g}/{b.driven_diameter:g}",
                          b.belt_length, x["ratio"], x["belt_order"]]
                         for b, x in zip(model.belts, d["belts"])])
        if model.blades:
            print()
            print_table(["blade row", "count", "blade pass order"],
                        [[x["shaft"], x["count"], x["pass_order"]] for x in d["blades"]])
        if model.bearings:
            print()
            print("bearings (defect frequencies in orders of their shaft's speed)")
            print_table(["location", "shaft", "geometry", "FTF", "BSF", "2×BSF", "BPFO",
                         "BPFI"],
                        [[x["label"], x["shaft"], x["geometry"], *(x["orders"][k] for k in
                          ("ftf", "bsf", "bsf2", "bpfo", "bpfi"))] for x in d["bearings"]])
        print()
        print_pairs([
            ("line frequency", f"{model.line_frequency_hz:g} Hz"
             if model.line_frequency_hz else "—"),
            ("motor shaft", model.motor_shaft or "—"),
            ("poles", f"{model.poles} (synchronous {d['synchronous_rpm']:g} rpm)"
             if model.poles else "—")])
    if points:
        print()
        print_table(["point", "shaft"], [[p["name"], p["shaft"] or "—"] for p in points])


def _write_model_file(model: MachineModel, path: str) -> None:
    target = Path(path)
    tmp = target.with_name(target.name + ".tmp")
    try:
        tmp.write_text(json.dumps(model.as_dict(), indent=1, ensure_ascii=False) + "\n",
                       encoding="utf-8")
        os.replace(tmp, target)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise InputError(f"{path}: cannot write the machine model file "
                         f"({exc.strerror or exc})") from None


def run_model(args: argparse.Namespace) -> int:
    site, tag = _machine_path(args.machine)
    machine = f"{site}/{tag}"
    new = read_model_file(args.set) if args.set else None
    editing = any(getattr(args, k) for k in _EDITS) or args.from_list is not None \
        or any(getattr(args, k) is not None for k in _GEOMETRY)
    writing = new is not None or editing
    with _archive(args.archive, "w" if writing else "r",
                  "shaftwatch model" if writing else "model") as arc:
        info = arc.plant.machine(site, tag)
        stored = arc.machine_model(site, tag)
        changed = False
        if writing:
            base = new if new is not None else stored
            if editing:
                new = edited_model(base, args, ratios=info.ratios, machine=machine, arc=arc)
            if new != stored:
                arc.set_machine_model(site, tag, new)
                changed = True
            stored = arc.machine_model(site, tag)
            info = arc.plant.machine(site, tag)
        if args.export:
            if stored is None:
                raise InputError(f"{args.archive}: machine {machine} has no machine model "
                                 "to export")
            _write_model_file(stored, args.export)
        points = [{"name": p.name, "shaft": arc.point_shaft(p.path)}
                  for p in info.points.values()]
    nominal = info.props.get("nominal_rpm")
    nominal = nominal if nominal == nominal else None  # NaN: not set
    if args.json:
        emit_json({"machine": machine, "nominal_rpm": nominal,
                   "model": None if stored is None else stored.as_dict(),
                   "derived": None if stored is None else describe(stored),
                   "speed_ratios": dict(info.ratios), "points": points,
                   "changed": changed, "exported": args.export})
        return 0
    if writing:
        print(f"{'stored the' if changed else 'unchanged:'} machine model of {machine}")
    if args.export:
        print(f"wrote {args.export}")
    _print_model(machine, nominal, stored, dict(info.ratios), points)
    return 0


# -- bearing list --------------------------------------------------------------------------
def _bearing_row(b: BearingGeometry, used_by: list[str]) -> dict:
    return {"label": b.label, "elements": b.elements, "element_diameter": b.element_diameter,
            "pitch_diameter": b.pitch_diameter, "contact_angle_deg": b.contact_angle_deg,
            "unit": b.unit, "orders": defect_orders(b).as_dict(), "used_by": used_by}


def _used_by(arc) -> dict[str, list[str]]:
    """Geometry label → the machine bearings (``SITE/MACHINE location``) that copy it."""
    out: dict[str, list[str]] = {}
    for site in arc.plant.sites.values():
        for tag in site.machines:
            model = arc.machine_model(site.name, tag)
            for b in (model.bearings if model is not None else ()):
                out.setdefault(b.geometry.label, []).append(f"{site.name}/{tag} {b.label}")
    return out


def run_bearings(args: argparse.Namespace) -> int:
    geo = geometry(args, args.add) if args.add else None
    if args.add and geo is None:
        raise InputError(f"--add {args.add!r} needs --elements, --element-diameter and "
                         "--pitch-diameter")
    if not args.add and geometry(args, "check") is not None:
        raise InputError("the bearing geometry options go with --add LABEL")
    if args.replace and not args.add:
        raise InputError("--replace goes with --add LABEL (it replaces the entry of that label)")
    if args.add and args.remove:
        raise InputError("give --add or --remove, not both")
    writing = bool(args.add or args.remove)
    with _archive(args.archive, "w" if writing else "r",
                  "shaftwatch bearings" if writing else "bearings") as arc:
        if args.add:
            arc.add_bearing(geo, replace=args.replace)
        elif args.remove:
            arc.remove_bearing(args.remove)
        lib = arc.bearing_library()
        used = _used_by(arc)
    rows = [_bearing_row(b, used.get(b.label, [])) for b in lib]
    if args.json:
        emit_json({"bearings": rows, "added": args.add, "removed": args.remove})
        return 0
    if args.add:
        print(f"{'replaced' if args.replace else 'added'} {args.add!r} in the bearing list")
    elif args.remove:
        print(f"removed {args.remove!r} from the bearing list (machine models keep their "
              "copies)")
    if not rows:
        print("the bearing list is empty")
        return 0
    print("defect frequencies in orders of shaft speed")
    print_table(["label", "elements", "d", "D", "angle °", "unit", "FTF", "BSF", "2×BSF",
                 "BPFO", "BPFI", "used by"],
                [[r["label"], r["elements"], r["element_diameter"], r["pitch_diameter"],
                  r["contact_angle_deg"], r["unit"],
                  *(r["orders"][k] for k in ("ftf", "bsf", "bsf2", "bpfo", "bpfi")),
                  ", ".join(r["used_by"]) or "—"] for r in rows])
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "model", help="show or edit a machine's kinematic model",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Show a machine's model: shafts with speed ratios, gear pairs, belt "
                    "drives, blade rows, bearings with defect orders, line frequency and "
                    "poles. --set stores a model file, --export writes one, and the "
                    "editing options add or remove one part each (removals first, then "
                    "additions; the result is checked before anything is stored). A "
                    "machine without a model starts from its shafts and speed ratios.\n\n"
                    + MODEL_FORMAT_HELP)
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("machine", metavar="SITE/MACHINE")
    p.add_argument("--set", metavar="FILE.json", help="replace the model with this file's")
    p.add_argument("--export", metavar="FILE.json", help="write the model to this file")
    e = p.add_argument_group("editing (one part each)")
    e.add_argument("--add-shaft", metavar="NAME[=RATIO]",
                   help="a shaft and its speed over the reference shaft's (leave =RATIO "
                        "out when a gear pair or belt added with it gives the ratio)")
    e.add_argument("--remove-shaft", metavar="NAME")
    e.add_argument("--add-gear", nargs=4,
                   metavar=("DRIVER", "DRIVEN", "DRIVER_TEETH", "DRIVEN_TEETH"),
                   help="a gear pair: shafts and tooth counts")
    e.add_argument("--remove-gear", nargs=2, metavar=("DRIVER", "DRIVEN"))
    e.add_argument("--add-belt", nargs="+", metavar="VALUE",
                   help="a belt drive: DRIVER DRIVEN D_DRIVER D_DRIVEN [LENGTH] — pulley "
                        "pitch diameters and belt length in one unit (mm by convention)")
    e.add_argument("--remove-belt", nargs=2, metavar=("DRIVER", "DRIVEN"))
    e.add_argument("--add-blades", nargs=2, metavar=("SHAFT", "COUNT"),
                   help="a row of COUNT blades or vanes on SHAFT")
    e.add_argument("--remove-blades", metavar="SHAFT", help="the blade rows on SHAFT")
    e.add_argument("--add-bearing", nargs=2, metavar=("SHAFT", "LOCATION"),
                   help="a bearing on SHAFT at LOCATION (written as the points' location, "
                        "e.g. 'pump DE'); geometry from --from-list or the geometry options")
    e.add_argument("--from-list", metavar="LABEL",
                   help="with --add-bearing: the bearing list's entry LABEL")
    e.add_argument("--remove-bearing", metavar="LOCATION")
    e.add_argument("--line-frequency", choices=("50", "60", "none"),
                   help="supply frequency of the motor, Hz ('none': no electrical sources)")
    e.add_argument("--poles", metavar="N|none",
                   help="motor poles, even (needs a line frequency; the motor shaft "
                        "defaults to the reference shaft)")
    e.add_argument("--motor-shaft", metavar="NAME", help="the motor's shaft")
    add_geometry_options(p, "bearing geometry (with --add-bearing)")
    add_json_option(p)
    p.set_defaults(func=run_model)

    p = sub.add_parser(
        "bearings", help="the archive's bearing list with defect orders",
        description="List the archive-wide bearing list with each entry's defect "
                    "frequencies (FTF, BSF, 2×BSF, BPFO, BPFI in orders of shaft speed, "
                    "inner ring turning, outer ring fixed); --add or --remove one entry. "
                    "Machine models copy a geometry when a bearing is added to them, so "
                    "changing the list does not change any model.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--add", metavar="LABEL", help="add an entry with the geometry options")
    p.add_argument("--replace", action="store_true",
                   help="with --add: replace the entry of the same label")
    p.add_argument("--remove", metavar="LABEL", help="remove the entry LABEL")
    add_geometry_options(p, "bearing geometry (with --add)")
    add_json_option(p)
    p.set_defaults(func=run_bearings)

    from . import diagnose_cmds

    diagnose_cmds.register(sub)
