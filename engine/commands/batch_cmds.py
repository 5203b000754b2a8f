"""``shaftwatch reprocess``: analyse again, or re-evaluate the alarms of, a whole archive
(a process pool on this machine, or a Dask cluster with ``--scheduler``).

Exit status: 0 when every point evaluated is ok (or has no plan or no data), 1 when
any is in alert or danger, 2 on bad input, 130 when Ctrl-C stopped the batch (the runs
done are kept; the same command continues).
"""

from __future__ import annotations

import signal
import sys
import threading
from contextlib import contextmanager

from ..batch import WHATS, BatchSummary, reprocess
from ..importer import TerminalProgress
from .common import add_json_option, emit_json, print_table

#: Exit status when Ctrl-C stopped the batch (as the command line does for Ctrl-C).
CANCELLED_STATUS = 130


@contextmanager
def stop_on_interrupt(event: threading.Event):
    """The first Ctrl-C sets ``event`` (the batch stops handing out work and keeps what
    is done); a second one interrupts at once."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def first(signum, frame):
        event.set()
        sys.stderr.write("\nstopping after the runs in flight (Ctrl-C again to "
                         "interrupt at once)\n")
        signal.signal(signal.SIGINT, signal.default_int_handler)

    previous = signal.signal(signal.SIGINT, first)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def exit_status(summary: BatchSummary) -> int:
    """0 all ok, 1 any alert or danger, 130 stopped by Ctrl-C."""
    if summary.cancelled:
        return CANCELLED_STATUS
    return 1 if any(s in ("alert", "danger") for s in summary.states.values()) else 0


def run_reprocess(args) -> int:
    settings = {k: v for k, v in (("fmax_hz", args.fmax), ("lines", args.lines),
                                  ("window", args.window), ("averages", args.averages),
                                  ("overlap", args.overlap)) if v is not None}
    stop = threading.Event()
    bar = (TerminalProgress(unit="runs", label=lambda text: text[-40:], rate_from_first=True)
           if (args.progress or sys.stderr.isatty()) else None)
    try:
        with stop_on_interrupt(stop):
            summary = reprocess(args.archive, what=args.what, run_ids=args.runs,
                                points=args.points, settings=settings or None,
                                workers=args.workers, scheduler=args.scheduler,
                                resume=not args.no_resume, progress=bar, cancel=stop)
    finally:
        if bar is not None:
            bar.finish()
    for n in summary.notes:
        sys.stderr.write(f"note: {n}\n")
    if args.json:
        emit_json(summary.as_dict())
        return exit_status(summary)
    verb = "analysed" if summary.what == "analyse" else "re-measured"
    print(f"{args.archive}: {summary.total} runs — {verb} {len(summary.done)}, "
          f"left as they were {len(summary.skipped)}, failed {len(summary.failed)}"
          + (f", not reached {summary.left}" if summary.left else "")
          + f"; {summary.seconds:.1f} s on {summary.where}")
    if summary.cancelled:
        print("stopped before the end: run the same command again to continue")
    if summary.states:
        print()
        print_table(["point", "state", "before"],
                    [[p, s or "—", summary.changed[p][0] or "—" if p in summary.changed
                      else "(same)"] for p, s in sorted(summary.states.items())])
    if summary.failed:
        print()
        print_table(["run", "point", "reason"],
                    [[f["run_id"][:12] or "—", f["point"], f["reason"]]
                     for f in summary.failed])
    return exit_status(summary)


def register(sub) -> None:
    p = sub.add_parser(
        "reprocess", help="analyse again, or re-evaluate the alarms of, a whole archive",
        description="Analyse every run again (spectra, values, peaks, findings, band "
                    "values), optionally with other analysis settings, or re-evaluate the "
                    "alarms from the stored results; in a process pool on this machine, "
                    "or on a Dask cluster with --scheduler.  A stopped batch continues "
                    "where it stopped when the same command runs again.  Exit status 0 "
                    "when every point is ok, 1 when any is in alert or danger, 2 on bad "
                    "input.")
    p.add_argument("archive", metavar="ARCHIVE", help="plant archive folder")
    p.add_argument("--what", choices=WHATS, default="analyse",
                   help="analyse: compute each run's results again from its samples; "
                        "evaluate: alarms from the stored results only (default analyse)")
    p.add_argument("--point", dest="points", action="extend", nargs="+", metavar="P",
                   help="only these points, as Site/Machine/Point (default every point)")
    p.add_argument("--run", dest="runs", action="extend", nargs="+", metavar="RUN_ID",
                   help="only these runs (ids or unique prefixes of 6+ digits)")
    g = p.add_argument_group("analysis settings for this batch (instead of each point's)")
    g.add_argument("--fmax", type=float, metavar="HZ", help="Fmax, Hz")
    g.add_argument("--lines", type=int, metavar="N", help="lines of the spectrum")
    g.add_argument("--window", metavar="W", help="window, e.g. hann or flattop")
    g.add_argument("--averages", type=int, metavar="N", help="averages (0: all that fit)")
    g.add_argument("--overlap", type=float, metavar="F", help="overlap as a fraction, 0–0.9")
    w = p.add_argument_group("where it runs")
    w.add_argument("--workers", type=int, metavar="N",
                   help="worker processes on this machine (default: one per core)")
    w.add_argument("--scheduler", metavar="ADDRESS",
                   help="Dask scheduler address, e.g. tcp://10.0.0.5:8786 (needs the "
                        "'cluster' extra; the workers must see ARCHIVE at the same path)")
    p.add_argument("--no-resume", action="store_true",
                   help="analyse every run again, even those a stopped batch did or whose "
                        "results are current")
    p.add_argument("--progress", action="store_true",
                   help="draw the progress line even when stderr is not a terminal")
    add_json_option(p)
    p.set_defaults(func=run_reprocess)
