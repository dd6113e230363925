"""``procmetrics carryover``: upstream fixes the tree lacks, and how fast fixes arrive."""
from __future__ import annotations

import argparse

from procmetrics.cli import add_progress_argument, add_store_argument


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("carryover", help="upstream fixes a tree lacks, and carry-over latency",
                       description="For a tree mined with --upstream: list the upstream "
                       "fixes (commits with a Fixes: line) whose target the tree carries but "
                       "which the tree does not carry, and estimate the time from an upstream "
                       "fix to its arrival (Kaplan-Meier; fixes not yet carried are censored "
                       "at the tree's tip).")
    add_store_argument(p)
    add_progress_argument(p)
    p.add_argument("--repo", help="the tree (default: the only one with an upstream reference)")
    p.add_argument("--upstream", metavar="NAME", help="upstream reference by store name")
    p.add_argument("--exclusions", metavar="FILE", help="TOML file of [[exclude]] tables "
                   "(upstream = commit id, reason = text): fixes the tree need not carry; "
                   "listed apart, never dropped")
    p.add_argument("--as-of", metavar="DATE", help="judge the tree at DATE instead of its "
                   "tip (only when the mined tip is still its state then, e.g. a shipped "
                   "release): upstream fixes up to DATE are due, gaps run to DATE")
    p.add_argument("--split-date", metavar="DATE", help="also compare the latency of fixes "
                   "landed upstream before and on/after DATE (one-sided log-rank: faster after)")
    p.add_argument("--csv", metavar="FILE", help="write the per-fix table (every status) as CSV")
    p.add_argument("--level", type=float, default=0.95, help="interval level (default 0.95)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from procmetrics.analyse.carryover import carryover_latency, missing_fixes
    from procmetrics.errors import InsufficientData
    from procmetrics.session import load_carryover

    res = load_carryover(args.store, args.repo, args.upstream, args.exclusions, args.as_of)
    table = res["table"]
    counts = table["status"].value_counts()
    print(f"{res['tree']} against upstream {res['upstream']} (tree tip "
          f"{res['tip_date']:%Y-%m-%d}, judged at {res['as_of']:%Y-%m-%d}); upstream fixes "
          "by status: "
          + ", ".join(f"{k} {int(counts.get(k, 0))}" for k in
                      ("missing", "excluded", "carried", "shared", "not-relevant", "not-due"))
          + (f", not-mirrored {int(counts.get('not-mirrored', 0))}"
             if res["path_map"] is not None else ""))
    print("paths: " + res["path_map_text"])
    amb = int(table["ambiguous"].sum())
    methods = table.loc[table["status"] == "carried", "method"].value_counts()
    print("carried by: " + (", ".join(f"{k} {v}" for k, v in methods.items()) or "none")
          + f"; ambiguous patch-id matches {amb} (counted apart)")
    lst = missing_fixes(table)
    print(f"\nmissing upstream fixes ({int((lst['status'] == 'missing').sum())}), oldest first:")
    for r in lst.itertuples(index=False):
        tag = "EXCLUDED " if r.status == "excluded" else ""
        print(f"  {tag}{r.fix_hash[:12]} {r.fix_date:%Y-%m-%d} gap {r.gap_days:.0f} d "
              f"[{r.subsystem or '-'}] {r.subject}  (fixes {r.target_hash[:12]}, target "
              f"matched by {r.target_method})"
              + (f"  reason: {r.exclusion_reason}" if r.exclusion_reason else ""))
    try:
        lat = carryover_latency(table, level=args.level)
    except InsufficientData as exc:
        print(f"\ncarry-over latency: not estimated ({exc})")
    else:
        m = lat.median
        print(f"\ncarry-over latency (n={lat.n}: {lat.n_carried} carried, {lat.n_censored} "
              f"censored at {res['as_of']:%Y-%m-%d}; {m.method}): median {m.value:.1f} d, {m.level:.0%} "
              f"interval {m.low:.1f} to {m.high:.1f} d")
        for e in lat.carried_within:
            print(f"  {e.name}: {e.value:.2f} [{e.low:.2f}, {e.high:.2f}]"
                  + (" (beyond the longest follow-up)" if e.extrapolated else ""))
        for c in lat.caveats:
            print(f"  caveat ({c.code}): {c.message}")
    if args.split_date:
        _print_periods(table, args.split_date, args.level)
    refs = res["tree_refs_upstream"]
    if len(refs):
        n_ok = int((refs["status"] == "resolved").sum())
        print(f"\nthe tree's unresolved Fixes: references: {n_ok} of {len(refs)} resolve in "
              f"{res['upstream']}")
    print("\nlimits: fixes without a Fixes: line are invisible here; a fix that does not "
          "apply to the tree's version may rightly be absent (list it with --exclusions).")
    if args.csv:
        table.to_csv(args.csv, index=False, date_format="%Y-%m-%dT%H:%M:%SZ",
                     float_format="%.3f")
    return 0


def _print_periods(table, value: str, level: float) -> None:
    import pandas as pd

    from procmetrics.analyse.carryover.latency import compare_periods
    from procmetrics.errors import ConfigError, InsufficientData

    try:
        when = pd.Timestamp(value)
    except ValueError as exc:
        raise ConfigError(f"--split-date: not a date: {value!r}") from exc
    when = when.tz_localize("UTC") if when.tzinfo is None else when.tz_convert("UTC")
    try:
        c = compare_periods(table, when, level=level)
    except InsufficientData as exc:
        print(f"\nbefore/after {when:%Y-%m-%d}: not compared ({exc})")
        return
    for name, r in (("before", c.before), ("after", c.after)):
        m = r.median
        print(f"  {name} {when:%Y-%m-%d}: n={r.n} ({r.n_carried} carried), median {m.value:.1f} d "
              f"[{m.low:.1f}, {m.high:.1f}]")
    print(f"  {c.method}: z = {c.z:.2f}, p = {c.p_faster_after:.3g}")
