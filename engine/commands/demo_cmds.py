"""``shaftwatch demo``: the invented Demo Works plant on the command line."""

from __future__ import annotations

import argparse

from ..demo_plant import PLANT, demo_recording
from ..errors import InputError
from ..levels import overall_levels
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
    if not 1 <= args.week <= PLANT.weeks:
        raise InputError(f"--week must be between 1 and {PLANT.weeks}, got {args.week}")
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
    p = sub.add_parser("demo", help="the invented Demo Works plant: one simulated survey",
                       description="Simulate one weekly survey of the invented Demo Works "
                                   "plant and list every point's overall levels.")
    p.add_argument("--week", type=int, default=PLANT.weeks,
                   help=f"survey week, 1 … {PLANT.weeks} (default {PLANT.weeks})")
    add_json_option(p)
    p.set_defaults(func=run_demo)
