"""Options and helpers shared by the ``series``, ``changes`` and ``compare`` commands."""
from __future__ import annotations

import argparse
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.cli import (add_progress_argument, add_scope_arguments, add_store_argument,
                             print_scope, scope_request)


def add_series_arguments(p: argparse.ArgumentParser) -> None:
    """--store, --repo, --period, --subsystem, --metric, --include-merges, --out."""
    from procmetrics.analyse.measures.vocabulary import METRICS
    from procmetrics.analyse.measures.periods import DEFAULT_PERIOD, PERIODS

    add_store_argument(p)
    add_progress_argument(p)
    p.add_argument("--repo", help="repository name in the store (needed when it holds several)")
    p.add_argument("--period", choices=PERIODS, default=DEFAULT_PERIOD,
                   help=f"period length (default: {DEFAULT_PERIOD}, as in check and report); "
                   "'release' = first tag dated on/after the commit")
    p.add_argument("--subsystem", action="append", metavar="NAME",
                   help="also per subsystem NAME (repeatable; default: whole project only)")
    p.add_argument("--all-subsystems", action="store_true", help="every mapped subsystem")
    p.add_argument("--metric", action="append", choices=list(METRICS), metavar="METRIC",
                   help="metric(s) to show (repeatable): " + ", ".join(METRICS))
    p.add_argument("--review-key", action="append", metavar="KEY",
                   help="review-type trailer key (repeatable; default Reviewed-by, Acked-by, "
                   "Tested-by)")
    p.add_argument("--include-merges", action="store_true", help="count merge commits too")
    p.add_argument("--fix-keywords", action="store_true",
                   help="add fix_ratio_heuristic (subject keywords; flagged as heuristic)")
    p.add_argument("--out", metavar="DIR", help="write CSV/JSON and PNG+SVG figures here")
    add_scope_arguments(p)


def load(args: argparse.Namespace) -> tuple[dict[str, pd.DataFrame], str]:
    """The tables cut to ``--scope``/``--since``/``--until``; the scope header is printed
    (and ``scope.json`` written into ``--out``) before any figure."""
    from procmetrics.analyse.measures.metrics import DEFAULT_REVIEW_KEYS
    from procmetrics.session import load_tables

    # only what these commands use: subsystems when asked for, review trailers only
    names = ["fix_links", "commits", "trailers", "tags"]
    if args.subsystem or getattr(args, "all_subsystems", False) or getattr(args, "control", None):
        names.append("commit_subsystems")
    tables, name = load_tables(args.store, args.repo, scope_request(args), names=names,
                               trailer_keys=tuple(args.review_key or DEFAULT_REVIEW_KEYS))
    known_subsystems(tables, args.subsystem or (), "--subsystem")
    if getattr(args, "control", None):
        known_subsystems(tables, [args.control], "--control")
    summary = tables.get("scope_summary")
    print_scope(summary, out_dir(args) if summary is not None else None)
    return tables, name


def known_subsystems(tables: dict[str, pd.DataFrame], names: Any, option: str) -> None:
    """Names the store does not map are a usage mistake (exit 2), as in the report; a
    scope's names come from the whole tree."""
    from procmetrics.analyse.measures.selection import check_subsystem_names

    if names:
        check_subsystem_names(tables.get("whole_tree", tables).get("commit_subsystems"),
                              names, option)


def metric_config(args: argparse.Namespace, tables: dict[str, pd.DataFrame]) -> Any:
    """MetricConfig from the options; ``subsystems`` None means whole project only."""
    from procmetrics.analyse.measures.metrics import (DEFAULT_FIX_KEYWORDS, DEFAULT_REVIEW_KEYS,
                                             MetricConfig)

    subs: tuple[str, ...] | None = None
    if args.subsystem:
        subs = tuple(args.subsystem)
    elif getattr(args, "all_subsystems", False):
        subs = tuple(sorted(tables["commit_subsystems"]["subsystem"].dropna().unique()))
    return MetricConfig(period=args.period, include_merges=args.include_merges,
                        review_keys=tuple(args.review_key or DEFAULT_REVIEW_KEYS),
                        heuristic_keywords=DEFAULT_FIX_KEYWORDS if args.fix_keywords
                        else None, subsystems=subs)


