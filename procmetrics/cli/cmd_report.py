"""``procmetrics report``: write the audit folder (HTML, PDF, JSON, CSV, manifest)."""
from __future__ import annotations

import argparse

from procmetrics import progress
from procmetrics.cli import (add_progress_argument, add_scope_arguments, add_scope_file_argument,
                             add_store_argument)
from procmetrics.background import DEFAULT_JOBS
from procmetrics.report.model import PERIODS, ReportOptions
from procmetrics.validate import arg, check_count, check_level, check_seed


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "report", help="write the audit report for a mined repository",
        description="Run every analysis on the store and write a folder with report.html "
        "(self-contained), report.pdf, report.json (every figure's numbers), tables/*.csv "
        "(the data behind each figure and table) and manifest.json (provenance and "
        "checksums). Figures the data cannot carry are flagged automatically.")
    add_store_argument(p)
    add_progress_argument(p)
    p.add_argument("--out", required=True, metavar="DIR",
                   help="output folder: new or empty; an earlier report folder only with "
                   "--overwrite (written beside it, then moved into place)")
    p.add_argument("--overwrite", action="store_true",
                   help="replace the earlier procmetrics report in --out as a whole")
    p.add_argument("--repo", metavar="NAME", help="repository in the store (needed when it "
                   "holds several)")
    p.add_argument("--policy-date", metavar="DATE|REV", dest="policy",
                   help="date (YYYY-MM-DD) of the process change, or a tag or commit in the "
                   "store whose committer date is used")
    p.add_argument("--claims", metavar="FILE", help="claims file (TOML) to check and include")
    p.add_argument("--subsystem", action="append", default=[], metavar="NAME",
                   dest="subsystems", help="also show this subsystem on its own (repeatable)")
    p.add_argument("--period", choices=PERIODS, default=ReportOptions.period,
                   help=f"period of the series (default: {ReportOptions.period}; release = "
                   "between tags)")
    p.add_argument("--level", type=arg(check_level, "--level"), default=0.95,
                   help="interval level (default 0.95)")
    p.add_argument("--seed", type=arg(check_seed, "--seed"), default=ReportOptions.seed,
                   help="seed of the bootstrap resampling (recorded in the manifest)")
    p.add_argument("--pdf-engine", choices=["auto", "chromium", "fallback", "none"],
                   default="auto", help="auto: headless chromium when found, else a plain "
                   "PDF drawn with matplotlib (default)")
    p.add_argument("--meta", metavar="FILE", help="report metadata (TOML: document_id, "
                   "revision, title, author, reviewer, approver, organisation, date) printed "
                   "in the control block and the running header; copied into the folder")
    p.add_argument("--commit-url", metavar="TEMPLATE", help="URL template with {hash}, e.g. "
                   "'https://git.example.org/fw/commit/{hash}': every commit hash becomes a "
                   "link (http/https only)")
    p.add_argument("--exclusions", metavar="FILE", help="carry-over exclusions file (TOML "
                   "[[exclude]] tables with upstream and reason; as for 'procmetrics "
                   "carryover'): used by the carry-over section and claims, copied into the "
                   "folder")
    p.add_argument("--raw-csv", action="store_true",
                   help="exact text in tables/*.csv (default: a leading ' before text cells "
                   "starting with = + - @ tab or CR, so spreadsheets do not run them)")
    p.add_argument("--jobs", type=arg(check_count, "--jobs"), default=DEFAULT_JOBS, metavar="N",
                   help=f"processes for the analyses (default {DEFAULT_JOBS}: the defect-"
                   "lifetime bootstrap runs beside the other sections on large histories; "
                   "1: one process). The report is the same with any N")
    add_scope_arguments(p)
    add_scope_file_argument(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    opts = ReportOptions(repo=args.repo, policy=args.policy,
                         subsystems=tuple(dict.fromkeys(args.subsystems)), period=args.period,
                         claims_path=args.claims, level=args.level, seed=args.seed,
                         pdf_engine=args.pdf_engine, meta_path=args.meta,
                         commit_url=args.commit_url, raw_csv=args.raw_csv, scope=args.scope,
                         since=args.since, until=args.until, scope_file=args.scope_file,
                         exclusions_path=args.exclusions)
    from procmetrics.report.build import REPORT_STEPS, make_report  # heavy: imported when run

    with progress.steps("report", REPORT_STEPS, enabled=args.progress):
        files = make_report(args.store, args.out, opts, overwrite=args.overwrite,
                            jobs=args.jobs)
    print(f"report written to {files.html} (PDF: {files.pdf_engine}; "
          f"{len(files.csv)} tables; manifest {files.manifest.name})")
    return 0
