"""Claim kinds about defect lifetimes: the median, and shorter lifetimes after a date.

References
----------
Lynden-Bell (1971) (right-truncated lifetimes); Cox (1972) (hazard ratio);
Peto & Peto (1972) (log-rank); Kaplan & Meier (1958).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable
from procmetrics.claims.common import AFTER, BEFORE, SUBSYSTEM, window
from procmetrics.analyse.result import Estimate, caveat
from procmetrics.errors import InsufficientData

SPECS: dict[str, KindSpec] = {
    "median_lifetime_below": KindSpec(
        "half of the defects are fixed within the threshold",
        {"threshold_days": Param("days", True), "after": AFTER, "before": BEFORE,
         "subsystem": SUBSYSTEM},
        "median of the truncation-aware (Lynden-Bell) lifetime distribution, link era by "
        "the settled rule, percentile bootstrap interval (2,000 resamples); undecidable "
        "beyond the support (< 10 at risk) or when it moves with the link-era start"),
    "lifetimes_shorter_after": KindSpec(
        "defects introduced after the date are fixed sooner than those before",
        {"date": Param("date", True), "horizon_days": Param("days"), "subsystem": SUBSYSTEM},
        "Cox hazard ratio of fixing (after/before) within a common follow-up horizon"),
}


def _defects(ctx: ClaimContext, cuts: list[pd.Timestamp] | None = None):
    from procmetrics.analyse.lifetimes.defects import build_defects

    share = cl.unresolved_share(ctx.fix_links)
    if share is not None and share > ctx.unresolved_limit:
        raise Undecidable(f"{share:.0%} of fix references are unresolved or ambiguous, above "
                          f"the {ctx.unresolved_limit:.0%} limit: the defects seen may not "
                          "represent the defects fixed")
    return build_defects(ctx.fix_links, commits=ctx.commits,
                         commit_subsystems=ctx.commit_subsystems, trailers=ctx.trailers,
                         period_cuts=cuts)


#: a quantile is reported only where at least this many defects are at risk
MEDIAN_MIN_AT_RISK = 10
LEDGER_NOTE = ("the defects behind this figure, and every fix link left out with the reason, "
               "are listed in the defect ledger (report table 'defect-ledger'; "
               "defect_ledger.csv from 'procmetrics lifetimes --out')")


def eval_median_lifetime(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    """Truncation-aware median, decided only within the support and when it does not
    move with the start of the link era (settled rule; later starts re-estimated)."""
    from procmetrics.analyse.lifetimes.defects import build_defects, lifetimes_for_estimation
    from procmetrics.analyse.lifetimes.estimators import quantile_estimates
    from procmetrics.analyse.lifetimes.sensitivity import LB_MEDIAN, link_era_sensitivity

    p = claim.params
    after, before = window(ctx, p)
    share = cl.unresolved_share(ctx.fix_links)
    if share is not None and share > ctx.unresolved_limit:
        raise Undecidable(f"{share:.0%} of fix references are unresolved or ambiguous, above "
                          f"the {ctx.unresolved_limit:.0%} limit: the defects seen may not "
                          "represent the defects fixed")
    table = build_defects(ctx.fix_links, commits=ctx.commits,
                          commit_subsystems=ctx.commit_subsystems, trailers=ctx.trailers,
                          links_from="settled")
    d, n_neg = lifetimes_for_estimation(table.defects)
    if after is not None:
        d = d[d["intro_date"] >= after]
    if before is not None:
        d = d[d["intro_date"] < before]
    if p.get("subsystem"):
        d = d[d["subsystems"].str.split(";").apply(lambda s: p["subsystem"] in s)]
    if len(d) < ctx.min_n:
        raise Undecidable(f"only {len(d)} defects with a resolved fix link in the window "
                          f"(at least {ctx.min_n} needed)")
    rng = np.random.default_rng(ctx.seed)
    (q50,) = quantile_estimates(d["lifetime"].to_numpy(float), d["window"].to_numpy(float),
                                quantiles=(0.5,), level=claim.level, rng=rng,
                                min_at_risk=MEDIAN_MIN_AT_RISK)
    era = table.links_from
    extra = [f"link era from {era:%Y-%m-%d} ({table.link_era_rule})" if era is not None
             else f"link era: {table.link_era_rule}",
             "this is the median among defects found and fixed with a Fixes: link, "
             "corrected for right truncation (conditional on lifetime <= the longest "
             "observed); defects never found are not covered",
             f"support: {q50.at_risk} defects at risk at the median; the estimate covers "
             f"lifetimes of {q50.range_low:.0f} to {q50.range_high:.0f} days"
             if q50.range_low is not None and q50.range_high is not None else
             "support: none", LEDGER_NOTE]
    if n_neg:
        extra.append(f"{n_neg} defect(s) with a fix dated before the introducer were excluded")
    method = SPECS[claim.kind].method
    est = Estimate("median lifetime", q50.value, q50.low, q50.high, q50.level, q50.method,
                   q50.n, "days")
    if not q50.supported:
        return ClaimVerdict(claim, cl.UNDECIDABLE, (
            f"the median lies beyond what the data support (> {q50.support_limit:.0f} days: "
            f"{q50.at_risk} defects at risk there, fewer than {MEDIAN_MIN_AT_RISK})",
            *extra), method, n=q50.n, estimate=est)
    if q50.high_open:
        return ClaimVerdict(claim, cl.UNDECIDABLE, (
            f"the median is {q50.value:.0f} days but the upper end of its interval lies "
            f"beyond what the data support (> {q50.support_limit:.0f} days)", *extra),
            method, n=q50.n, estimate=est)
    starts = [x for x in (era, after) if x is not None]
    start = max(starts) if starts else d["intro_date"].min()
    _, sens = link_era_sensitivity(d, start, None, level=claim.level,
                                   min_at_risk=MEDIAN_MIN_AT_RISK, min_cohort=ctx.min_n,
                                   lb_median=q50, rng=np.random.default_rng(ctx.seed))
    moved = [c for c in sens if c.message.startswith(LB_MEDIAN)]
    if moved:
        return ClaimVerdict(claim, cl.UNDECIDABLE, (
            "the median moves with the start of the link era: " + moved[0].message, *extra),
            method, n=q50.n, estimate=est, caveats=tuple(moved))
    return cl.decide(claim, est, side="below", threshold=float(p["threshold_days"]),
                     what="median defect lifetime", method=method,
                     n=q50.n, fmt=lambda x: f"{x:.0f} days", extra=extra)


def eval_lifetimes_shorter(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    from procmetrics.analyse.lifetimes.cox import fit_cox
    from procmetrics.analyse.lifetimes.analysis import restrict_to_horizon

    p = claim.params
    date = cl.resolve_date(p["date"], ctx, "date")
    table = _defects(ctx)
    end = table.end_date
    if pd.isna(end) or date >= end:
        raise Undecidable(f"the history ends before {date:%Y-%m-%d}")
    horizon = float(p.get("horizon_days") or min(365.0, (end - date).days / 2))
    cohort = restrict_to_horizon(table.defects, horizon)
    d = cohort.defects
    if p.get("subsystem"):
        d = d[d["subsystems"].str.split(";").apply(lambda s: p["subsystem"] in s)]
    d = d.assign(after=(d["intro_date"] >= date).astype(float))
    n_b, n_a = int((d["after"] == 0).sum()), int((d["after"] == 1).sum())
    if min(n_a, n_b) < ctx.min_n:
        raise Undecidable(f"within a common follow-up of {horizon:.0f} days there are {n_b} "
                          f"defects introduced before and {n_a} after {date:%Y-%m-%d} "
                          f"(at least {ctx.min_n} each are needed)")
    try:
        res = fit_cox(d[["lifetime", "after"]].assign(event=True), "lifetime", "event",
                      level=claim.level, fallback=False)
    except InsufficientData as exc:
        raise Undecidable(str(exc)) from exc
    row = res.summary.set_index("term").loc["after"]
    cav = list(res.caveats)
    if not res.ph_holds:
        ordered = _ordered_after_below(d, claim, ctx)
        if ordered is not None:
            return ordered
        from procmetrics.analyse.lifetimes.comparisons import logrank

        lr = logrank(d["lifetime"], d["after"])
        cav.append(caveat("diagnostic_failed", "the hazards before and after are not "
                          "proportional (Schoenfeld test) and the two lifetime curves cross, "
                          "so whether lifetimes are shorter depends on the horizon; the "
                          f"log-rank test gives p = {lr.p_value:.3g} for any difference",
                          "fail"))
    est = Estimate("hazard ratio of fixing, after/before", float(row["hazard_ratio"]),
                   float(row["hr_low"]), float(row["hr_high"]), claim.level, res.method,
                   res.n)
    med = d.groupby("after")["lifetime"].median()
    extra = [f"common follow-up horizon {horizon:.0f} days: median lifetime "
             f"{med.get(0.0, float('nan')):.0f} days before, {med.get(1.0, float('nan')):.0f} "
             "after (defects fixed within the horizon); a hazard ratio above 1 means "
             "faster fixing after the date"]
    return cl.decide(claim, est, side="above", threshold=1.0, what="hazard ratio of fixing "
                     "(after/before)", method=SPECS[claim.kind].method, n=res.n,
                     test={"name": "Wald z (Cox)", "p_value": float(row["p"])},
                     diagnostics=res.diagnostics, caveats=cav, extra=extra)


def _ordered_after_below(d: pd.DataFrame, claim: Claim, ctx: ClaimContext
                         ) -> ClaimVerdict | None:
    """When hazards are not proportional: decide by the log-rank test if the 'after'
    Kaplan-Meier curve never lies above the 'before' curve by more than 0.05 within the
    horizon (stochastic ordering, read off the curves); else ``None``.

    References
    ----------
    Peto & Peto (1972) (log-rank); Kaplan & Meier (1958).
    """
    from procmetrics.analyse.lifetimes.estimators import kaplan_meier
    from procmetrics.analyse.lifetimes.comparisons import logrank

    a = kaplan_meier(d.loc[d["after"] == 1, "lifetime"].to_numpy(float), level=claim.level)
    b = kaplan_meier(d.loc[d["after"] == 0, "lifetime"].to_numpy(float), level=claim.level)
    grid = np.unique(d["lifetime"].to_numpy(float))
    sa = np.array([a.survival_at(t) for t in grid])
    sb = np.array([b.survival_at(t) for t in grid])
    if (sa > sb + 0.05).any() or not (sa < sb).any():
        return None
    lr = logrank(d["lifetime"], d["after"])
    from procmetrics.analyse.measures.intervals import median_difference_ci

    after_t = d.loc[d["after"] == 1, "lifetime"].to_numpy(float)
    before_t = d.loc[d["after"] == 0, "lifetime"].to_numpy(float)
    med_a, med_b = float(np.median(after_t)), float(np.median(before_t))
    diff, lo, hi, lev = median_difference_ci(before_t, after_t, claim.level)
    est = Estimate("median lifetime after minus before (within the horizon)", diff,
                   float(lo) if np.isfinite(lo) else None,
                   float(hi) if np.isfinite(hi) else None, claim.level,
                   "difference of sample medians; conservative interval from the two "
                   f"order-statistic intervals at level {lev:.4f} each", int(len(d)), "days")
    alpha = round(1 - claim.level, 10)
    shown = (f"the lifetime curve of defects introduced after the date lies below the "
             f"curve before it throughout the horizon (medians {med_b:.0f} days before, "
             f"{med_a:.0f} after); hazards are not proportional, so the log-rank test "
             f"decides, not a single hazard ratio")
    test = {"name": "log-rank", "p_value": float(lr.p_value)}
    method = "log-rank test within a common follow-up horizon (Kaplan-Meier curves ordered)"
    if lr.p_value < alpha:
        return ClaimVerdict(claim, cl.SUPPORTED, (f"log-rank p = {lr.p_value:.3g} < {alpha:g}"
                                                  f": {shown}",), method, n=int(len(d)),
                            estimate=est, test=test)
    return ClaimVerdict(claim, cl.NOT_SUPPORTED, (
        f"log-rank p = {lr.p_value:.3g} ≥ {alpha:g}: no evidence that lifetimes differ; "
        "this is not evidence that they do not",), method, n=int(len(d)), estimate=est,
        test=test)


EVALUATORS = {
    "median_lifetime_below": eval_median_lifetime,
    "lifetimes_shorter_after": eval_lifetimes_shorter,
}
