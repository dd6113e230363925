"""``procmetrics lifetimes``: defect lifetimes from Fixes: links (naive and truncation-aware)."""
from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.cli import (add_progress_argument, add_scope_arguments, add_store_argument,
                             print_scope, scope_request)
from procmetrics.errors import ConfigError
from procmetrics.resampling import N_BOOT, SEED, analysis_rng
from procmetrics import textfmt  # noqa: F401 - estimates print through it
from procmetrics.session import change_date, containment, links_from, load_tables
from procmetrics.validate import arg, check_count, check_nonnegative_int, check_positive, check_seed


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("lifetimes", help="defect lifetimes (introducer to first fix)",
                       description="Defect lifetimes from resolved Fixes: links: naive and "
                       "right-truncation-aware curves and quantiles, per subsystem or period, "
                       "and log-rank comparisons (plain and stratified) at a common "
                       "follow-up horizon. With --szz, also lifetimes from blame-based "
                       "(SZZ) candidate introducers of fixes that have no Fixes: link, "
                       "reported apart and labelled heuristic.")
    add_store_argument(p)
    add_progress_argument(p)
    p.add_argument("--repo", help="repository name in the store (needed when it holds several)")
    p.add_argument("--basis", choices=["committer", "author", "releases"], default="committer",
                   help="clock for lifetimes: committer dates (default), author dates, or "
                   "releases shipped (reads tag ancestry from the clone)")
    p.add_argument("--by", choices=["subsystem", "period"], help="curves and summaries per group")
    p.add_argument("--change-date", metavar="DATE", help="periods = before/after DATE "
                   "(default: calendar years)")
    p.add_argument("--horizon", type=arg(check_positive, "--horizon"), metavar="N", help="common follow-up horizon for "
                   "comparisons, in days (in releases with --basis releases)")
    p.add_argument("--links-from", metavar="DATE|settled|first|all", default="settled",
                   help="start of the fix-linking era: defects introduced earlier are left "
                   "out (they are seen only when long-lived). 'settled' (default) = the first "
                   "month from which the share of commits carrying a resolved fix link (pooled over "
                   "the 12 months ending there) first reaches 0.8 x its later level; "
                   "'first' = the first "
                   "linked fix; 'all' keeps every introducer (both-ends truncation, "
                   "Efron-Petrosian estimator)")
    p.add_argument("--min-cohort", type=arg(check_count, "--min-cohort"), default=30, metavar="N", help="the headline "
                   "horizon H is the longest (90, 180 days, whole years) at which every group "
                   "has at least N defects introduced H before the end and fixed within H "
                   "(default 30)")
    p.add_argument("--boot", type=arg(check_count, "--boot"), default=N_BOOT, metavar="B",
                   help=f"bootstrap resamples for the secondary truncation-aware figures "
                   f"(default {N_BOOT}, as in the report)")
    p.add_argument("--seed", type=arg(check_seed, "--seed"), default=SEED,
                   help="random seed (bootstrap; default the report's, so the same options "
                   "print the report's intervals)")
    p.add_argument("--out", metavar="DIR", help="write JSON, CSV tables and figures here")
    g = p.add_argument_group("blame-based linking (heuristic, off by default)")
    g.add_argument("--szz", action="store_true", help="also blame fix commits without a "
                   "Fixes: link (runs git blame on the clone; read-only) and report their "
                   "lifetimes apart, labelled heuristic")
    g.add_argument("--szz-commits", metavar="FILE", help="blame the commits listed in FILE "
                   "(one hash per line) instead of keyword-classified fixes")
    g.add_argument("--szz-keywords", metavar="WORDS", help="comma-separated subject words "
                   "that mark a fix (default: the built-in list fix, bug, crash, leak, "
                   "regression, overflow, race)")
    g.add_argument("--szz-candidates", choices=["top", "all"], default="top",
                   help="per fix keep the commit owning most blamed lines (default) or "
                   "every blamed commit")
    g.add_argument("--szz-check", type=arg(check_nonnegative_int, "--szz-check"), default=50, metavar="N",
                   help="also blame N fixes that do have a Fixes: link and report how often "
                   "the heuristic finds the introducer the developers named (default 50; 0: "
                   "skip)")
    p.add_argument("--jobs", type=arg(check_count, "--jobs"), default=2, metavar="N",
                   help="processes (default 2): git blame processes at once, and from 5,000 "
                   "defects the bootstrap band is drawn beside the quantile intervals (the "
                   "figures are the same with any N; 1: one process)")
    add_scope_arguments(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from procmetrics.analyse.lifetimes.defects import build_defects
    from procmetrics.analyse.lifetimes.analysis import analyse_lifetimes
    from procmetrics.report.command_outputs import write_lifetime_outputs

    from procmetrics.analyse.lifetimes.defects import REVIEW_KEYS

    # review trailers only (build_defects' reviewed_introducer is all they feed)
    tables, name = load_tables(args.store, args.repo, scope_request(args),
                               trailer_keys=REVIEW_KEYS)
    summary = tables.get("scope_summary")
    print_scope(summary)
    links = tables["fix_links"]
    cont = None
    if args.basis == "releases":
        ok = links[links["status"] == "resolved"]
        cont = containment(tables, list(pd.unique(pd.concat([ok["introducer_hash"],
                                                             ok["fix_hash"]]).dropna())))
    table = build_defects(links, basis=args.basis,
                          commits=tables.get("defect_commits", tables["commits"]),
                          commit_subsystems=tables["commit_subsystems"],
                          trailers=tables["trailers"], tag_containment=cont,
                          period_cuts=[change_date(args.change_date, tables)]
                          if args.change_date else None,
                          links_from=links_from(args.links_from, tables))
    res = analyse_lifetimes(table, by=args.by, horizon=args.horizon, n_boot=args.boot,
                            min_cohort=args.min_cohort, rng=analysis_rng(args.seed, "lifetimes"),
                            jobs=args.jobs)
    print(f"{name}: {res.n_defects} defects ({res.n_negative_excluded} with negative lifetime "
          f"excluded); basis {res.basis}, unit {res.unit}")
    print(f"  population: {table.population}")
    era = ("every introducer" if table.links_from is None
           else f"from {table.links_from:%Y-%m-%d}")
    print(f"  link era: {era}; rule: {table.link_era_rule}")
    print("  every defect and every left-out link, with the reason: "
          + ("defect_ledger.csv in --out" if not args.out else
             f"{Path(args.out) / 'defect_ledger.csv'}"))
    _print_analysis(res, args.horizon)
    heuristic = _heuristic(args, tables, name) if args.szz else None
    if args.out:
        opts = {k: v for k, v in vars(args).items() if k not in ("func", "store")}
        if summary is not None:
            opts["scope_summary"] = summary.to_dict()
        for path in write_lifetime_outputs(args.out, table, res, options=opts,
                                           heuristic=heuristic):
            print(f"  wrote {path}")
    return 0


def _print_analysis(res: Any, horizon: float | None, indent: str = "  ") -> None:
    from procmetrics.analyse.lifetimes.horizon import figure_label, figure_text
    from procmetrics.analyse.lifetimes.sensitivity import sensitive_figures

    ch = res.horizon_choice
    flagged = set(sensitive_figures(res.caveats))
    if ch is not None and ch.horizon is not None and len(res.headline):
        print(f"{indent}HEADLINE (conditional on lifetime <= H = {ch.horizon:g} {res.unit}; "
              f"{ch.rule})")
        for r in res.headline.itertuples():
            if r.figure == "probability" and r.t >= r.horizon:
                continue
            lab = figure_label(r, res.unit)
            flag = "  [link_era_sensitive]" if lab in flagged and r.group == "(all)" else ""
            print(f"{indent}  {r.group:<12} {lab:<40} {figure_text(r, res.unit)}{flag}")
    elif ch is not None:
        print(f"{indent}HEADLINE: none ({ch.rule})")
    tm = ("both ends (Efron-Petrosian NPMLE)" if res.truncation_model == "both ends"
          else "right, at the end of the history (Lynden-Bell)")
    print(f"{indent}secondary: unconditional quantiles (truncation modelled: {tm}; naive: "
          "none, biased short)")
    for row in res.summary[res.summary["quantile"] == 0.5].itertuples():
        print(f"{indent}  median {row.group:<12} {row.method:<17} {_qtext(row, res.unit)}")
    if len(res.sensitivity):
        print(f"{indent}link-era sensitivity (figures re-estimated with later starts):")
        for fig, g in res.sensitivity.groupby("figure", sort=False):
            cells = []
            for r in g.itertuples():
                v = ("beyond support" if not r.supported else
                     f"{r.value:.2f}" if fig.startswith("P(") else f"{r.value:,.0f}")
                cells.append(f"{r.start:%Y-%m}: {v}")
            print(f"{indent}  {fig:<44} " + "; ".join(cells))
    for c, label in ((res.comparison, ""), (res.stratified_comparison,
                                             f" (strata: {res.strata_by})")):
        if c is not None:
            print(f"{indent}{c.name}{label} at horizon {horizon:g}: chi2={c.statistic:.2f} "
                  f"df={c.df} p={c.p_value:.3g} n={c.n}")
    for cv in res.caveats:
        print(f"{indent}caveat [{cv.code}] {cv.message}")


def _qtext(row: Any, unit: str) -> str:
    """A summary row as text: the report table's cell (one formatter for both), then
    n and the range of lifetimes the estimate covers."""
    from procmetrics.report.lifetime_tables import quantile_cell

    cell = quantile_cell(pd.Series(row._asdict()))
    if not row.supported:
        return f"{cell} n={row.n}"
    return (f"{cell} n={row.n}; covers {row.range_low:,.0f}-{row.range_high:,.0f} {unit} "
            f"({row.level:.0%} interval)")


def _heuristic(args: argparse.Namespace, tables: dict[str, pd.DataFrame],
               name: str) -> dict[str, Any]:
    """Blame-based (SZZ) links for fixes without a Fixes: link, analysed apart."""
    from procmetrics.analyse.lifetimes.defects import build_defects
    from procmetrics.analyse.lifetimes.analysis import analyse_lifetimes
    from procmetrics.analyse.measures.metrics import DEFAULT_FIX_KEYWORDS
    from procmetrics.analyse.lifetimes.szz import (
        FAILURE_MODES, as_fix_links, sample_linked_fixes, select_unlinked_fixes,
        szz_candidates,
    )
    from procmetrics.mine.blame import blame_fixes

    commits, links = tables["commits"], tables["fix_links"]
    listed = None
    if args.szz_commits:
        try:
            listed = Path(args.szz_commits).read_text().split()
        except OSError as exc:
            raise ConfigError(f"cannot read the list: {exc.strerror or exc}",
                              path=str(args.szz_commits)) from exc
    keywords = (tuple(k.strip() for k in args.szz_keywords.split(",") if k.strip())
                if args.szz_keywords else DEFAULT_FIX_KEYWORDS)
    sel = select_unlinked_fixes(commits, links, keywords=keywords, hashes=listed)
    path = str(tables["repositories"]["path"].iloc[0])
    top = args.szz_candidates == "top"
    run_ = blame_fixes(path, sel.hashes, jobs=args.jobs)
    szz = szz_candidates(run_.rows, commits, repo=name, n_fixes=run_.n_fixes,
                         unblamable=len(run_.added_only), top_only=top)
    check = sample_linked_fixes(links, args.szz_check, np.random.default_rng(args.seed))
    agreement: dict[str, Any] = {}
    if check:
        crun = blame_fixes(path, check, jobs=args.jobs)
        agreement = szz_candidates(crun.rows, commits, repo=name, top_only=top,
                                   explicit_links=links, checked_fixes=check).agreement
    szz = type(szz)(**{**szz.__dict__, "agreement": agreement})
    table = build_defects(as_fix_links(szz, commits), basis="committer" if args.basis ==
                          "releases" else args.basis, commits=commits,
                          commit_subsystems=tables["commit_subsystems"],
                          trailers=tables["trailers"],
                          period_cuts=[change_date(args.change_date, tables)]
                          if args.change_date else None,
                          links_from=None,
                          link_source="blame-based (SZZ) candidate link")
    an = analyse_lifetimes(table, by=args.by, horizon=args.horizon, n_boot=args.boot,
                           rng=analysis_rng(args.seed, "lifetimes"))
    print(f"HEURISTIC: blame-based (SZZ) links for fixes without a Fixes: link "
          f"({szz.method})")
    print(f"  selection: {sel.rule}"
          + (f" ({', '.join(sel.keywords)})" if sel.keywords else "")
          + f": {len(sel.hashes)} commit(s) blamed "
          f"({sel.n_with_fixes_link} left out: they have a Fixes: link"
          + (f"; {sel.n_unknown} listed hash(es) unknown or merges" if listed is not None
             else "") + ")")
    n_skip = len(run_.skipped_merges) + len(run_.skipped_roots)
    print(f"  blame: {szz.n_fixes_with_candidates} fix(es) with a candidate, "
          f"{len(run_.added_only)} only add lines, {n_skip} merge/root, "
          f"{len(run_.failed)} failed; {szz.n_dropped_later_than_fix} candidate(s) "
          "dated after their fix dropped")
    if agreement:
        rec = agreement["recall"]
        print(f"  check on {len(check)} fixes that have a Fixes: link: the heuristic found "
              f"{agreement['n_found']} of {agreement['n_explicit']} named introducers"
              + (f" (recall {rec:.2f})" if rec is not None else ""))
    if args.basis == "releases":
        print("  (heuristic lifetimes use committer dates; --basis releases applies to the "
              "Fixes: links only)")
    print(f"  heuristic: {an.n_defects} defects (distinct candidate introducers; "
          f"{table.n_follow_up_fixes} later fix(es) blamed an introducer already counted)")
    print(f"  population: {table.population}")
    _print_analysis(an, args.horizon, indent="  heuristic ")
    print("  known failure modes of blame-based linking:")
    for fm in FAILURE_MODES:
        print(f"    - {fm}")
    return {"szz": szz, "table": table, "analysis": an,
            "selection": {**sel.to_dict(), "hashes": None, "n_selected": len(sel.hashes),
                          "n_checked": len(check)}}


def _num(x: Any) -> str:
    return "-" if x is None or (isinstance(x, float) and not np.isfinite(x)) else f"{x:,.0f}"
