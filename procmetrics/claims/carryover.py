"""Claim kinds about carrying upstream fixes over into a tree (vendor tree, mirror).

All need a tree mined with ``--upstream`` (``ClaimContext.carryover``); without
one they are undecidable. The table is built by
:func:`procmetrics.claims.carryover_source.carryover_from_engine` with the
exclusions file given to ``check`` or ``report`` (``--exclusions``), the same
computation as the ``carryover`` command: an excluded fix is not counted as
missing, and every excluded fix is named in the verdict with its reason.

References
----------
Kaplan & Meier (1958), Brookmeyer & Crowley (1982): see
:mod:`procmetrics.analyse.carryover.latency`.
"""
from __future__ import annotations

import numpy as np

from procmetrics.analyse.result import Estimate
from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable

DAYS = Param("days", True, help="a number of days")
LIMITS = ("upstream fixes without a Fixes: line are invisible here; a backport whose "
          "content was changed is found only by a backport line, else it counts as missing")
SPECS: dict[str, KindSpec] = {
    "no_missing_upstream_fix_older_than": KindSpec(
        "no upstream fix to code the tree carries has been missing from it for more than N days",
        {"days": DAYS},
        "count of missing upstream fixes with a gap above N days at the tree's tip (the whole "
        "population of fixes with a Fixes: line is observed: a census, not a sample)",
        "down: count = 0", ("table:carryover-missing",)),
    "half_carried_within": KindSpec(
        "half of the upstream fixes to code the tree carries arrive in it within N days",
        {"days": DAYS},
        "Kaplan-Meier share carried over within N days (fixes not yet carried censored at "
        "the tip), Greenwood log(-log) interval", "up: share > 0.5",
        ("table:carryover-latency",)),
}


def _table(ctx: ClaimContext):
    if ctx.carryover is None:
        raise Undecidable("no upstream reference is mined for this tree: run 'procmetrics "
                          "mine TREE --upstream UPSTREAM' first")
    return ctx.carryover


def eval_no_missing(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    t = _table(ctx)
    days = float(claim.params["days"])
    concern = t[t["status"].isin(["carried", "missing", "excluded"])]
    old = concern[(concern["status"] == "missing") & (concern["gap_days"] > days)]
    excl = concern[(concern["status"] == "excluded") & (concern["gap_days"] > days)]
    k = len(old)
    n = len(concern)
    if n == 0:
        raise Undecidable("no upstream fix with a Fixes: line concerns code the tree carries: "
                          "the claim would be vacuous")
    est = Estimate(f"missing upstream fixes older than {days:g} days", float(k), float(k),
                   float(k), claim.level, "count (census)", n, "fixes")
    extra = [LIMITS]
    if k:
        extra.append("oldest missing: " + ", ".join(
            f"{h[:12]} ({g:.0f} d)" for h, g in
            old.sort_values("gap_days", ascending=False)[["fix_hash", "gap_days"]]
            .head(5).itertuples(index=False)))
    if len(excl):
        extra.append(f"{len(excl)} upstream fix(es) older than {days:g} days are absent but "
                     "excluded by the exclusions file, so not counted: " + "; ".join(
                         f"{h[:12]} ({g:.0f} d): {r}" for h, g, r in
                         excl[["fix_hash", "gap_days", "exclusion_reason"]]
                         .itertuples(index=False)))
    return cl.decide(claim, est, side="below", threshold=0.5, what="number of missing "
                     f"upstream fixes older than {days:g} days", method=SPECS[claim.kind].method,
                     n=n, fmt=lambda x: f"{x:.0f}" if x != 0.5 else "0.5", extra=extra)


def judge_half_within(claim: Claim, durations: np.ndarray, carried: np.ndarray,
                      min_n: int) -> ClaimVerdict:
    """The decision on durations (days) and arrival flags: pure, for the simulations."""
    from procmetrics.analyse.carryover.latency import km_curve

    days = float(claim.params["days"])
    n = len(durations)
    if n < min_n:
        raise Undecidable(f"only {n} upstream fixes concern the tree (at least {min_n} needed)")
    if days > float(np.max(durations)):
        raise Undecidable(f"{days:g} days is beyond the longest follow-up "
                          f"({float(np.max(durations)):.0f} days): the share is not identified")
    curve = km_curve(durations, carried, level=claim.level)
    row = curve[curve["time_days"] <= days].iloc[-1]
    est = Estimate(f"share carried over within {days:g} days", 1 - float(row["survival"]),
                   1 - float(row["high"]), 1 - float(row["low"]), claim.level,
                   SPECS["half_carried_within"].method, n, "share")
    return cl.decide(claim, est, side="above", threshold=0.5,
                     what=f"share of upstream fixes carried over within {days:g} days",
                     method=SPECS["half_carried_within"].method, n=n, extra=[LIMITS])


def eval_half_within(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    from procmetrics.analyse.carryover.latency import survival_data

    dur, ev, _ = survival_data(_table(ctx))
    return judge_half_within(claim, dur, ev, ctx.min_n)


EVALUATORS = {"no_missing_upstream_fix_older_than": eval_no_missing,
              "half_carried_within": eval_half_within}
