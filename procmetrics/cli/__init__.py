"""Command-line interface: thin wrappers over the library API.

Each command lives in its own module ``procmetrics.cli.cmd_<name>`` exposing
``register(subparsers)``; the parser it adds sets ``func(args) -> int``.
Library exceptions become one line on stderr and the exception's exit code.
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys
from typing import Sequence

from procmetrics import progress
from procmetrics import __version__
from procmetrics.errors import ProcmetricsError
from procmetrics.cli.warnlines import warning_lines
from procmetrics.textsafe import PrintableStream

# Order is the order shown in --help.
COMMANDS: list[str] = ["mine", "export", "report", "check", "rerun", "diff", "series",
                       "changes", "compare", "lifetimes", "growth", "carryover"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="procmetrics",
        description=("Measure a git history's development process (review coverage, "
                     "fix ratios, defect lifetimes) with honest statistics."),
        epilog="Run 'procmetrics COMMAND --help' for a command's options.",
    )
    parser.add_argument("--version", action="version", version=f"procmetrics {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMANDS:
        module = importlib.import_module(f"procmetrics.cli.cmd_{name}")
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    # every line any command prints goes through one sanitiser (procmetrics.textsafe):
    # names and text from repositories and user files cannot drive the terminal
    saved = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = PrintableStream(saved[0]), PrintableStream(saved[1])
    try:
        with warning_lines():        # warnings: one line each (procmetrics.cli.warnlines)
            return _main(argv)
    finally:
        sys.stdout, sys.stderr = saved


def _main(argv: Sequence[str] | None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        # analysis commands: numbered steps on stderr when it is a terminal (the report
        # opens its own, with an estimate of the time left; mine has its own bar)
        if hasattr(args, "progress") and args.command not in ("mine", "report"):
            with progress.steps(args.command, enabled=args.progress):
                return int(args.func(args) or 0)
        return int(args.func(args) or 0)
    except ProcmetricsError as exc:
        print(f"procmetrics: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("procmetrics: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # noqa: BLE001 - last line of defence, no traceback for users
        if os.environ.get("PROCMETRICS_DEBUG"):
            raise
        print(f"procmetrics: internal error: {exc.__class__.__name__}: {exc} "
              "(set PROCMETRICS_DEBUG=1 for a traceback and please report it)",
              file=sys.stderr)
        return 70


def add_progress_argument(parser: argparse.ArgumentParser) -> None:
    """``--progress`` / ``--no-progress`` of the analysis commands and the report."""
    parser.add_argument("--progress", action=argparse.BooleanOptionalAction, default=None,
                        help="progress steps and time so far on stderr (default: when "
                        "stderr is a terminal)")


def add_store_argument(parser: argparse.ArgumentParser) -> None:
    """The ``--store`` option every command shares."""
    parser.add_argument(
        "--store", metavar="PATH_OR_URL", default=os.environ.get("PROCMETRICS_STORE"),
        help=("SQLite file or SQLAlchemy URL (e.g. postgresql+psycopg://user@host/db); "
              "default: $PROCMETRICS_STORE or ./procmetrics.sqlite"))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
