"""``procmetrics export``: write one tidy table as CSV or Parquet."""
from __future__ import annotations

import argparse
import sys

from procmetrics.cli import add_store_argument
from procmetrics.errors import ProcmetricsError, StoreError
from procmetrics.store import open_store
from procmetrics.textsafe import data_stdout, neutralise_frame
from procmetrics.store.tables import COLUMNS, read_table


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("export", help="write a tidy table (CSV or Parquet)",
                       description="Write one tidy table from the store. Tables: "
                       + ", ".join(sorted(COLUMNS)))
    add_store_argument(p)
    p.add_argument("--table", required=True, choices=sorted(COLUMNS))
    p.add_argument("--format", choices=["csv", "parquet"], default="csv")
    p.add_argument("--repo", help="only this repository (name as stored)")
    p.add_argument("-o", "--output", help="output file (default: stdout for CSV)")
    p.add_argument("--raw-csv", action="store_true",
                   help="exact text in CSV cells (default: a leading ' before text cells "
                   "starting with = + - @ tab or CR, so spreadsheets do not run them)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    engine = open_store(args.store, create=False, readonly=True)
    df = read_table(engine, args.table, args.repo)
    if args.format == "parquet":
        if not args.output:
            raise ProcmetricsError("--format parquet needs --output FILE")
        try:
            df.to_parquet(args.output, index=False)
        except OSError as exc:
            raise StoreError(f"cannot write {args.output}: {exc}") from exc
        return 0
    df = neutralise_frame(df, raw=args.raw_csv)
    if args.output:
        try:
            df.to_csv(args.output, index=False, date_format="%Y-%m-%dT%H:%M:%SZ")
        except OSError as exc:
            raise StoreError(f"cannot write {args.output}: {exc}") from exc
    else:
        df.to_csv(data_stdout(), index=False, date_format="%Y-%m-%dT%H:%M:%SZ")
    return 0
