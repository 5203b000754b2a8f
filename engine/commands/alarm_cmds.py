"""``shaftwatch plan``, ``evaluate``, ``status`` and ``events``: alarm plans and states.

Exit status of every command here (and of :mod:`.trend_cmds`): 0 when every state
shown is ok, 1 when any is alert or danger, 2 on bad input (scheduled jobs can act on
it).  ``no data``, ``bad data`` and not-yet-evaluated states are listed but do not
raise the status.
"""

from __future__ import annotations

import argparse
import math
import sys
from datetime import UTC, datetime, timedelta

from ..alarms.evaluate import SEVERITY
from ..alarms.iso import GENERIC_NOTE, default_plan
from ..alarms.plan import AlarmPlan, read_plan_file, write_plan_file
from ..errors import InputError
from ..forecast import iso_date
from ..importer import TerminalProgress
from .archive_cmds import _archive
from .common import add_json_option, emit_json, print_pairs, print_table

#: States that make the exit status 1.
ALARM_STATES = ("alert", "danger")


# -- shared by the alarm and trend commands ---------------------------------------------
def exit_status(states) -> int:
    """1 when any state is alert or danger, else 0."""
    return 1 if any(s in ALARM_STATES for s in states) else 0


def time_arg(text: str | None, option: str, *, end_of_day: bool = False) -> float | None:
    """Seconds since 1970 UTC of an ISO-8601 date or time given to ``option`` (naive =
    UTC).  With ``end_of_day`` a bare date (``2026-10-19``) means the end of that day,
    so that its runs are included."""
    from ..archive.schema import parse_time

    if text is None:
        return None
    moment = parse_time(text, field=option)
    if end_of_day and len(text.strip()) == 10:
        moment = moment + timedelta(days=1) - timedelta(microseconds=1)
    return moment.timestamp()


def when(seconds: float | None) -> str:
    """``YYYY-MM-DD HH:MM`` (UTC) of a time, '—' when none."""
    if seconds is None or not math.isfinite(seconds):
        return "—"
    return datetime.fromtimestamp(seconds, UTC).strftime("%Y-%m-%d %H:%M")


def progress_bar(args):
    """A terminal progress bar when stderr is a terminal or ``--progress`` was given."""
    if getattr(args, "progress", False) or sys.stderr.isatty():
        return TerminalProgress()
    return None


def _finish(bar) -> None:
    if bar is not None:
        bar.finish()


# -- plan -------------------------------------------------------------------------------
def _machine(arc, point: str):
    info = arc.point(point)
    return arc.plant.machine(info.site, info.machine)


def _iso_defaults(arc, point: str) -> AlarmPlan:
    m = _machine(arc, point)
    g, f = m.props.get("iso_group"), m.props.get("foundation")
    if g not in (1, 2) or f not in ("rigid", "flexible"):
        raise InputError(f"--defaults: machine {m.site}/{m.tag} has no ISO 20816-3 group "
                         "and foundation; set iso_group (1 or 2) and foundation (rigid or "
                         "flexible) on the machine first")
    return default_plan(int(g), f)


def _is_iso_band(band, limits) -> bool:
    """A band of an ISO 20816-3 default: overall broadband velocity at the B/C and C/D
    boundaries of the machine."""
    return (limits is not None and band.measure == "overall" and band.low is None
            and band.high is None and band.unit == "mm/s" and band.scale == "rms"
            and math.isclose(band.alert, limits[1]) and math.isclose(band.danger, limits[2]))


def _baseline_ids(arc, point: str, args) -> list[str]:
    ids = [str(r) for r in arc.value_rows(point).get("run_id", [])]
    if args.runs:
        out = []
        for r in args.runs:
            rid = arc.resolve_run(r)
            if rid not in ids:
                raise InputError(f"--runs: run {r} is not an analysed run of {point}")
            out.append(rid)
        return out
    n = args.first
    if n is None:
        raise InputError("--baseline: say which runs with --first N or --runs ID ...")
    if n < 1 or n > len(ids):
        raise InputError(f"--first {n}: {point} has {len(ids)} analysed run(s)")
    return ids[:n]


