"""``procmetrics lifetimes``: defect lifetimes from Fixes: links (naive and truncation-aware)."""
from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.cli import add_store_argument
from procmetrics.errors import ProcmetricsError, StoreError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("lifetimes", help="defect lifetimes (introducer to first fix)",
                       description="Defect lifetimes from resolved Fixes: links: naive and "
                       "right-truncation-aware curves and quantiles, per subsystem or period, "
                       "and a log-rank comparison at a common follow-up horizon.")
    add_store_argument(p)
    p.add_argument("--repo", help="repository name in the store (needed when it holds several)")
    p.add_argument("--basis", choices=["committer", "author", "releases"], default="committer",
                   help="clock for lifetimes: committer dates (default), author dates, or "
                   "releases shipped (reads tag ancestry from the clone)")
    p.add_argument("--by", choices=["subsystem", "period"], help="curves and summaries per group")
    p.add_argument("--change-date", metavar="DATE", help="periods = before/after DATE "
                   "(default: calendar years)")
    p.add_argument("--horizon", type=float, metavar="N", help="common follow-up horizon for "
                   "comparisons, in days (in releases with --basis releases)")
    p.add_argument("--boot", type=int, default=200, metavar="B", help="bootstrap resamples")
    p.add_argument("--seed", type=int, default=20240601, help="random seed (bootstrap)")
    p.add_argument("--out", metavar="DIR", help="write JSON, CSV tables and figures here")
    p.set_defaults(func=run)


def load_tables(store: str | None, repo: str | None) -> tuple[dict[str, pd.DataFrame], str]:
    """Read the tidy tables the lifetime and growth commands need (one repository)."""
    from procmetrics.store import open_store
    from procmetrics.store.tables import read_table

    engine = open_store(store, create=False)
    try:
        repos = read_table(engine, "repositories", repo)
        if repos.empty:
            raise StoreError(f"repository {repo!r} not in the store" if repo
                             else "the store holds no repository: run 'procmetrics mine' first")
        if repo is None and len(repos) > 1:
            raise ProcmetricsError("the store holds several repositories ("
                                   + ", ".join(repos["repo"]) + "); choose one with --repo")
        name = str(repos["repo"].iloc[0])
        tables = {t: read_table(engine, t, name) for t in
                  ("fix_links", "commits", "commit_subsystems", "trailers", "tags")}
        tables["repositories"] = repos
    finally:
        engine.dispose()
    return tables, name


def containment(tables: dict[str, pd.DataFrame], commits: list[str],
                tags: list[str] | None = None) -> pd.DataFrame:
    """Tag ancestry from the clone recorded in the store (read-only git)."""
    from procmetrics.mine.ancestry import tag_containment

    path = str(tables["repositories"]["path"].iloc[0])
    if tags is None:
        tags = list(tables["tags"]["name"])
    return tag_containment(path, commits, tags)


def write_json(path: Path, obj: Any) -> None:
    try:
        path.write_text(json.dumps(obj, indent=2, sort_keys=True, allow_nan=False) + "\n")
    except OSError as exc:
        raise StoreError(f"cannot write {path}: {exc}") from exc


def run(args: argparse.Namespace) -> int:
    from procmetrics.analyse.defects import build_defects
    from procmetrics.analyse.lifetime_analysis import analyse_lifetimes

    tables, name = load_tables(args.store, args.repo)
    links = tables["fix_links"]
    cont = None
    if args.basis == "releases":
        ok = links[links["status"] == "resolved"]
        cont = containment(tables, list(pd.unique(pd.concat([ok["introducer_hash"],
                                                             ok["fix_hash"]]).dropna())))
    table = build_defects(links, basis=args.basis, commits=tables["commits"],
                          commit_subsystems=tables["commit_subsystems"],
                          trailers=tables["trailers"], tag_containment=cont,
                          period_cuts=[args.change_date] if args.change_date else None)
    res = analyse_lifetimes(table, by=args.by, horizon=args.horizon, n_boot=args.boot,
                            rng=np.random.default_rng(args.seed))
    print(f"{name}: {res.n_defects} defects ({res.n_negative_excluded} with negative lifetime "
          f"excluded); basis {res.basis}, unit {res.unit}")
    med = res.summary[res.summary["quantile"] == 0.5]
    for row in med.itertuples():
        print(f"  median {row.group:<20} {row.method:<17} {_num(row.value)} "
              f"[{_num(row.low)}, {_num(row.high)}] n={row.n}")
    if res.comparison is not None:
        c = res.comparison
        print(f"  {c.name} at horizon {args.horizon:g}: chi2={c.statistic:.2f} df={c.df} "
              f"p={c.p_value:.3g}")
    for cv in res.caveats:
        print(f"  caveat [{cv.code}] {cv.message}")
    if args.out:
        _write(Path(args.out), table, res)
    return 0


def _num(x: Any) -> str:
    return "-" if x is None or (isinstance(x, float) and not np.isfinite(x)) else f"{x:.1f}"


def _write(out: Path, table: Any, res: Any) -> None:
    from procmetrics.plot.survival import plot_survival, plot_survival_by_group

    out.mkdir(parents=True, exist_ok=True)
    write_json(out / "lifetimes.json", {"defect_table": {k: v for k, v in table.to_dict().items()
                                                         if k != "defects"},
                                        "analysis": res.to_dict()})
    table.defects.to_csv(out / "defects.csv", index=False, date_format="%Y-%m-%dT%H:%M:%SZ")
    res.summary.to_csv(out / "lifetime_quantiles.csv", index=False)
    res.curves.to_csv(out / "lifetime_curves.csv", index=False)
    if len(res.curves):
        ax = plot_survival(res)
        ax.figure.savefig(out / "lifetimes.png", dpi=120, bbox_inches="tight")
        if res.by and (res.curves["group"] != "(all)").any():
            ax = plot_survival_by_group(res)
            ax.figure.savefig(out / f"lifetimes_by_{res.by}.png", dpi=120, bbox_inches="tight")
