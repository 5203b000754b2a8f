"""The ``shaftwatch`` command line.

Every sub-command prints a human-readable table by default and JSON with ``--json``;
errors go to stderr as one line naming the file and the problem, with exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from . import __version__
from .errors import EngineError

CAUTION = (
    "Vibration analysis supports decisions; it does not prove a machine safe. "
    "ISO 20816 zone defaults are generic: the machine maker's limits, the site's "
    "standards and local codes take precedence."
)


#: Modules of engine/commands whose ``register(subparsers)`` adds their commands.
COMMAND_MODULES = ("signal_cmds", "analysis_cmds", "model_cmds", "demo_cmds", "archive_cmds",
                   "alarm_cmds", "trend_cmds", "batch_cmds", "report_cmds")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="shaftwatch",
        description="Shaftwatch: vibration condition monitoring of rotating machines.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"shaftwatch {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(f"engine.commands.{name}").register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except EngineError as exc:
        sys.stderr.write(f"shaftwatch {args.command}: error: {exc}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write(f"shaftwatch {args.command}: cancelled\n")
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
