"""What every sub-command shares: input options, loading a channel, output."""

from __future__ import annotations

import argparse
import json
import math
import sys
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..io import read_recording
from ..recording import Recording
from ..units import UNITS, parse_sensitivity, unit

UNIT_CHOICES = ", ".join(UNITS)


class _GivenStore(argparse._StoreAction):
    """The ordinary ``store`` action that also notes, in ``args._given``, which options
    were typed, so that a run from an archive can tell a default from a choice."""

    def __call__(self, parser, namespace, values, option_string=None):
        super().__call__(parser, namespace, values, option_string)
        given = set(getattr(namespace, "_given", ()))
        given.add(self.dest)
        namespace._given = given


def add_input_options(p: argparse.ArgumentParser, *, file_required: bool = True) -> None:
    """Options that say how to read a recording file and which channel to analyse.

    With ``file_required`` the command takes a recording FILE, or a run of an archive
    with ``--archive ARCHIVE --run RUN_ID`` instead (then the point's analysis settings
    are the defaults of the spectrum options).
    """
    if file_required:
        # Options added to this parser from here on (the spectrum options too) record
        # whether they were given.
        p.register("action", None, _GivenStore)
        p.register("action", "store", _GivenStore)
        p.add_argument("file", metavar="FILE", nargs="?",
                       help="recording: .wav, .mat, .csv or .tsv (or give --archive and --run)")
        a = p.add_argument_group("archive run (instead of FILE)")
        a.add_argument("--archive", metavar="ARCHIVE", help="plant archive folder")
        a.add_argument("--run", metavar="RUN_ID",
                       help="run id in --archive (or a unique prefix of 6+ digits)")
    g = p.add_argument_group("input")
    g.add_argument("--channel", type=int, default=0, metavar="N",
                   help="channel to analyse, counted from 0 (default 0)")
    g.add_argument("--input-unit", default="g", metavar="U",
                   help=f"unit of the samples as stored ({UNIT_CHOICES}; default g)")
    g.add_argument("--sensitivity", metavar="S",
                   help="sensor sensitivity when the input is in volts, e.g. 100mV/g "
                        "(a bare number is mV/g)")
    g.add_argument("--full-scale", type=float, metavar="X",
                   help="value (in the input unit) of integer full scale in a PCM WAV "
                        "(default 1)")
    g.add_argument("--sample-rate", type=float, metavar="HZ",
                   help="sample rate when the file does not hold one (MAT, CSV)")
    g.add_argument("--variable", metavar="NAME", help="MAT-file variable to read")
    g.add_argument("--time-column", metavar="NAME", help="CSV column holding time in s")
    g.add_argument("--rpm", type=float, metavar="R", help="shaft speed, rev/min")


def add_json_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")


@dataclass
class LoadedChannel:
    """One channel of a recording, ready to analyse."""

    recording: Recording
    index: int
    samples: np.ndarray
    unit: str
    rpm: float | None
    source: str

    @property
    def fs_hz(self) -> float:
        return self.recording.fs_hz

    def warnings(self) -> list[str]:
        return [q.message for q in self.recording.quality
                if q.severity == "warning" and q.channel in (None, self.index)]


#: Input options that only apply to reading a file, with their defaults.
_FILE_ONLY = {"input_unit": "g", "sensitivity": None, "full_scale": None,
              "sample_rate": None, "variable": None, "time_column": None}


def _archive_run(args: argparse.Namespace):
    """The run named by ``--archive``/``--run``: (Recording, point properties)."""
    from ..archive import open_archive

    if not (getattr(args, "archive", None) and getattr(args, "run", None)):
        raise InputError("give both --archive ARCHIVE and --run RUN_ID")
    if args.file is not None:
        raise InputError(f"{args.file}: give a FILE or --archive with --run, not both")
    given = [k for k, v in _FILE_ONLY.items() if getattr(args, k, v) != v]
    if given:
        raise InputError("--" + ", --".join(k.replace("_", "-") for k in given)
                         + " apply to reading a file; a run in an archive is stored in its "
                           "own unit")
    with open_archive(args.archive) as arc:
        rec, info = arc.read_run(arc.resolve_run(args.run))
        point = arc.point(info.point)
    return rec, point.props