def compute(args: argparse.Namespace, tables: dict[str, pd.DataFrame]) -> Any:
    """PeriodMetrics for the options (per subsystem only when asked)."""
    from procmetrics.analyse.measures.metrics import compute_period_metrics

    from procmetrics import progress

    progress.advance("per-period metrics")
    cfg = metric_config(args, tables)
    cs = tables["commit_subsystems"] if cfg.subsystems else None
    return compute_period_metrics(tables["commits"], tables["trailers"], commit_subsystems=cs,
                                  tags=tables["tags"], config=cfg)


def fmt(x: Any, digits: int = 3) -> str:
    if x is None or (isinstance(x, float) and not np.isfinite(x)):
        return "-"
    if isinstance(x, float) and abs(x) >= 1000:
        return f"{x:.0f}"
    return f"{x:.{digits}g}"


def ci(e: Any) -> str:
    """An estimate with its interval in the digits the report prints (procmetrics.textfmt)."""
    from procmetrics import textfmt

    if e is None or e.value is None:
        return "-"
    if e.low is None or e.high is None:
        return textfmt.number(e.value, e.unit)
    return textfmt.interval(e.value, e.low, e.high, e.unit)


def print_caveats(caveats: Any, indent: str = "  ") -> None:
    for cv in caveats:
        print(f"{indent}caveat [{cv.code}] {cv.message}")


def out_dir(args: argparse.Namespace) -> Any:
    from pathlib import Path

    from procmetrics.errors import OutputPathError

    if args.out is None:
        return None
    if not args.out.strip():
        raise OutputPathError("--out needs a folder name ('' would mean the current folder)")
    out = Path(args.out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputPathError(f"cannot create the folder {out}: {exc.strerror or exc}") from exc
    return out


#: metrics whose numerator is a resolved ``Fixes:`` link (unresolved references bias them low)
FIX_LINK_METRICS = ("fix_ratio", "stable_request_share")
#: share of unresolved or ambiguous fix references above which the commands warn
#: (the report's default ``--unresolved-share-limit``)
UNRESOLVED_LIMIT = 0.10


def data_quality_warnings(tables: dict[str, pd.DataFrame], metrics: Any) -> list[str]:
    """The store-level data-quality flags that apply to these metrics, as the report words
    them: a shallow clone, and (for fix metrics) fix references naming no commit of this
    history."""
    out = []
    repos = tables.get("repositories")
    if repos is not None and "is_shallow" in repos and \
            bool(repos["is_shallow"].astype("boolean").fillna(False).any()):
        out.append("warning [shallow_history] the clone is shallow: commits before the cut are "
                   "missing, so early periods, fix targets and lifetimes are incomplete")
    fl = tables.get("fix_links")
    if fl is not None and len(fl) and any(m in FIX_LINK_METRICS for m in metrics):
        st = fl["status"].astype(str)
        st = st[st != "self"]
        bad = int((st != "resolved").sum())
        if len(st) and bad / len(st) > UNRESOLVED_LIMIT:
            unres, amb = int((st == "unresolved").sum()), int((st == "ambiguous").sum())
            out.append(
                f"warning [unresolved_fix_references] {bad / len(st):.0%} of fix references "
                f"({unres} unresolved, {amb} ambiguous of {len(st)}) name no single commit of "
                f"this history, above the {UNRESOLVED_LIMIT:.0%} limit; fix ratios count only "
                "resolved links, so they understate how often commits fix earlier ones")
    return out


def print_data_quality(tables: dict[str, pd.DataFrame], metrics: Any) -> None:
    """Print the warnings first, before any number they qualify."""
    for line in data_quality_warnings(tables, metrics):
        print(line)
