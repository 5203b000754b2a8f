"""``shaftwatch demo``: the invented Demo Works plant, as an archive or one survey."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ..demo_archive import DEFAULT_NAME, build_demo_archive, demo_runs
from ..demo_plant import PLANT, demo_recording
from ..importer import TerminalProgress
from ..errors import InputError
from ..levels import overall_levels
from .archive_cmds import run_tree
from .common import add_json_option, emit_json, print_table


def survey_rows(week: int) -> list[dict]:
    """Overall levels of every demo point in one weekly survey."""
    rows = []
    for m in PLANT.machines:
        for p in m.points:
            rec = demo_recording(m.tag, p.name, week)
            ch = rec.channels[0]
            lv = overall_levels(ch.samples, rec.fs_hz, unit_in=ch.unit, rpm=rec.rpm,
                                source=f"{m.tag}/{p.name}")
            rows.append({"machine": m.tag, "point": p.name, "week": week,
                         "taken": rec.taken.isoformat() if rec.taken else None,
                         "rpm": rec.rpm, **lv.as_dict()})
    return rows


def run_demo(args: argparse.Namespace) -> int:
    if args.survey is not None:
        return run_survey(args)
    path = Path(args.archive)
    if not (path / "plant.h5").exists():
        sys.stderr.write(f"building the demo archive {path} "
                         f"({len(demo_runs())} simulated runs)…\n")
        bar = TerminalProgress() if sys.stderr.isatty() else None
        try:
            build_demo_archive(path, progress=bar)
        finally:
            if bar is not None:
                bar.finish()
    return run_tree(argparse.Namespace(archive=str(path), json=args.json))


def run_survey(args: argparse.Namespace) -> int:
    args.week = args.survey
    if not 1 <= args.week <= PLANT.weeks:
        raise InputError(f"--survey week must be between 1 and {PLANT.weeks}, got {args.week}")
    rows = survey_rows(args.week)
    if args.json:
        emit_json({"site": PLANT.site, "week": args.week, "points": rows})
        return 0
    print(f"{PLANT.site} — simulated survey, week {args.week} of {PLANT.weeks} "
          "(invented demo data)\n")
    print_table(["machine", "point", "rpm", "velocity mm/s RMS", "accel g RMS",
                 "accel g peak", "crest", "kurtosis"],
                [[r["machine"], r["point"], r["rpm"] if r["rpm"] else "run-up",
                  r["velocity_rms_mm_s"], r["acceleration_rms_g"], r["acceleration_peak_g"],
                  r["crest_factor"], r["kurtosis"]] for r in rows])
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("demo", help="the invented Demo Works plant as an archive",
                       description="Build the archive of the invented Demo Works plant "
                                   "(when it does not exist yet) and show its asset tree; "
                                   "or, with --survey, simulate one weekly survey without "
                                   "an archive.")
    p.add_argument("archive", nargs="?", default=DEFAULT_NAME, metavar="ARCHIVE",
                   help=f"archive folder (default {DEFAULT_NAME})")
    p.add_argument("--survey", type=int, metavar="WEEK",
                   help=f"just list one simulated survey's levels, week 1 … {PLANT.weeks}")
    add_json_option(p)
    p.set_defaults(func=run_demo)
