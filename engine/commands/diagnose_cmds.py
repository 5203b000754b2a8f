"""``shaftwatch diagnose``: the findings of a run, or of a recording file with a model.

Two forms:

* ``shaftwatch diagnose ARCHIVE RUN_ID [--recompute]`` prints the findings stored with
  the run's results; a run not analysed yet (or any run with ``--recompute``) is
  analysed with :func:`engine.pipeline.analyse_run`, its results are stored through a
  writer and its point is evaluated again (so that its alarm state matches the new
  values).
* ``shaftwatch diagnose FILE [--machine-file MODEL.json --shaft S] --rpm R`` analyses a
  recording outside any archive with :func:`engine.analysis.analyse_recording`; ``R``
  is the speed of the model's reference shaft (ratio 1.0), as runs store it, and the
  point sits on shaft ``S``.

Each finding is printed with its severity, title, evidence (frequency, amplitude and
the source it was matched to) and recommendation.  Findings are indications for a
qualified person; they do not prove a machine safe.
"""

from __future__ import annotations

import argparse
import math
from datetime import UTC, datetime
from pathlib import Path

from ..errors import InputError
from ..recording import DIRECTIONS
from .archive_cmds import _archive
from .common import add_input_options, add_json_option, emit_json, load_channel
from .common import print_pairs, print_table, print_warnings
from .peak_labels import read_model_file

#: Fmax of a recording file's velocity spectrum when --fmax is not given (the trade's
#: usual survey range for machines of 600–3600 rpm, common practice), Hz; lower when
#: the sample rate cannot reach it.
FILE_FMAX_HZ = 1000.0
CAUTION = ("Findings are indications for a qualified person; they do not prove a "
           "machine safe.")
#: Input options that only apply to the FILE form, with their defaults.
_FILE_ONLY = {"input_unit": "g", "sensitivity": None, "full_scale": None,
              "sample_rate": None, "variable": None, "time_column": None, "rpm": None,
              "machine_file": None, "shaft": None, "location": None, "direction": None,
              "fmax": None, "lines": 1600, "iso_group": None, "foundation": None,
              "channel": 0}


def _when(seconds: float | None) -> str | None:
    if seconds is None or not math.isfinite(seconds):
        return None
    return datetime.fromtimestamp(seconds, UTC).isoformat(timespec="seconds") \
        .replace("+00:00", "Z")


def _diagnose_run(args: argparse.Namespace) -> dict:
    """The run's stored findings, or analyse and store them (writer)."""
    from ..pipeline import analyse_run, evaluate_points

    given = [k for k, v in _FILE_ONLY.items() if getattr(args, k, v) != v]
    if given:
        raise InputError("--" + ", --".join(k.replace("_", "-") for k in given)
                         + " apply to diagnosing a FILE; a run in an archive is analysed "
                           "with its point's settings and its machine's model")
    with _archive(args.target, "r", "diagnose") as arc:
        rid = arc.resolve_run(args.run_id)
        res = None if args.recompute else arc.results(rid)
        point = arc.run_info(rid).point
        shaft = arc.point_shaft(point)
    computed = res is None
    if computed:
        with _archive(args.target, "w", "shaftwatch diagnose") as arc:
            fresh = analyse_run(arc, rid)
            arc.store_results([fresh])
            evaluate_points(arc, [fresh.point])
            res = arc.results(rid)
    return {"run_id": res.run_id, "point": res.point, "shaft": shaft or None,
            "taken_s": res.taken_s, "taken": _when(res.taken_s),
            "rpm": None if math.isnan(res.rpm) else res.rpm, "state": res.state,
            "zone": res.zone, "quality": res.quality,
            "findings_from": "analysed now" if computed else "stored results",
            "findings": res.findings, "warnings": []}


def _file_setup(args: argparse.Namespace, fs_hz: float):
    """The PointSetup of a recording file from the options."""
    from ..analysis import PointSetup

    model = read_model_file(args.machine_file) if args.machine_file else None
    shaft = args.shaft or ""
    if model is None and shaft:
        raise InputError(f"--shaft {shaft!r} needs --machine-file MODEL.json")
    if model is not None:
        if not shaft:
            if len(model.shafts) > 1:
                raise InputError(f"{args.machine_file}: the model has shafts "
                                 + ", ".join(s.name for s in model.shafts)
                                 + "; say which one the point is on with --shaft")
            shaft = model.shafts[0].name
        model.ratio(shaft)  # InputError naming the model's shafts
    limits = None
    if (args.iso_group is None) != (args.foundation is None):
        raise InputError("--iso-group and --foundation go together (ISO 20816-3 zones)")
    if args.iso_group is not None:
        from ..alarms.iso import zone_boundaries

        limits = zone_boundaries(args.iso_group, args.foundation)
    fmax = args.fmax if args.fmax is not None else min(FILE_FMAX_HZ, fs_hz / 2.56)
    props = {"location": args.location or "", "direction": args.direction or "R",
             "fmax_hz": fmax, "lines": args.lines, "window": "hann", "overlap": 0.5,
             "averages": 0, "channel": args.channel}
    return PointSetup(path=args.target, props=props, model=model, shaft=shaft,
                      ratio=model.ratio(shaft) if model is not None else 1.0,
                      zone_limits_mm_s=limits)


