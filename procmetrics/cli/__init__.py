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


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The parser of every command, or of ``only`` that one (see :func:`command_named`)."""
    parser = argparse.ArgumentParser(
        prog="procmetrics",
        description=("Measure a git history's development process (review coverage, "
                     "fix ratios, defect lifetimes) with honest statistics."),
        epilog="Run 'procmetrics COMMAND --help' for a command's options.",
    )
    parser.add_argument("--version", action="version", version=f"procmetrics {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMANDS if only is None else [only]:
        module = importlib.import_module(f"procmetrics.cli.cmd_{name}")
        module.register(sub)
    return parser


def command_named(argv: Sequence[str]) -> str | None:
    """The command ``argv`` runs, when its first word names one; else None.

    Only that command's module is then imported: each one imports what its command needs
    (the analyses pandas and more), and loading all twelve cost about 1 s of every call,
    a tenth of an incremental ``mine`` on a million-commit store. The top-level options
    (``--help``, ``--version``) take no value, so a command is always the first word;
    anything else (no command, a misspelt one) gets the whole parser and its messages.
    """
    return argv[0] if argv and argv[0] in COMMANDS else None


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


def quiet_library_logs() -> None:
    """SQLAlchemy logs a connection reset that Ctrl-C interrupted (while a connection
    goes back to its pool) as an error with a traceback, through Python's last-resort
    handler on stderr; the command already says "interrupted" in one line. Kept with
    ``PROCMETRICS_DEBUG``."""
    import logging

    if not os.environ.get("PROCMETRICS_DEBUG"):
        pool = logging.getLogger("sqlalchemy.pool")
        if not any(isinstance(h, logging.NullHandler) for h in pool.handlers):
            pool.addHandler(logging.NullHandler())
        pool.propagate = False


def _main(argv: Sequence[str] | None) -> int:
    quiet_library_logs()
    words = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(command_named(words))
    args = parser.parse_args(words)
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


def add_scope_arguments(parser: argparse.ArgumentParser) -> None:
    """``--scope FILE[:NAME]``, ``--since WHEN``, ``--until WHEN`` (procmetrics.scope)."""
    g = parser.add_argument_group(
        "scope and window (the tables are cut once; every figure is about them)")
    g.add_argument("--scope", metavar="FILE[:NAME]",
                   help="only commits touching these paths: a scope file (.toml, NAME picks "
                   "one of its [scope.NAME] tables), a compilation database (.json: the "
                   "compiled files) or a path list (one path a line); defects whose "
                   "introducing commit touched them")
    g.add_argument("--since", metavar="DATE|TAG",
                   help="only commits with committer date on/after this (a date, a tag or a "
                   "commit)")
    g.add_argument("--until", metavar="DATE|TAG",
                   help="only commits with committer date on/before this; defect analyses "
                   "end here")


def add_scope_file_argument(parser: argparse.ArgumentParser) -> None:
    """``--scope-file FILE`` (check, report): where claims' ``scope = "NAME"`` are found."""
    parser.add_argument("--scope-file", metavar="FILE",
                        help="scope file (.toml) whose [scope.NAME] tables the claims name "
                        "with scope = \"NAME\"; such a claim is judged on its scope (cut "
                        "from the whole tree, in the --since/--until window)")


def scope_request(args: argparse.Namespace) -> object:
    """The :class:`procmetrics.scope.apply.ScopeRequest` of the options (inactive if none)."""
    from procmetrics.scope.apply import ScopeRequest

    return ScopeRequest(getattr(args, "scope", None), getattr(args, "since", None),
                        getattr(args, "until", None))


def print_scope(summary: object, out: object = None) -> None:
    """The scope header (before any figure) and, with an output folder, ``scope.json``."""
    if summary is None:
        return
    for line in summary.lines():  # type: ignore[attr-defined]
        print(line)
    if out is not None:
        import json
        from pathlib import Path

        (Path(str(out)) / "scope.json").write_text(
            json.dumps(summary.to_dict(), indent=1, sort_keys=True) + "\n",  # type: ignore
            encoding="utf-8")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