def _baseline(arc, point: str, args) -> tuple[AlarmPlan, list[str]]:
    """The plan learnt from baseline runs, with the bands of the plan in force as the
    template; ISO overall bands keep their levels.  Returns the plan and notes."""
    from ..alarms.baseline import baseline_plan
    from ..pipeline import plan_in_force, point_setup, remeasure, zone_limits
    from ..results import band_value_name

    template = plan_in_force(arc, point)
    if template is None:
        raise InputError(f"--baseline: {point} has no plan to take the bands from; set one "
                         "with --file or --defaults first")
    limits = zone_limits(arc, point)
    iso = [b for b in template.bands if _is_iso_band(b, limits)]
    learn = [b for b in template.bands if not _is_iso_band(b, limits)]
    if not learn:
        raise InputError(f"--baseline: the plan of {point} has only the ISO 20816-3 overall "
                         "band, which keeps its ISO levels; add bands to learn (--file)")
    ids = _baseline_ids(arc, point, args)
    setup = point_setup(arc, point)
    values = []
    for rid in ids:
        r = arc.results(rid)
        if r is None:
            raise InputError(f"--baseline: run {rid} has no results; analyse it first")
        fresh = remeasure(arc, r, setup)
        values.append({b.name: fresh.value(band_value_name(b.name)) for b in learn})
    info = arc.point(point)
    learnt = baseline_plan(AlarmPlan(template.name, tuple(learn), template.origin),
                           values, method=args.method, k=args.k, danger_k=args.danger_k,
                           alert_ratio=args.alert_ratio, danger_ratio=args.danger_ratio,
                           name=f"{info.machine} {info.name}")
    by_name = {b.name: b for b in learnt.bands}
    bands = tuple(by_name.get(b.name, b) for b in template.bands)
    notes = [f"kept the ISO 20816-3 levels of band {b.name!r} (alert {b.alert:g}, danger "
             f"{b.danger:g} mm/s; generic limits, not learnt)" for b in iso]
    origin = learnt.origin + (" + ISO 20816-3 overall levels kept" if iso else "")
    note = learnt.note + (" " + GENERIC_NOTE if iso else "")
    return AlarmPlan(name=learnt.name, bands=bands, origin=origin, note=note), notes


def _check_plan_options(args) -> None:
    learn_opts = [k for k in ("first", "runs", "method", "k", "danger_k", "alert_ratio",
                              "danger_ratio") if getattr(args, k) is not None]
    if learn_opts and not args.baseline:
        raise InputError("--" + ", --".join(k.replace("_", "-") for k in learn_opts)
                         + ": only with --baseline")
    if args.first is not None and args.runs:
        raise InputError("--baseline: give --first N or --runs ID ..., not both")
    for k, default in (("method", "sigma"), ("k", 3.0), ("danger_k", 6.0),
                       ("alert_ratio", 2.5), ("danger_ratio", 5.0)):
        if getattr(args, k) is None:
            setattr(args, k, default)


def apply_plan_to(archive: str, points: list[str], plan: AlarmPlan, *, progress=None) -> None:
    """Store ``plan`` for ``points`` and re-evaluate their history
    (:func:`engine.batch.apply_plan`), printing its notes and failures to stderr."""
    from ..batch import apply_plan

    summary = apply_plan(archive, points, plan, progress=progress)
    for n in summary.notes:
        sys.stderr.write(f"note: {n}\n")
    for f in summary.failed:
        sys.stderr.write(f"not re-evaluated: {f.get('point', '')} {f.get('run_id', '')}: "
                         f"{f.get('reason', '')}\n")


def _band_rows(plan: AlarmPlan) -> list[list]:
    rows = []
    for b in plan.bands:
        unit = "1" if b.unit == "1" else f"{b.unit} {b.scale}"
        if b.low is None or b.high is None:
            where = "ISO broadband" if b.measure == "overall" else (b.defect or "—")
        else:
            where = f"{b.low:g}–{b.high:g} {'orders' if b.basis == 'order' else 'Hz'}"
        rows.append([b.name, b.measure, where, unit, float(b.alert), float(b.danger)])
    return rows


