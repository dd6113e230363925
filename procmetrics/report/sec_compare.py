"""Section: before/after comparison at the policy date."""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.analyse.claims import Undecidable
from procmetrics.report import flags as fl
from procmetrics.report import plots
from procmetrics.report.context import BuildContext
from procmetrics.report.model import Figure, Table
from procmetrics.report.sec_process import KINDS, SERIES

#: an odds ratio within this band counts as negligible (common practice: a shift of
#: a few percentage points around a mid-range share)
NEGLIGIBLE_OR = (0.9, 1 / 0.9)


def section_compare(ctx: BuildContext) -> None:
    from procmetrics.analyse.claim_kinds import share_shift
    from procmetrics.report.sec_claims import claim_context

    rep = ctx.report
    s = rep.add_section("before-after", "Before and after the process change")
    if ctx.policy_date is None:
        s.p("No policy date was given (--policy-date), so no before/after comparison is "
            "made.")
        return
    date = ctx.policy_date
    s.p(f"Each share is compared between commits before and from {date:%Y-%m-%d}. The "
        "comparison is a binomial regression on the per-period counts with one step at the "
        "policy date, so the interval reflects the variation between periods "
        "(quasi-binomial when overdispersed, Newey–West errors when autocorrelated), not "
        "only the number of commits. The effect is an odds ratio after/before with its "
        f"{ctx.options.level:.0%} interval. A step does not by itself show that the policy "
        "caused it: other changes at the same time, or a trend already under way, can "
        "produce one (see the series and their change points above).")
    cctx = claim_context(ctx)
    rows: list[dict[str, Any]] = []
    results = []
    for metric in SERIES:
        try:
            sh = share_shift(cctx, metric, date, level=ctx.options.level)
        except Undecidable as exc:
            s.note(f"{metric.replace('_', ' ')}: not compared ({exc}).")
            continue
        results.append(sh)
        rows.append({"metric": metric, "n_before": sh.n_before,
                     "share_before": sh.x_before / sh.n_before, "n_after": sh.n_after,
                     "share_after": sh.x_after / sh.n_after,
                     "odds_ratio": sh.odds_ratio.value, "low": sh.odds_ratio.low,
                     "high": sh.odds_ratio.high, "p_value": sh.p_value})
    if not rows:
        return
    table = pd.DataFrame(rows)
    tab = Table("before-after", f"Shares before and from {date:%Y-%m-%d}.",
                [("metric", "Series"), ("n_before", "Commits before"),
                 ("share_before", "Share before (%)"), ("n_after", "Commits after"),
                 ("share_after", "Share after (%)"), ("odds_ratio", "Odds ratio"),
                 ("low", f"{ctx.options.level:.0%} interval from"), ("high", "to"),
                 ("p_value", "p")], table,
                note=f"{len(rows)} comparisons, p-values not adjusted for multiplicity; "
                     "read the intervals. An odds ratio between "
                     f"{NEGLIGIBLE_OR[0]:.2f} and {NEGLIGIBLE_OR[1]:.2f} is treated as "
                     "negligible.")
    for sh in results:
        o = sh.odds_ratio
        negligible = (o.low is not None and o.high is not None
                      and NEGLIGIBLE_OR[0] <= o.low and o.high <= NEGLIGIBLE_OR[1])
        key = f"before-after-{sh.metric.replace('_', '-')}"
        fig = Figure(
            key, f"{SERIES[sh.metric].split(':')[0]} before and after {date:%Y-%m-%d}",
            f"{SERIES[sh.metric].split(':')[0]} per {ctx.options.period}, before and from "
            f"{date:%Y-%m-%d}; horizontal lines: share on each side; odds ratio "
            f"{o.value:.2f} ({o.level:.0%} interval {o.low:.2f} to {o.high:.2f})",
            n=sh.n_before + sh.n_after, method=f"step {o.method}",
            interval=f"{o.level:.0%} interval for the odds ratio; Wilson intervals per period",
            data=sh.rows.rename(columns={"x": "count", "n": "commits", "t": "first_date"}),
            kinds=KINDS[sh.metric],
            values={"metric": sh.metric, "odds_ratio": o.to_dict(), "p_value": sh.p_value,
                    "n_before": sh.n_before, "x_before": sh.x_before,
                    "n_after": sh.n_after, "x_after": sh.x_after,
                    "diagnostics": [d.to_dict() for d in sh.diagnostics]},
            png=plots.before_after_png(ctx, sh))
        ctx.add_figure(s, fig, result={"step model": list(sh.diagnostics) + list(sh.caveats)},
                       min_n=ctx.options.min_n, p_value=sh.p_value,
                       effect_negligible=negligible)
        tab.flags.extend(fl.retarget([f for f in fig.flags if f.code in
                                      ("negligible_effect", "absence_of_evidence")], tab.key))
    tab.flags = fl.dedupe(tab.flags + fl.rule_flags(tab.key, n=None, min_n=None,
                                                    n_tests=len(results), corrected=False))
    rep.add_table(s, tab)
