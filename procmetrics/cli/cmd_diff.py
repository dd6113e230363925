"""``procmetrics diff``: compare two report folders (verdicts, intervals, provenance)."""
from __future__ import annotations

import argparse

from procmetrics.errors import EXIT_FIGURES_DIFFER


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "diff", help="compare two report folders: verdicts, intervals, provenance",
        description="Compare report folder A with B without recomputing anything: claims "
        "whose verdict changed, numbers of figures and tables that moved beyond their "
        "intervals (B's value outside A's interval for the same row, or A's outside B's), "
        "and changed provenance (HEAD, store checksum, claims file, options, versions). "
        f"Exit 0 when no verdict changed and nothing moved beyond an interval, "
        f"{EXIT_FIGURES_DIFFER} otherwise.")
    p.add_argument("a", metavar="A", help="earlier report folder")
    p.add_argument("b", metavar="B", help="later report folder")
    p.add_argument("--json", metavar="FILE", help="also write the comparison as JSON "
                   "('-' = stdout only)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    import sys

    from procmetrics.claims.check import write_text
    from procmetrics.report.diff import diff_reports
    from procmetrics.report.jsonout import dumps

    result = diff_reports(args.a, args.b)
    if args.json == "-":
        sys.stdout.write(dumps(result.to_dict()))
    else:
        print(result.summary())
        if args.json:
            write_text(args.json, dumps(result.to_dict()))
    return EXIT_FIGURES_DIFFER if result.differs else 0
