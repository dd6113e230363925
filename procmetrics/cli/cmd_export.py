"""``procmetrics export``: write one tidy table as CSV or Parquet."""
from __future__ import annotations

import argparse
import sys

from procmetrics.cli import add_store_argument
from procmetrics.errors import ConfigError, OutputPathError
from procmetrics.store import open_store
from procmetrics.textsafe import data_stdout, neutralise_frame, unfiltered
from procmetrics.store.repodata import choose_repo
from procmetrics.store.tables import COLUMNS, read_table


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("export", help="write a tidy table (CSV or Parquet)",
                       description="Write one tidy table from the store. Tables: "
                       + ", ".join(sorted(COLUMNS)))
    add_store_argument(p)
    p.add_argument("--table", required=True, choices=sorted(COLUMNS))
    p.add_argument("--format", choices=["csv", "parquet"], default="csv")
    p.add_argument("--repo", help="only this repository (name as stored)")
    p.add_argument("-o", "--output", help="output file; '-' or none: standard output (Parquet needs '-o -' for that)")
    p.add_argument("--raw-csv", action="store_true",
                   help="exact text in CSV cells (default: a leading ' before text cells "
                   "starting with = + - @ tab or CR, so spreadsheets do not run them)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    out = args.output
    if out is not None and not out.strip():
        raise OutputPathError("-o needs a file name ('-' for standard output)")
    to_stdout = out is None or out == "-"
    if args.format == "parquet" and out is None:
        raise ConfigError("--format parquet needs --output FILE (or '-o -' for standard output)",
                          key="--output")
    engine = open_store(args.store, create=False, readonly=True)
    if args.repo is not None:
        choose_repo(engine, args.repo)          # an unknown name: exit 2, not an empty table
    df = read_table(engine, args.table, args.repo)
    if args.format == "csv":
        df = neutralise_frame(df, raw=args.raw_csv)
    try:
        if args.format == "parquet":
            target = unfiltered(sys.stdout).buffer if to_stdout else out
            df.to_parquet(target, index=False)
        elif to_stdout:
            df.to_csv(data_stdout(), index=False, date_format="%Y-%m-%dT%H:%M:%SZ")
        else:
            df.to_csv(out, index=False, date_format="%Y-%m-%dT%H:%M:%SZ")
    except (OSError, ValueError) as exc:
        if isinstance(exc, BrokenPipeError):
            raise
        reason = getattr(exc, "strerror", None) or exc
        raise OutputPathError(f"cannot write {out or 'standard output'}: {reason}") from exc
    return 0
