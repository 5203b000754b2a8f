"""``shaftwatch new``, ``tree``, ``add-site``, ``add-machine``, ``add-point``, ``import``,
``runs``, ``show``, ``export``, ``check`` and ``rebuild``: the plant archive."""

from __future__ import annotations

import argparse
import io
import sys
import warnings
from contextlib import contextmanager
from datetime import UTC, datetime
from pathlib import Path

from ..archive import create_archive, open_archive
from ..errors import EngineWarning, InputError
from ..importer import ReadOptions, TerminalProgress, plan_import, run_import
from ..recording import DIRECTIONS
from .common import add_input_options, add_json_option, emit_json, fmt, print_pairs, print_table


@contextmanager
def _archive(path: str, mode: str, command: str, *, force: bool = False):
    """Open an archive, printing its notices (lock taken over, files restored) to stderr."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EngineWarning)
        arc = open_archive(path, mode=mode, force=force, command=command)
    for n in arc.notices:
        sys.stderr.write(f"note: {n}\n")
    try:
        yield arc
    finally:
        arc.close()


def _when(seconds: float | None) -> str:
    if seconds is None:
        return "—"
    return datetime.fromtimestamp(seconds, UTC).strftime("%Y-%m-%d %H:%M")


def run_new(args) -> int:
    name = args.plant or Path(args.archive).name.split(".")[0]
    with create_archive(args.archive, plant_name=name,
                        command=f"shaftwatch new {args.archive}") as arc:
        d = {"archive": str(arc.path), "plant": arc.plant_name,
             "schema_version": arc.schema_version}
    if args.json:
        emit_json(d)
    else:
        print(f"created archive {d['archive']} for plant {d['plant']!r} "
              f"(schema {d['schema_version']})")
    return 0


def run_tree(args) -> int:
    with _archive(args.archive, "r", "tree") as arc:
        tree = arc.tree()
        plant = arc.plant_name
        states = arc.point_states()
    for site in tree:
        for m in site["machines"]:
            for p in m["points"]:
                st = states.get(p["path"], {})
                p["state"], p["zone"] = st.get("state", ""), st.get("zone", "")
    if args.json:
        emit_json({"plant": plant, "sites": tree})
        return 0
    print(f"{plant or args.archive}")
    for site in tree:
        print(f"  {site['name']}")
        for m in site["machines"]:
            extra = ", ".join(x for x in (m["name"], f"{fmt(m['nominal_rpm'])} rpm"
                                          if m["nominal_rpm"] else "") if x)
            print(f"    {m['tag']}" + (f"  ({extra})" if extra else ""))
            rows = []
            for p in m["points"]:
                last = p["latest"]
                rows.append([p["name"], p["direction"] or "—", p["runs"],
                             last["taken"][:16].replace("T", " ") if last else "—",
                             last["velocity_rms_mm_s"] if last else None,
                             p["zone"] or "—", p["state"] or "not evaluated",
                             last["quality"] if last else "no data"])
            if rows:
                sys.stdout.write("".join(
                    "      " + line + "\n" for line in _table_lines(
                        ["point", "dir", "runs", "latest run", "velocity mm/s", "zone",
                         "state", "data quality"], rows)))
    return 0


def _table_lines(headers, rows) -> list[str]:
    buf = io.StringIO()
    print_table(headers, rows, out=buf)
    return buf.getvalue().splitlines()


def run_add_site(args) -> int:
    with _archive(args.archive, "w", "shaftwatch add-site") as arc:
        arc.add_site(args.name, description=args.description or "")
    if args.json:
        emit_json({"site": args.name})
    else:
        print(f"added site {args.name}")
    return 0


def _ratios(items: list[str] | None) -> dict[str, float] | None:
    if not items:
        return None
    out = {}
    for item in items:
        shaft, sep, value = item.partition("=")
        try:
            out[shaft.strip()] = float(value)
        except ValueError:
            sep = ""
        if not sep or not shaft.strip():
            raise InputError(f"--ratio {item!r}: write SHAFT=RATIO, e.g. fan=0.61")
    return out


def run_add_machine(args) -> int:
    props = {"name": args.name, "description": args.description, "nominal_rpm": args.rpm,
             "power_kw": args.power_kw, "iso_group": args.iso_group,
             "foundation": args.foundation, "ratios": _ratios(args.ratio)}
    props = {k: v for k, v in props.items() if v is not None}
    with _archive(args.archive, "w", "shaftwatch add-machine") as arc:
        arc.add_machine(args.site, args.tag, **props)
        m = arc.plant.machine(args.site, args.tag)
    if args.json:
        emit_json({"site": args.site, **m.as_dict()})
    else:
        print(f"added machine {args.site}/{args.tag}")
    return 0


def run_add_point(args) -> int:
    props = {"location": args.location, "direction": args.direction, "unit": args.unit,
             "sensitivity": args.sensitivity, "fmax_hz": args.fmax, "lines": args.lines,
             "window": args.window, "averages": args.averages, "overlap": args.overlap,
             "channel": args.channel, "mapping_patterns": args.pattern, "shaft": args.shaft}
    props = {k: v for k, v in props.items() if v is not None}
    parts = args.point.split("/")
    if len(parts) != 3:
        raise InputError(f"point {args.point!r} must be written SITE/MACHINE/POINT")
    with _archive(args.archive, "w", "shaftwatch add-point") as arc:
        p = arc.add_point(*parts, **props)
    if args.json:
        emit_json(p.as_dict())
    else:
        print(f"added point {p.path} (runs in runs/{p.key}/)")
    return 0


def run_import_cmd(args) -> int:
    opts = ReadOptions(input_unit=args.input_unit, sensitivity=args.sensitivity,
                       full_scale=args.full_scale, sample_rate_hz=args.sample_rate,
                       variable=args.variable, time_column=args.time_column)
    mode = "r" if args.dry_run else "w"
    with _archive(args.archive, mode, "shaftwatch import") as arc:
        plan = plan_import(arc, args.inputs, point=args.point, options=opts,
                           taken=args.taken, rpm=args.rpm, tach_channel=args.tach_channel,
                           channel=args.channel,
                           notes=args.notes or "", remember=args.remember)
        if args.dry_run:
            if args.json:
                emit_json({"dry_run": True, **plan.as_dict()})
            else:
                print_table(["file", "point"], [[str(i.file), i.point or f"skip: {i.reason}"]
                                                for i in plan.items])
            return 0 if plan.mapped() else 2
        if not args.json:
            print_table(["file", "point"], [[str(i.file), i.point or "(skipped)"]
                                            for i in plan.items])
        bar = TerminalProgress() if (args.progress or sys.stderr.isatty()) else None
        try:
            summary = run_import(plan, progress=bar)
        finally:
            if bar is not None:
                bar.finish()
    if args.json:
        emit_json(summary.as_dict())
    else:
        print()
        print(f"imported {len(summary.imported)}, duplicates {len(summary.duplicates)}, "
              f"skipped {len(summary.skipped)}")
        for d in summary.duplicates:
            print(f"  {d['file']}: duplicate of run {d['run_id']} ({d['point']})")
        for s in summary.skipped:
            print(f"  skipped: {s['reason']}")
        for point, pats in summary.remembered.items():
            print(f"  remembered for {point}: {', '.join(pats)}")
    if not summary.imported and not summary.duplicates:
        return 2
    return 0


def run_runs(args) -> int:
    with _archive(args.archive, "r", "runs") as arc:
        rows = arc.runs(point=args.point, since=args.since)
    if args.json:
        emit_json({"runs": [r.as_dict() for r in rows]})
        return 0
    print_table(["run", "point", "taken", "rpm", "velocity mm/s", "accel g RMS", "quality"],
                [[r.run_id, r.point, _when(r.taken_s), r.rpm, r.velocity_rms_mm_s,
                  r.acceleration_rms_g, r.quality] for r in rows])
    return 0


def run_show(args) -> int:
    with _archive(args.archive, "r", "show") as arc:
        info = arc.run_info(arc.resolve_run(args.run_id))
    d = info.as_dict()
    if args.json:
        emit_json(d)
        return 0
    s = d["summary"]
    band = s.get("velocity_band_hz") or [None, None]
    print_pairs([
        ("run", d["run_id"]), ("point", d["point"]), ("file", d["file"]),
        ("taken", f"{d['taken']} ({d['taken_source']})"), ("imported", d["imported_at"]),
        ("source", d["source"] or "—"), ("speed", f"{fmt(d['rpm'])} rpm" if d["rpm"] else "—"),
        ("sample rate", f"{d['sample_rate_hz']:g} Hz"),
        ("duration", f"{d['duration_s']:.4g} s ({d['n_samples']} samples)"),
        ("channels", ", ".join(f"{c['index']}: {c.get('name') or '—'} "
                               f"[{c.get('unit')}]" for c in d["channels"])),
        ("tach channel", "—" if d["tach_channel"] is None else str(d["tach_channel"])),
        (f"velocity RMS {fmt(band[0])}–{fmt(band[1])} Hz",
         f"{fmt(s.get('velocity_rms_mm_s'))} mm/s"),
        ("acceleration RMS", f"{fmt(s.get('acceleration_rms_g'))} g"),
        ("acceleration peak", f"{fmt(s.get('acceleration_peak_g'))} g"),
        ("displacement peak-to-peak", f"{fmt(s.get('displacement_pp_um'))} µm"),
        ("crest factor", s.get("crest_factor")), ("kurtosis", s.get("kurtosis")),
        ("data quality", d["quality_state"]), ("notes", d["notes"] or "—"),
    ])
    for q in d["quality"]:
        print(f"  {q['severity']}: {q['message']}")
    if s.get("note"):
        print(f"  summary: {s['note']}")
    return 0


def run_export(args) -> int:
    with _archive(args.archive, "r", "export") as arc:
        data, side = arc.export_run(arc.resolve_run(args.run_id), args.output,
                                    wav_bits=args.wav_bits)
    if args.json:
        emit_json({"file": str(data), "metadata": str(side)})
    else:
        print(f"wrote {data} and {side}")
    return 0


def run_check(args) -> int:
    with _archive(args.archive, "r", "check") as arc:
        problems = arc.check()
        n = len(arc.runs())
    if args.json:
        emit_json({"runs": n, "problems": [p.as_dict() for p in problems]})
    elif problems:
        print(f"{len(problems)} problem(s) in {args.archive}:")
        for p in problems:
            print(f"  {p}")
    else:
        print(f"{args.archive}: {n} run(s), no problems")
    return 1 if problems else 0


def run_rebuild(args) -> int:
    with _archive(args.archive, "w", "shaftwatch rebuild") as arc:
        result = arc.rebuild()
    if args.json:
        emit_json({"rows": result.rows, "problems": [p.as_dict() for p in result.problems]})
    else:
        print(f"catalogue rebuilt: {result.rows} run(s)")
        for p in result.problems:
            print(f"  left out: {p}")
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("new", help="create an empty plant archive",
                       description="Create a new archive folder (e.g. demo-works.shaftwatch).")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--plant", metavar="NAME", help="plant name (default: the folder's name)")
    add_json_option(p)
    p.set_defaults(func=run_new)

    p = sub.add_parser("tree", help="asset tree with each point's latest run",
                       description="Sites, machines and points with each point's number of "
                                   "runs, latest run, overall velocity and state.")
    p.add_argument("archive", metavar="ARCHIVE")
    add_json_option(p)
    p.set_defaults(func=run_tree)

    p = sub.add_parser("add-site", help="add a site to the asset tree")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("name", metavar="SITE")
    p.add_argument("--description", metavar="TEXT")
    add_json_option(p)
    p.set_defaults(func=run_add_site)

    p = sub.add_parser("add-machine", help="add a machine to a site")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--site", required=True, metavar="SITE")
    p.add_argument("--tag", required=True, metavar="TAG", help="machine tag, e.g. P-101")
    p.add_argument("--name", metavar="TEXT", help="plain name, e.g. 'Raw-water pump 1'")
    p.add_argument("--description", metavar="TEXT")
    p.add_argument("--rpm", type=float, metavar="R", help="nominal speed, rev/min")
    p.add_argument("--power-kw", type=float, metavar="KW", help="motor rating, kW")
    p.add_argument("--iso-group", type=int, choices=(1, 2),
                   help="ISO 20816-3 machine group")
    p.add_argument("--foundation", choices=("rigid", "flexible"))
    p.add_argument("--ratio", action="append", metavar="SHAFT=R",
                   help="speed of a shaft over the nominal speed (repeat for each shaft)")
    add_json_option(p)
    p.set_defaults(func=run_add_machine)

    p = sub.add_parser("add-point", help="add a measurement point to a machine")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("point", metavar="SITE/MACHINE/POINT")
    p.add_argument("--location", metavar="TEXT", help="e.g. 'motor DE'")
    p.add_argument("--shaft", metavar="S",
                   help="shaft of the machine model the point is on, e.g. pump")
    p.add_argument("--direction", choices=DIRECTIONS,
                   help="H, V, A (axial) or R (radial)")
    p.add_argument("--unit", metavar="U", help="unit of the measured quantity (default g)")
    p.add_argument("--sensitivity", metavar="S",
                   help="sensor sensitivity, e.g. 100mV/g; files are then read as volts")
    p.add_argument("--fmax", type=float, metavar="HZ", help="spectrum Fmax, Hz")
    p.add_argument("--lines", type=int, metavar="N", help="spectrum lines")
    p.add_argument("--window", metavar="W", help="spectrum window")
    p.add_argument("--averages", type=int, metavar="N", help="averages (0 = every frame)")
    p.add_argument("--overlap", type=float, metavar="F", help="overlap, 0 … 0.9")
    p.add_argument("--channel", type=int, metavar="N",
                   help="channel summarised on import (default the first non-tach one)")
    p.add_argument("--pattern", action="append", metavar="GLOB",
                   help="file-name pattern that maps files to this point (repeatable)")
    add_json_option(p)
    p.set_defaults(func=run_add_point)

    p = sub.add_parser("import", help="import recording files or folders into an archive",
                       description="Import files (folders are searched recursively). The "
                                   "plan (file → point) is printed before anything is "
                                   "written; bad files are skipped and reported. Exit "
                                   "status 2 when nothing could be imported.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("inputs", nargs="+", metavar="FILE_OR_FOLDER")
    p.add_argument("--point", metavar="SITE/MACHINE/POINT",
                   help="point of every file (default: by the points' patterns)")
    add_input_options(p, file_required=False)
    # Unset input unit and channel mean "the point's": a point with a sensitivity reads
    # volts, and the point's channel is summarised.
    p.set_defaults(input_unit=None, channel=None)
    p.add_argument("--taken", metavar="ISO-8601",
                   help="when the recordings were taken (default: the file's time)")
    p.add_argument("--tach-channel", type=int, metavar="N", help="tachometer channel")
    p.add_argument("--notes", metavar="TEXT")
    p.add_argument("--remember", action="store_true",
                   help="remember a file-name pattern for --point for the next survey")
    p.add_argument("--dry-run", action="store_true", help="show the plan, write nothing")
    p.add_argument("--progress", action="store_true",
                   help="draw the progress bar even when stderr is not a terminal")
    add_json_option(p)
    p.set_defaults(func=run_import_cmd)

    p = sub.add_parser("runs", help="list the runs of an archive")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--point", metavar="SITE/MACHINE/POINT")
    p.add_argument("--since", metavar="DATE", help="ISO-8601 date or time (UTC)")
    add_json_option(p)
    p.set_defaults(func=run_runs)

    p = sub.add_parser("show", help="a run's metadata, summary and data quality")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("run_id", metavar="RUN_ID", help="run id or a unique prefix (6+ digits)")
    add_json_option(p)
    p.set_defaults(func=run_show)

    p = sub.add_parser("export", help="write a run as WAV or CSV with a JSON side-car")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("run_id", metavar="RUN_ID")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help=".wav (float) or .csv/.tsv; metadata goes to FILE's name with .json")
    p.add_argument("--wav-bits", type=int, choices=(32, 64), default=32,
                   help="float bits of a WAV export (default 32)")
    add_json_option(p)
    p.set_defaults(func=run_export)

    p = sub.add_parser("check", help="verify every file and checksum of an archive",
                       description="Verify the archive; changes nothing. Exit status 1 "
                                   "when problems are found.")
    p.add_argument("archive", metavar="ARCHIVE")
    add_json_option(p)
    p.set_defaults(func=run_check)

    p = sub.add_parser("rebuild", help="rebuild the catalogue from the run files")
    p.add_argument("archive", metavar="ARCHIVE")
    add_json_option(p)
    p.set_defaults(func=run_rebuild)