def _diagnose_file(args: argparse.Namespace) -> dict:
    from ..analysis import analyse_recording

    if args.recompute:
        raise InputError("--recompute applies to a run in an archive")
    if Path(args.target).is_dir():
        raise InputError(f"{args.target}: a folder; to diagnose a run of an archive give "
                         "its RUN_ID after the archive")
    args.file = args.target
    ch = load_channel(args)
    if ch.rpm is None:
        raise InputError(f"{ch.source}: findings need the speed of the reference shaft; "
                         "give --rpm")
    setup = _file_setup(args, ch.fs_hz)
    warnings = ch.warnings()
    taken = ch.recording.taken.timestamp() if ch.recording.taken else math.nan
    res = analyse_recording(ch.recording, setup, run_id=Path(args.target).name,
                            taken_s=taken, rpm=ch.rpm,
                            quality="warning" if warnings else "ok")
    return {"file": args.target, "channel": ch.index, "shaft": setup.shaft or None,
            "reference_rpm": ch.rpm, "rpm": res.rpm, "taken": _when(taken),
            "model": args.machine_file, "findings_from": "analysed now",
            "findings": res.findings, "warnings": warnings}


def _print_findings(d: dict) -> None:
    head = [("run", d["run_id"]), ("point", d["point"])] if "run_id" in d else \
        [("file", d["file"]), ("channel", str(d["channel"]))]
    speed = f" at {d['rpm']:.1f} rpm" if d["rpm"] else ""
    head += [("shaft", f"{d['shaft'] or '—'}{speed}"), ("taken", d["taken"] or "—")]
    if "state" in d:
        head += [("alarm state", d["state"] or "—"), ("ISO 20816 zone", d["zone"] or "—")]
    head.append(("findings", f"{len(d['findings'])} ({d['findings_from']})"))
    print_pairs(head)
    if not d["findings"]:
        print("\nno findings")
    for f in d["findings"]:
        print()
        stage = f.get("stage")
        stage = f" (stage {stage})" if stage and "stage" not in f["title"] else ""
        print(f"[{f['severity']}] {f['title']}{stage}")
        ev = f.get("evidence") or []
        if ev:
            print_table(["evidence", "frequency Hz", "amplitude", "unit", "matched source"],
                        [[e["description"], e["frequency_hz"], e["amplitude"],
                          e["unit"] or "—", e["source_name"] or "—"] for e in ev])
        print(f"recommendation: {f['recommendation']}")
    print()
    print(CAUTION)


def run_diagnose(args: argparse.Namespace) -> int:
    d = _diagnose_run(args) if args.run_id else _diagnose_file(args)
    if args.json:
        emit_json({**d, "caution": CAUTION})
        return 0
    _print_findings(d)
    print_warnings(d["warnings"])
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "diagnose", help="findings of a run (or of a recording file with a machine model)",
        description="Findings (imbalance, misalignment, looseness, bearing defect stage, "
                    "gear wear) with severity, evidence and recommendation. "
                    "'diagnose ARCHIVE RUN_ID' prints the run's stored findings (analysing "
                    "and storing them when the run has none, or with --recompute). "
                    "'diagnose FILE --machine-file MODEL.json --shaft S --rpm R' analyses "
                    "a recording outside an archive; R is the speed of the model's "
                    "reference shaft (ratio 1.0). " + CAUTION)
    p.add_argument("target", metavar="ARCHIVE|FILE",
                   help="an archive folder (with RUN_ID) or a recording file")
    p.add_argument("run_id", metavar="RUN_ID", nargs="?",
                   help="run id in ARCHIVE (or a unique prefix of 6+ digits)")
    p.add_argument("--recompute", action="store_true",
                   help="analyse the run again and store its results (archive form)")
    add_input_options(p, file_required=False)
    f = p.add_argument_group("recording file (FILE form)")
    f.add_argument("--machine-file", metavar="MODEL.json",
                   help="machine model file (see 'shaftwatch model --help')")
    f.add_argument("--shaft", metavar="S", help="the model's shaft the point is on")
    f.add_argument("--location", metavar="TEXT",
                   help="the point's location, e.g. 'pump DE': its bearing in the model "
                        "comes first")
    f.add_argument("--direction", choices=DIRECTIONS, help="H, V, A (axial) or R (radial)")
    f.add_argument("--fmax", type=float, metavar="HZ",
                   help=f"velocity spectrum Fmax (default {FILE_FMAX_HZ:g} Hz, or sample "
                        "rate / 2.56 when lower)")
    f.add_argument("--lines", type=int, default=1600, metavar="N",
                   help="velocity spectrum lines (default 1600)")
    f.add_argument("--iso-group", type=int, choices=(1, 2),
                   help="ISO 20816-3 machine group that grades the findings (default "
                        "group 2, rigid)")
    f.add_argument("--foundation", choices=("rigid", "flexible"))
    add_json_option(p)
    p.set_defaults(func=run_diagnose)
