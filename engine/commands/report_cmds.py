"""``shaftwatch report``: a PDF or HTML report of one machine or of one survey.

Exit status: 0 when every point in the report is ok (or has no state: no data, bad
data), 1 when any point is in alert or danger, 2 on bad input (an unknown machine,
a date without a survey, a file name that does not end ``.pdf`` or ``.html``).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ..errors import InputError
from .archive_cmds import _archive
from .common import add_json_option, emit_json, print_pairs

# The report modules (matplotlib, the trend and forecast layers) are imported when a
# report is written, so that building the parser for other commands stays quick.


class _StderrProgress:
    """Progress of a long report on one line of a terminal's stderr."""

    def __init__(self, stage: str) -> None:
        self.stage = stage
        self.drawn = False

    def __call__(self, done: int, total: int, text: str) -> None:
        line = f"{self.stage} {done}/{total}  {text}"
        sys.stderr.write("\r" + line[:78].ljust(78))
        sys.stderr.flush()
        self.drawn = True

    def finish(self) -> None:
        if self.drawn:
            sys.stderr.write("\r" + " " * 78 + "\r")
            sys.stderr.flush()


def _progress(stage: str) -> _StderrProgress | None:
    return _StderrProgress(stage) if sys.stderr.isatty() else None


def pdf_pages(path: Path) -> int | None:
    """Number of pages of a PDF, read with pypdf; None when pypdf is not installed."""
    try:
        from pypdf import PdfReader
    except ImportError:
        return None
    return len(PdfReader(str(path)).pages)


def _target(path: str) -> Path:
    from ..report import RENDERERS
    from ..report.output import check_target

    target = Path(path)
    suffix = target.suffix.lower()
    if suffix not in RENDERERS:
        raise InputError(f"{target}: a report must end {' or '.join(RENDERERS)}, got "
                         f"{target.suffix or 'no suffix'!r}")
    return check_target(target, suffix)


def _since_s(args: argparse.Namespace) -> float | None:
    if args.since is None:
        return None
    if args.machine is None:
        raise InputError("--since applies to a machine report (--machine TAG); a survey "
                         "report covers its survey")
    from ..archive.schema import parse_time

    return parse_time(args.since, field="--since").timestamp()


def run_report(args: argparse.Namespace) -> int:
    from ..report import render
    from ..report.assemble import (find_machine, machine_report, state_counts,
                                   summary_line, survey_report, worst)

    target = _target(args.output)          # bad file names fail before any work
    since = _since_s(args)
    bar = _progress("assembling")
    try:
        with _archive(args.archive, "r", "report") as arc:
            if args.machine is not None:
                site, tag = find_machine(arc, args.machine)
                data = machine_report(arc, site, tag, since_s=since, progress=bar)
            else:
                data = survey_report(arc, date=args.survey or None, progress=bar)
    finally:
        if bar is not None:
            bar.finish()
    bar = _progress("writing")
    try:
        path = render(data, target, progress=bar)
    finally:
        if bar is not None:
            bar.finish()
    pages = pdf_pages(path) if path.suffix.lower() == ".pdf" else None
    counts = state_counts(data)
    status = 1 if counts["alert"] or counts["danger"] else 0
    summary = summary_line(data)
    if args.json:
        out = {"report": str(path), "format": path.suffix.lower().lstrip("."),
               "title": data.title, "scope": data.scope, "states": counts,
               "worst": worst(data), "summary": summary,
               "points": [{"machine": r.machine, "point": r.point, "state": r.state,
                           "zone": r.zone, "overall_mm_s": r.overall_mm_s,
                           "taken": r.taken} for r in data.status],
               "exit_status": status}
        if pages is not None:
            out["pages"] = pages
        emit_json(out)
        return status
    pairs: list[tuple[str, object]] = [("report", str(path))]
    if pages is not None:
        pairs.append(("pages", pages))
    pairs.append(("status", summary))
    print_pairs(pairs)
    return status


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "report", help="write a PDF or HTML report of a machine or a survey",
        description="Write a report for the maintenance planner: status of the points, "
                    "trends with alert and danger lines and forecasts, the spectra that "
                    "carry findings, the findings with evidence and recommendations, "
                    "cautions and notes.  Exit status 0 when every point is ok, 1 when "
                    "any is in alert or danger, 2 on bad input.")
    p.add_argument("archive", metavar="ARCHIVE", help="plant archive folder")
    which = p.add_mutually_exclusive_group(required=True)
    which.add_argument("--machine", metavar="TAG",
                       help="report one machine, by tag (SITE/TAG when the tag is used "
                            "at more than one site)")
    which.add_argument("--survey", nargs="?", const="", metavar="DATE",
                       help="report one survey: the one with runs on DATE (YYYY-MM-DD, "
                            "UTC), default the newest")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="report file, ending .pdf or .html")
    p.add_argument("--since", metavar="DATE",
                   help="machine report: trends show runs from this date (ISO-8601, UTC)")
    add_json_option(p)
    p.set_defaults(func=run_report)
