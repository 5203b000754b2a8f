"""``shaftwatch trend``, ``waterfall`` and ``compare``: a point's values and spectra over
time.  Exit status as in :mod:`.alarm_cmds`: 1 when a state shown is alert or danger."""

from __future__ import annotations

import argparse
import math

import numpy as np

from .alarm_cmds import exit_status, time_arg, when
from .archive_cmds import _archive
from .common import add_json_option, emit_json, fmt, print_pairs, print_table


def _date(iso: str | None) -> str:
    return iso[:16].replace("T", " ") if iso else "—"


def _interval(pair: list | None) -> str:
    if not pair:
        return ""
    lo, hi = (_date(x) if x else "beyond the horizon" for x in pair)
    return f" (90 % interval {lo} to {hi})"


def run_trend(args) -> int:
    from ..trends import trend

    until = time_arg(args.until, "--until", end_of_day=True)
    with _archive(args.archive, "r", "trend") as arc:
        data = trend(arc, args.point, args.value, forecast=not args.no_forecast,
                     recent=args.recent, until_s=until)
    if args.csv:
        data.to_csv(args.csv)
    status = exit_status(data.states)
    if args.json:
        emit_json(data.as_dict())
        return status
    print_table(["date", f"{args.value} ({data.unit})", "state", "ISO zone", "run"],
                [[when(t), float(v), s or "—", z or "—", r] for t, v, s, z, r in
                 zip(data.times_s, data.values, data.states, data.zones, data.run_ids)])
    levels = (f"alert {fmt(data.alert)}, danger {fmt(data.danger)} {data.unit} (band "
              f"{data.levels_from!r} of plan {data.plan_name!r})" if data.levels_from
              else "none in the plan in force")
    pairs = [("point", args.point), ("levels", levels)]
    f = data.forecast_dict()
    if f is not None:
        pairs.append(("forecast", f"{f['status']}" + (f", {f['model']} fit of "
                                                       f"{f['points_used']} runs"
                                                       if f["model"] else "")))
        for level in ("alert", "danger"):
            if f[f"{level}_date"] or f[f"{level}_interval"]:
                pairs.append((f"{level} expected", _date(f[f"{level}_date"])
                              + _interval(f[f"{level}_interval"])))
    if args.csv:
        pairs.append(("written", args.csv))
    print_pairs(pairs)
    if f is not None:
        print(f["reason"])
    return status


def run_waterfall(args) -> int:
    from ..trends import spectra_by_date

    with _archive(args.archive, "r", "waterfall") as arc:
        w = spectra_by_date(arc, args.point, orders=args.orders, max_order=args.max_order,
                            bins=args.bins)
    status = exit_status(w.states)
    if args.json:
        emit_json(w.as_dict())
        return status
    axis = "order" if args.orders else "Hz"
    rows = []
    for i, rid in enumerate(w.run_ids):
        row = w.matrix[i]
        j = int(np.nanargmax(row)) if np.isfinite(row).any() else None
        rows.append([when(w.times_s[i]), rid, float(w.rpm[i]), w.states[i] or "—",
                     None if j is None else float(w.axis[j]),
                     None if j is None else float(row[j])])
    print_table(["date", "run", "rpm", "state", f"largest line ({axis})",
                 f"amplitude ({w.unit})"], rows)
    if w.axis.size:
        step = float(w.axis[1] - w.axis[0]) if w.axis.size > 1 else math.nan
        print(f"{len(w.run_ids)} spectra × {w.axis.size} bins, 0 to {w.axis[-1]:g} {axis} "
              f"in steps of {step:.4g}; --json gives the amplitudes")
    for lo in w.left_out:
        print(f"  left out: run {lo['run_id']}: {lo['reason']}")
    return status


def run_compare(args) -> int:
    from ..trends import compare

    with _archive(args.archive, "r", "compare") as arc:
        c = compare(arc, args.run, args.reference, baseline_runs=args.baseline_runs,
                    top=args.top)
        rpm = arc.results(c.run_id).rpm
    status = exit_status([c.state])
    if args.json:
        emit_json(c.as_dict())
        return status
    ref = (f"baseline: mean in power of {len(c.reference_runs)} run(s)"
           if c.reference == "baseline" else f"run {c.reference}")
    print_pairs([("run", c.run_id), ("point", c.point), ("date", when(c.taken_s)),
                 ("state", c.state or "—"), ("reference", ref),
                 ("largest rise", f"{fmt(float(np.max(c.db)))} dB"),
                 ("largest fall", f"{fmt(float(-np.min(c.db)))} dB")])
    shaft_hz = rpm / 60.0 if math.isfinite(rpm) and rpm > 0 else math.nan
    print_table(["Hz", "order", f"now ({c.unit})", f"reference ({c.unit})", "dB", "source"],
                [[r["frequency_hz"], r["frequency_hz"] / shaft_hz, r["current"],
                  r["reference"], r["db"], r["source"] or "—"] for r in c.rises])
    return status


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("trend", help="one value of a point over time, with its forecast",
                       description="A value of a point against time with the alert and "
                                   "danger levels of its plan and the forecast of when "
                                   "they are reached. Exit status 1 when a run shown is "
                                   "in alert or danger.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--point", required=True, metavar="SITE/MACHINE/POINT")
    p.add_argument("--value", required=True, metavar="NAME",
                   help="e.g. overall_velocity_mm_s, 1x_mm_s, bpfo_g or band:<band name>")
    p.add_argument("--csv", metavar="FILE", help="also write the trend to a CSV file")
    p.add_argument("--no-forecast", action="store_true", help="no forecast")
    p.add_argument("--until", metavar="DATE",
                   help="only runs up to DATE (a bare date includes that day): the trend "
                        "and forecast as they were then")
    p.add_argument("--recent", type=int, metavar="N",
                   help="fit the latest N runs (default: the runs since the value left "
                        "its baseline band)")
    add_json_option(p)
    p.set_defaults(func=run_trend)

    p = sub.add_parser("waterfall", help="a point's spectra stacked by date",
                       description="The stored velocity spectra of a point by date, in Hz "
                                   "or in orders of each run's shaft speed.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--point", required=True, metavar="SITE/MACHINE/POINT")
    p.add_argument("--orders", action="store_true",
                   help="common axis in orders of each run's speed (runs without one are "
                        "left out)")
    p.add_argument("--max-order", type=float, metavar="X", help="highest order shown")
    p.add_argument("--bins", type=int, metavar="N", help="about N bins on the order axis")
    add_json_option(p)
    p.set_defaults(func=run_waterfall)

    p = sub.add_parser("compare", help="a run's spectrum against a reference spectrum",
                       description="The run's velocity spectrum against a reference run or "
                                   "the baseline (the point's first runs averaged in "
                                   "power): the difference in dB and the largest rises "
                                   "with their sources.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--run", required=True, metavar="RUN_ID")
    p.add_argument("--reference", default="baseline", metavar="RUN|baseline",
                   help="a run id, or baseline (default)")
    p.add_argument("--baseline-runs", type=int, metavar="N",
                   help="the baseline is the point's first N runs (default 5)")
    p.add_argument("--top", type=int, default=10, metavar="N", help="rises listed (default 10)")
    add_json_option(p)
    p.set_defaults(func=run_compare)
