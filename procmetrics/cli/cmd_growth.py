"""``procmetrics growth``: trend tests and (if earned) reliability-growth models of fix times."""
from __future__ import annotations

import argparse

from procmetrics.cli import (add_progress_argument, add_scope_arguments, add_store_argument,
                             print_scope, scope_request)
from procmetrics.resampling import N_BOOT, SEED, analysis_rng
from procmetrics.session import containment, links_from, load_tables
from procmetrics.validate import arg, check_count, check_nonnegative, check_positive, check_seed


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("growth", help="trend tests and reliability-growth models of fixes",
                       description="Laplace and MIL-HDBK-189 trend tests on fix times; "
                       "Goel-Okumoto and power-law NHPP models only where a trend test shows "
                       "a falling fix rate, with fit checks and guarded predictions.")
    add_store_argument(p)
    add_progress_argument(p)
    p.add_argument("--repo", help="repository name in the store (needed when it holds several)")
    p.add_argument("--subsystem", metavar="NAME", help="only defects introduced in this subsystem")
    p.add_argument("--after-tag", metavar="TAG", help="only defects shipped in release TAG, "
                   "fixed after the tag (time counted from the tag)")
    p.add_argument("--links-from", metavar="DATE|settled|first|all", default="settled",
                   help="start of observation: 'settled' (default) = the month from which "
                   "Fixes: linking has settled (as lifetimes), 'first' = the first linked "
                   "fix (it starts the clock and is not counted), a DATE, tag or commit, or "
                   "'all' = the first commit of the history")
    p.add_argument("--batch-hours", type=arg(check_nonnegative, "--batch-hours"), default=0.0, metavar="H",
                   help="count fixing commits within H hours of each other as one fix event "
                   "(patch series applied together; default 0: every commit)")
    p.add_argument("--require", choices=["own", "both", "either"], default="own",
                   help="trend evidence needed before a model is fitted (default: each "
                   "model's own test)")
    p.add_argument("--ahead", type=arg(check_positive, "--ahead"), default=90.0, metavar="DAYS",
                   help="prediction window in days (default 90)")
    p.add_argument("--boot", type=arg(check_count, "--boot"), default=N_BOOT, metavar="B",
                   help=f"bootstrap refits (default {N_BOOT}, as in the report)")
    p.add_argument("--seed", type=arg(check_seed, "--seed"), default=SEED,
                   help="random seed (bootstrap; default the report's)")
    p.add_argument("--out", metavar="DIR", help="write JSON, CSV and figures here")
    add_scope_arguments(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from procmetrics.analyse.growth.analysis import FIX_EVENTS_DEFINITION, analyse_growth
    from procmetrics.claims.growth import fix_event_times

    # no trailers; subsystems only for --subsystem (fix events do not depend on them)
    tables, name = load_tables(args.store, args.repo, scope_request(args),
                               names=("fix_links", "commits", "tags")
                               + (("commit_subsystems",) if args.subsystem else ()))
    if args.subsystem:
        from procmetrics.cli._series_common import known_subsystems

        known_subsystems(tables, [args.subsystem], "--subsystem")
    summary = tables.get("scope_summary")
    print_scope(summary)
    cont = None
    if args.after_tag:
        ok = tables["fix_links"]
        ok = ok[ok["status"] == "resolved"]
        cont = containment(tables, list(ok["introducer_hash"].dropna().unique()),
                           [args.after_tag])
    # the same selection as the report's growth section and the fix_rate_declining claim
    ft = fix_event_times(tables["fix_links"], tables.get("defect_commits", tables["commits"]),
                         links_from=links_from(args.links_from, tables),
                         commit_subsystems=tables.get("commit_subsystems"),
                         subsystem=args.subsystem, after_tag=args.after_tag,
                         tags=tables["tags"], tag_containment=cont,
                         batch_hours=args.batch_hours)
    res = analyse_growth(ft, require=args.require, ahead=args.ahead, n_boot=args.boot,
                         rng=analysis_rng(args.seed, "growth"))
    print(f"{name}: {res.n} fix events ({res.scope}), {res.origin:%Y-%m-%d} .. "
          f"{res.end_date:%Y-%m-%d}")
    print(f"  counted: {FIX_EVENTS_DEFINITION}")
    if res.trend is not None:
        for t in (res.trend.laplace, res.trend.power_law):
            print(f"  trend {t.name:<10} statistic={t.statistic:.3f} p_growth={t.p_growth:.3g} "
                  f"-> {t.direction}")
    for m in res.models:
        if not m.fitted:
            print(f"  {m.model}: refused ({m.refused_reason})")
            continue
        ps = ", ".join(f"{p.name}={p.value:.4g} [{_n(p.low, 'not bounded')}, {_n(p.high)}]"
                       for p in m.fit.params)
        print(f"  {m.model}: {ps}")
        for pr in m.predictions:
            if pr.estimate is None:
                print(f"    {pr.name}: refused ({pr.refused_reason})")
            else:
                e = pr.estimate
                print(f"    {pr.name}: {e.value:.3g} [{_n(e.low)}, {_n(e.high)}] (extrapolated)")
    for cv in res.caveats:
        print(f"  caveat [{cv.code}] {cv.message}")
    if args.out:
        from procmetrics.report.command_outputs import write_growth_outputs

        opts = {k: v for k, v in vars(args).items() if k not in ("func", "store")}
        if summary is not None:
            opts["scope_summary"] = summary.to_dict()
        for path in write_growth_outputs(args.out, res, options=opts):
            print(f"  wrote {path}")
    return 0


def _n(x: float | None, missing: str = "unbounded") -> str:
    return missing if x is None else f"{x:.4g}"
