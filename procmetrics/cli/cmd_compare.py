"""``procmetrics compare``: before/after a policy date (ITS and distributions)."""
from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from procmetrics.cli import _series_common as common
from procmetrics.validate import arg, check_count
from procmetrics.resampling import N_BOOT, N_PERMUTATIONS

if TYPE_CHECKING:
    import pandas as pd


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("compare", help="before/after a policy date: interrupted time series "
                       "and distribution comparisons",
                       description="Segmented regression (level and slope change, placebo "
                       "dates, control series), per-subsystem tests with BH/BY adjustment, "
                       "per-commit distributions and shares before vs after, and where "
                       "detected change points lie relative to the date.")
    common.add_series_arguments(p)
    p.add_argument("--at", required=True, metavar="DATE|REV",
                   help="policy date (YYYY-MM-DD, UTC) or a commit (its committer date)")
    p.add_argument("--control", metavar="SUBSYSTEM", help="control subsystem (not targeted)")
    p.add_argument("--resamples", type=arg(check_count, "--resamples"), default=N_PERMUTATIONS,
                   help="permutations (Anderson-Darling)")
    p.add_argument("--boot", type=arg(check_count, "--boot"), default=N_BOOT,
                   help=f"bootstrap replicates (default {N_BOOT}, as in the report)")
    p.set_defaults(func=run)


def _require_both_sides(commits: pd.DataFrame, at: pd.Timestamp, column: str,
                        given: str) -> None:
    """A date with no commit on one side has nothing to compare: every test would be
    skipped, and a run that tested nothing must not end as a success."""
    import pandas as pd

    from procmetrics.errors import InsufficientData

    dates = pd.to_datetime(commits[column], utc=True).dropna()
    before, after = int((dates < at).sum()), int((dates >= at).sum())
    if before and after:
        return
    if not len(dates):
        raise InsufficientData("no commits to compare (the store or the scope is empty)")
    side, edge = (("before", "first") if not before else ("after", "last"))
    when = (dates.min() if not before else dates.max()).strftime("%Y-%m-%d")
    raise InsufficientData(f"--at {given}: no commits {side} {at:%Y-%m-%d} (the {edge} "
                           f"commit is from {when}); there is nothing to compare")


def run(args: argparse.Namespace) -> int:
    from procmetrics.analyse.change.policy import DEFAULT_METRICS, compare_policy, resolve_date

    tables, name = common.load(args)
    whole = tables.get("whole_tree", tables)     # a commit outside a scope still names a date
    at = resolve_date(args.at, whole["commits"], whole["tags"])
    cfg = common.metric_config(args, tables)
    _require_both_sides(tables["commits"], at, cfg.date_column, args.at)
    print(f"{name}: before/after {at:%Y-%m-%d %H:%M} UTC, per {args.period}")
    common.print_data_quality(tables, args.metric or DEFAULT_METRICS)
    res = compare_policy(tables["commits"], tables["trailers"], at=at, tags=tables["tags"],
                         commit_subsystems=tables["commit_subsystems"] if cfg.subsystems
                         or args.control else None, config=cfg,
                         metrics=tuple(args.metric or DEFAULT_METRICS),
                         control_subsystem=args.control, n_resamples=args.resamples,
                         n_boot=args.boot)
    f = common.fmt
    ci = common.ci
    for r in res.its:
        lv, sl = r.level_change, r.slope_change
        print(f"\nITS {r.metric}: {r.n_before} periods before, {r.n_after} after; {r.model}; "
              f"{r.cov_type}\n  level change {ci(lv)} "
              f"{lv.unit}; slope change {ci(sl)} {sl.unit}"
              f"\n  placebo dates: {len(r.placebo)}, share with |effect| >= observed: "
              f"{f(r.placebo_p_level)}")
        if r.control_level_change is not None:
            c = r.control_level_change
            print(f"  control {r.control_subsystem}: level change {f(c.value)} "
                  f"[{f(c.low)}, {f(c.high)}]")
        common.print_caveats(r.caveats, "  ")
    for d in res.distributions:
        h, cd = d.hodges_lehmann, d.cliffs_delta
        tests = ", ".join(f"{t.name} p={f(t.p_value)}" for t in d.tests)
        print(f"\n{d.quantity}: n={d.n_a} before, n={d.n_b} after; median {ci(d.median_a)}"
              f" -> {ci(d.median_b)}; HL shift {ci(h)}; "
              f"Cliff's delta {ci(cd)} ({d.magnitude})"
              f"\n  {tests}")
        common.print_caveats(d.caveats, "  ")
    for p in res.proportions:
        df = p.difference
        tests = ", ".join(f"{t.name} p={f(t.p_value)}" for t in p.tests)
        print(f"\n{p.quantity}: {f(p.p_a.value)} (n={p.p_a.n}) -> {f(p.p_b.value)} "
              f"(n={p.p_b.n}); difference {ci(df)} "
              f"(Newcombe); {tests}")
        common.print_caveats(p.caveats, "  ")
    if len(res.subsystems):
        print(f"\nper subsystem (family of {res.multiplicity.family_size}; BH and BY):")
        for r in res.subsystems.itertuples():
            print(f"  {r.subsystem:<16} {r.metric:<20} level {f(r.level_change)} "
                  f"p={f(r.p_value)} BH={f(r.p_bh)} BY={f(r.p_by)}")
    for metric, rel in res.change_points:
        print(f"\nchange points in {metric}: {rel.status}"
              + (f" (nearest {rel.nearest_period}, {rel.distance_periods:+d} periods)"
                 if rel.nearest_period else ""))
    for s in res.skipped:
        print(f"skipped: {s}")
    print("\nall caveats:")
    common.print_caveats(res.caveats)
    out = common.out_dir(args)
    if out is not None:
        _write(out, res)
    return 0


def _write(out, res) -> None:
    import json

    from procmetrics.plot.distributions import plot_ecdf
    from procmetrics.plot.series import plot_its, save_figure

    (out / "compare.json").write_text(json.dumps(res.to_dict(), indent=1, default=str) + "\n")
    res.subsystems.to_csv(out / "compare_subsystems.csv", index=False)
    for r in res.its:
        save_figure(plot_its(r), out / f"its_{r.metric}")
    for i, (quantity, part) in enumerate(res.samples.groupby("quantity", sort=False)):
        groups = {side: part.loc[part["side"] == side, "value"] for side in ("before", "after")}
        save_figure(plot_ecdf(groups, quantity=quantity, log_x=True), out / f"ecdf_{i}")