def run_plan(args) -> int:
    _check_plan_options(args)
    point = args.point
    new_plan, notes = None, []
    with _archive(args.archive, "r", "plan") as arc:
        from ..pipeline import plan_in_force

        current = plan_in_force(arc, point)
        own = arc.plan(point) is not None
        if args.defaults:
            new_plan = _iso_defaults(arc, point)
        elif args.file:
            new_plan = read_plan_file(args.file)
        elif args.baseline:
            new_plan, notes = _baseline(arc, point, args)
        for q in args.copy_to or []:
            arc.point(q)
        source = new_plan or current
        if args.copy_to and source is None:
            raise InputError(f"--copy-to: {point} has no plan in force to copy")
        targets = ([point] if new_plan is not None else []) + [
            q for q in (args.copy_to or []) if q != point]
        before = {p: s["state"] for p, s in arc.point_states().items()}
    if targets:
        bar = progress_bar(args)
        try:
            apply_plan_to(args.archive, targets, source, progress=bar)
        finally:
            _finish(bar)
    with _archive(args.archive, "r", "plan") as arc:
        from ..pipeline import plan_in_force

        shown = plan_in_force(arc, point)
        own = arc.plan(point) is not None if targets else own
        after = {p: s["state"] for p, s in arc.point_states().items()}
    if args.export:
        if shown is None:
            raise InputError(f"--export: {point} has no plan in force to export")
        write_plan_file(shown, args.export)
    shown_points = targets or [point]
    states = {p: after.get(p, "") for p in shown_points}
    moves = {p: {"before": before.get(p, ""), "now": after.get(p, "")} for p in targets}
    changed = {p: m for p, m in moves.items() if m["before"] != m["now"]}
    if args.json:
        emit_json({"point": point, "plan": shown.as_dict() if shown else None,
                   "own_plan": own, "set_for": targets, "states": states,
                   "before_now": moves, "changed": changed, "notes": notes,
                   "exported": args.export})
        return exit_status(states.values())
    if shown is None:
        print(f"{point}: no alarm plan (and the machine has no ISO 20816-3 group and "
              "foundation for a default)")
    else:
        print_pairs([("point", point), ("plan", shown.name),
                     ("origin", shown.origin + ("" if own else " — default, not stored")),
                     ("state now", states.get(point) or after.get(point) or "—")])
        print_table(["band", "measure", "where", "unit", "alert", "danger"], _band_rows(shown))
        if shown.note:
            print(f"note: {shown.note}")
    for n in notes:
        print(n)
    for p, m in moves.items():
        print(f"{p}: {m['before'] or '—'} → {m['now'] or '—'}"
              + ("" if p in changed else " (unchanged)"))
    if args.export:
        print(f"wrote {args.export}")
    return exit_status(states.values())


# -- evaluate, status, events -----------------------------------------------------------
def run_evaluate(args) -> int:
    from ..pipeline import evaluate_points

    since = time_arg(args.since, "--since")
    bar = progress_bar(args)
    try:
        with _archive(args.archive, "w", "shaftwatch evaluate") as arc:
            for p in args.point or []:
                arc.point(p)
            out = evaluate_points(arc, args.point or None, since_s=since, progress=bar)
    finally:
        _finish(bar)
    if args.json:
        emit_json(out.as_dict())
        return exit_status(out.states.values())
    print(f"evaluated {out.runs} run(s) of {out.points} point(s); {out.remeasured} band "
          f"value set(s) measured again; {out.events} event(s) in the log")
    for p, (a, b) in out.changed.items():
        print(f"{p}: {a or '—'} → {b or '—'}")
    for pr in out.problems:
        print(f"  not analysed: {pr['point']} run {pr['run_id']}: {pr['reason']}")
    return exit_status(out.states.values())


def status_rows(arc) -> list[dict]:
    """Every point's state now, worst first (then by point)."""
    rows = []
    for path, s in arc.point_states().items():
        info = arc.point(path)
        rows.append({"point": path, "site": info.site, "machine": info.machine,
                     "name": info.name, "state": s["state"], "zone": s["zone"],
                     "overall_mm_s": s["overall_mm_s"], "run_id": s["run_id"],
                     "taken_s": s["taken_s"], "worst_band": s["worst_band"],
                     "quality": s["quality"]})
    rows.sort(key=lambda r: (-SEVERITY.get(r["state"], -1), r["point"]))
    return rows


def run_status(args) -> int:
    with _archive(args.archive, "r", "status") as arc:
        rows = status_rows(arc)
    states = [r["state"] for r in rows]
    if args.json:
        for r in rows:
            r["taken"] = iso_date(r["taken_s"]) or None
        emit_json({"points": rows, "note": GENERIC_NOTE})
        return exit_status(states)
    print_table(["machine", "point", "state", "ISO zone", "overall mm/s", "date", "worst band"],
                [[r["machine"], r["name"], r["state"] or "—", r["zone"] or "—",
                  r["overall_mm_s"], when(r["taken_s"]), r["worst_band"] or "—"]
                 for r in rows])
    print(f"note: {GENERIC_NOTE}")
    return exit_status(states)


def _event_row(i: int, e) -> dict:
    d = e.as_dict()
    d.update(index=i, time=iso_date(e.time_s) or None)
    return d