def read_input(args: argparse.Namespace) -> Recording:
    """Read the recording named by ``args.file`` (or ``--archive``/``--run``)."""
    if getattr(args, "archive", None) or getattr(args, "run", None):
        return _archive_run(args)[0]
    if args.file is None:
        raise InputError("give a recording FILE, or --archive ARCHIVE --run RUN_ID")
    if args.input_unit is not None:
        unit(args.input_unit, source=args.file, field="--input-unit")
    sens = None
    if args.sensitivity is not None:
        sens = parse_sensitivity(args.sensitivity)
    return read_recording(args.file, input_unit=args.input_unit,
                          sample_rate_hz=args.sample_rate, variable=args.variable,
                          full_scale=args.full_scale, sensitivity=sens,
                          time_column=args.time_column)


def load_channel(args: argparse.Namespace) -> LoadedChannel:
    """Read the input and pick the channel; InputError when it cannot be analysed.

    For a run of an archive, the spectrum options not given on the command line take
    the point's analysis settings (Fmax, lines, window, averages, overlap).
    """
    if getattr(args, "archive", None) or getattr(args, "run", None):
        rec, props = _archive_run(args)
        given = getattr(args, "_given", set())
        fmax = props.get("fmax_hz", math.nan)
        averages = props.get("averages", 0)
        for name, value in (("fmax", None if math.isnan(fmax) else fmax),
                            ("lines", props.get("lines")), ("window", props.get("window")),
                            ("averages", averages if averages else None),
                            ("overlap", props.get("overlap"))):
            if (getattr(args, "point_settings", True) and hasattr(args, name)
                    and name not in given and value is not None):
                setattr(args, name, value)
    else:
        rec = read_input(args)
    ch = rec.channel(args.channel)
    errors = rec.errors(args.channel)
    if errors:
        raise InputError("; ".join(q.message for q in errors))
    rpm = args.rpm if args.rpm is not None else rec.rpm
    if rpm is not None and not rpm > 0:
        raise InputError(f"{rec.source}: --rpm must be a positive number, got {rpm}")
    return LoadedChannel(recording=rec, index=args.channel, samples=ch.samples,
                         unit=ch.unit, rpm=rpm, source=rec.source)


def _clean(obj):
    """JSON-safe copy: numpy scalars to Python, NaN/inf to None."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _clean(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


def emit_json(obj) -> None:
    json.dump(_clean(obj), sys.stdout, indent=1)
    sys.stdout.write("\n")


def fmt(value, digits: int = 4) -> str:
    """A number for a table: 4 significant digits, '—' for missing."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "—"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return f"{float(value):.{digits}g}"


def print_table(headers: list[str], rows: list[list], *, out=None) -> None:
    """Print rows under headers in aligned columns (numbers right-aligned)."""
    out = out or sys.stdout
    cells = [[c if isinstance(c, str) else fmt(c) for c in r] for r in rows]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, h in enumerate(headers)]
    out.write("  ".join(h.ljust(w) for h, w in zip(headers, widths)).rstrip() + "\n")
    out.write("  ".join("-" * w for w in widths) + "\n")
    for r, raw in zip(cells, rows):
        parts = [c.rjust(w) if not isinstance(v, str) else c.ljust(w)
                 for c, w, v in zip(r, widths, raw)]
        out.write("  ".join(parts).rstrip() + "\n")


def print_pairs(pairs: list[tuple[str, object]], *, out=None) -> None:
    """Print ``name: value`` lines with the names aligned."""
    out = out or sys.stdout
    width = max(len(k) for k, _ in pairs)
    for k, v in pairs:
        out.write(f"{k.ljust(width)}  {v if isinstance(v, str) else fmt(v)}\n")


def print_warnings(warnings: list[str]) -> None:
    for w in warnings:
        sys.stderr.write(f"warning: {w}\n")