def run_events(args) -> int:
    if args.ack is None and (args.by is not None or args.note is not None):
        raise InputError("--by and --note apply with --ack INDEX")
    if args.ack is not None:
        if not args.by:
            raise InputError("--ack: say who acknowledges with --by NAME")
        with _archive(args.archive, "w", "shaftwatch events --ack") as arc:
            arc.acknowledge(args.ack, by=args.by, note=args.note or "")
            shown = [(args.ack, arc.events()[args.ack])]
    else:
        since = time_arg(args.since, "--since")
        with _archive(args.archive, "r", "events") as arc:
            if args.point:
                arc.point(args.point)
            shown = [(i, e) for i, e in enumerate(arc.events())
                     if (args.point is None or e.point == args.point)
                     and (since is None or e.time_s >= since)]
    states = [e.state for _, e in shown]
    if args.json:
        emit_json({"events": [_event_row(i, e) for i, e in shown]})
        return exit_status(states)
    print_table(["#", "date", "point", "change", "band", "value", "level", "acknowledged"],
                [[i, when(e.time_s), e.point, f"{e.previous or '—'} → {e.state}",
                  e.band or "—", e.value, e.level,
                  (f"{e.acknowledged_by} {when(e.acknowledged_at)}"
                   + (f": {e.note}" if e.note else "")) if e.acknowledged else "—"]
                 for i, e in shown])
    return exit_status(states)


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "plan", help="show or set a point's alarm plan (re-evaluates its history)",
        description="Show the alarm plan in force at POINT; or set it from the ISO 20816-3 "
                    "defaults, a plan file or a statistical baseline, and copy it to other "
                    "points. Setting a plan re-evaluates the points' history and prints "
                    "each point's state before → now. Exit status 0 when the states shown "
                    "are ok, 1 when any is alert or danger, 2 on bad input.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("point", metavar="SITE/MACHINE/POINT")
    how = p.add_mutually_exclusive_group()
    how.add_argument("--defaults", action="store_true",
                     help="the ISO 20816-3 default of the machine's group and foundation")
    how.add_argument("--file", metavar="PLAN", help="a plan file (.json or .toml)")
    how.add_argument("--baseline", action="store_true",
                     help="learn the levels of the current plan's bands from baseline runs "
                          "(ISO overall bands keep their ISO levels)")
    b = p.add_argument_group("baseline")
    b.add_argument("--first", type=int, metavar="N", help="the point's first N analysed runs")
    b.add_argument("--runs", nargs="+", metavar="ID", help="these runs")
    b.add_argument("--method", choices=("sigma", "ratio"),
                   help="sigma: mean + k·σ (default); ratio: multiples of the mean")
    b.add_argument("--k", type=float, metavar="K", help="alert at mean + K·σ (default 3)")
    b.add_argument("--danger-k", type=float, metavar="K",
                   help="danger at mean + K·σ (default 6)")
    b.add_argument("--alert-ratio", type=float, metavar="R",
                   help="alert at R × mean (default 2.5)")
    b.add_argument("--danger-ratio", type=float, metavar="R",
                   help="danger at R × mean (default 5)")
    p.add_argument("--copy-to", nargs="+", metavar="POINT",
                   help="copy the plan (the new one, else the one in force) to these points")
    p.add_argument("--export", metavar="FILE", help="write the plan in force to a plan file")
    p.add_argument("--progress", action="store_true", help="draw a progress bar")
    add_json_option(p)
    p.set_defaults(func=run_plan)

    p = sub.add_parser("evaluate", help="evaluate analysed runs against the plans in force",
                       description="Evaluate the runs of the points (default all) against "
                                   "their plans, recording states, ISO zones and events.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--point", action="append", metavar="SITE/MACHINE/POINT",
                   help="a point to evaluate (repeatable; default all)")
    p.add_argument("--since", metavar="DATE",
                   help="record states only of runs taken since DATE (ISO-8601, UTC)")
    p.add_argument("--progress", action="store_true", help="draw a progress bar")
    add_json_option(p)
    p.set_defaults(func=run_evaluate)

    p = sub.add_parser("status", help="every point's alarm state now, worst first",
                       description="Each point's latest state, ISO 20816 zone, overall "
                                   "velocity, date and worst band; worst first. Exit "
                                   "status 1 when any point is in alert or danger.")
    p.add_argument("archive", metavar="ARCHIVE")
    add_json_option(p)
    p.set_defaults(func=run_status)

    p = sub.add_parser("events", help="the alarm event log; acknowledge an event",
                       description="Changes of alarm state, oldest first, numbered for "
                                   "--ack. Exit status 1 when an event shown is an alert "
                                   "or danger.")
    p.add_argument("archive", metavar="ARCHIVE")
    p.add_argument("--point", metavar="SITE/MACHINE/POINT")
    p.add_argument("--since", metavar="DATE", help="events since DATE (ISO-8601, UTC)")
    p.add_argument("--ack", type=int, metavar="INDEX", help="acknowledge event INDEX")
    p.add_argument("--by", metavar="NAME", help="who acknowledges")
    p.add_argument("--note", metavar="TEXT", help="a note with the acknowledgement")
    add_json_option(p)
    p.set_defaults(func=run_events)
