"""Claim kinds about defect lifetimes: the median, and shorter lifetimes after a date.

References
----------
Lynden-Bell (1971) (right-truncated lifetimes); Cox (1972) (hazard ratio);
Kaplan & Meier (1958); Royston & Parmar (2013) (restricted mean lifetime).
"""
from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable
from procmetrics.claims.common import AFTER, BEFORE, SUBSYSTEM, window
from procmetrics.analyse.result import Estimate
from procmetrics.errors import InsufficientData

SPECS: dict[str, KindSpec] = {
    "median_lifetime_below": KindSpec(
        "half of the defects are fixed within the threshold",
        {"threshold_days": Param("days", True), "after": AFTER, "before": BEFORE,
         "subsystem": SUBSYSTEM},
        "median of the truncation-aware (Lynden-Bell) lifetime distribution, link era by "
        "the settled rule, percentile bootstrap interval (2,000 resamples); undecidable "
        "beyond the support (< 10 at risk) or when it moves with the link-era start",
        "down: median < threshold",
        ("section:lifetimes", "table:lifetime-quantiles", "figure:lifetime-curves")),
    "lifetimes_shorter_after": KindSpec(
        "defects introduced after the date are fixed sooner than those before",
        {"date": Param("date", True), "horizon_days": Param("days"), "subsystem": SUBSYSTEM},
        "within a common follow-up horizon H (defects introduced >= H before the end, "
        "fixed within H): Cox hazard ratio of fixing after/before when proportional hazards "
        "hold (Schoenfeld test), else the difference in restricted mean lifetime up to H, "
        "before minus after", "shorter after: hazard ratio > 1, or restricted-mean "
        "difference > 0", ("section:lifetimes", "figure:lifetime-before-after")),
}


def defect_table(kind: str, ctx: ClaimContext, cuts: list[pd.Timestamp] | None = None):
    """The defect table a lifetime claim of ``kind`` is judged on.

    One call for the verdict and for the rows the report's evidence pack lists, so
    both count the same defects: the median claim uses the settled link era, the
    before/after comparison every resolved link (its horizon conditioning is applied
    by the evaluator). Both follow the context's clock (``date_basis``) and link-era
    start (``links_from``), which the robustness panel varies.
    """
    from procmetrics.analyse.lifetimes.defects import build_defects

    share = cl.unresolved_share(ctx.fix_links)
    if share is not None and share > ctx.unresolved_limit:
        raise Undecidable(f"{share:.0%} of fix references are unresolved or ambiguous, above "
                          f"the {ctx.unresolved_limit:.0%} limit: the defects seen may not "
                          "represent the defects fixed")
    def build(links_from: Any) -> Any:
        return build_defects(ctx.fix_links, basis=ctx.date_basis, commits=ctx.history,
                             commit_subsystems=ctx.commit_subsystems, trailers=ctx.trailers,
                             period_cuts=cuts, links_from=links_from)

    if kind != "median_lifetime_below":
        return build(ctx.links_from)
    # the median starts at the settled link era; a later start asked for (the robustness
    # panel's) moves it later, never earlier
    table = build("settled")
    later = ctx.links_from
    if isinstance(later, pd.Timestamp) and (table.links_from is None
                                            or later > table.links_from):
        table = build(later)
    return table


#: what the before/after lifetime comparison can and cannot say (in every verdict)
NO_ATTRIBUTION = ("this compares the defects introduced before the date with those introduced "
                  "from it and attributes nothing to the date itself: lifetimes that were "
                  "already getting shorter before the date give the same result")

#: a quantile is reported only where at least this many defects are at risk
MEDIAN_MIN_AT_RISK = 10
LEDGER_NOTE = ("the defects behind this figure, and every fix link left out with the reason, "
               "are listed in the defect ledger (report table 'defect-ledger'; "
               "defect_ledger.csv from 'procmetrics lifetimes --out')")


def eval_median_lifetime(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    """Truncation-aware median, decided only within the support and when it does not
    move with the start of the link era (settled rule; later starts re-estimated)."""
    from procmetrics.analyse.lifetimes.defects import lifetimes_for_estimation
    from procmetrics.analyse.lifetimes.estimators import quantile_estimates
    from procmetrics.analyse.lifetimes.sensitivity import LB_MEDIAN, link_era_sensitivity

    p = claim.params
    after, before = window(ctx, p)
    table = defect_table(claim.kind, ctx)
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
    # rng=None: resamples keyed by the data, so the claim and the report's quantile table
    # print one interval for the same defects
    (q50,) = quantile_estimates(d["lifetime"].to_numpy(float), d["window"].to_numpy(float),
                                quantiles=(0.5,), level=claim.level, rng=None,
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
    """Judge "defects introduced after the date are fixed sooner" (see :func:`judge_shorter`)."""
    p = claim.params
    date = cl.resolve_date(p["date"], ctx, "date")
    return judge_shorter(claim, defect_table(claim.kind, ctx), date, horizon=p.get("horizon_days"),
                         subsystem=p.get("subsystem"), min_n=ctx.min_n)


def horizon_cohort(table, date: pd.Timestamp, *, horizon: float | None = None,
                   subsystem: str | None = None, min_n: int = 20):
    """The defects a before/after lifetime claim compares: introduced at least H
    before the end and fixed within H (H = ``horizon`` or min(365, half the time from
    the date to the end)), with ``after`` = introduced on or after ``date``. Returns
    the rows, the cohort (its population text and exclusion counts) and H;
    :class:`Undecidable` with fewer than ``min_n`` on a side."""
    from procmetrics.analyse.lifetimes.analysis import restrict_to_horizon

    end = table.end_date
    if pd.isna(end) or date >= end:
        raise Undecidable(f"the history ends before {date:%Y-%m-%d}")
    horizon = float(horizon or min(365.0, (end - date).days / 2))
    cohort = restrict_to_horizon(table.defects, horizon)
    d = cohort.defects
    if subsystem:
        d = d[d["subsystems"].str.split(";").apply(lambda s: subsystem in s)]
    d = d.assign(after=(d["intro_date"] >= date).astype(float))
    n_b, n_a = int((d["after"] == 0).sum()), int((d["after"] == 1).sum())
    if min(n_a, n_b) < min_n:
        raise Undecidable(f"within a common follow-up of {horizon:.0f} days there are {n_b} "
                          f"defects introduced before and {n_a} after {date:%Y-%m-%d} "
                          f"(at least {min_n} each are needed)")
    return d, cohort, horizon


def judge_shorter(claim: Claim, table, date: pd.Timestamp, *, horizon: float | None = None,
                  subsystem: str | None = None, min_n: int = 20) -> ClaimVerdict:
    """Shorter lifetimes after ``date``, one-sided, on a common follow-up horizon H.

    Only defects introduced at least H before the end of the history and fixed
    within H are compared (lifetimes conditional on lifetime <= H: unbiased
    under right truncation, unlike censoring the longer ones at H). Defects
    are "after" when introduced on or after ``date``.

    * Proportional hazards hold (Schoenfeld test): the Cox hazard ratio of
      fixing after/before decides; supported when its whole interval lies
      above 1.
    * They do not: the difference in restricted mean lifetime up to H, before
      minus after (Kaplan-Meier, Greenwood-type variance) decides; supported
      when its whole interval lies above 0.

    Both are one-sided at alpha/2 in the claimed direction (module
    :mod:`procmetrics.claims.base`); the other measure is shown as evidence.

    References
    ----------
    Cox (1972); Grambsch & Therneau (1994); Royston & Parmar (2013);
    Kalbfleisch & Lawless (1989) (a common observation window under right
    truncation).
    """
    from procmetrics.analyse.lifetimes.cox import fit_cox
    from procmetrics.analyse.lifetimes.rmst import rmst_difference

    d, cohort, horizon = horizon_cohort(table, date, horizon=horizon, subsystem=subsystem,
                                        min_n=min_n)
    n_b, n_a = int((d["after"] == 0).sum()), int((d["after"] == 1).sum())
    before = d.loc[d["after"] == 0, "lifetime"].to_numpy(float)
    after = d.loc[d["after"] == 1, "lifetime"].to_numpy(float)
    rm = rmst_difference(before, after, horizon=horizon, level=claim.level)
    med_b, med_a = float(np.median(before)), float(np.median(after))
    extra = [f"compared: {cohort.population}; {n_b} defects introduced before "
             f"{date:%Y-%m-%d} and {n_a} from it (median {med_b:.0f} and {med_a:.0f} days); "
             f"{cohort.n_too_recent} introduced less than {horizon:.0f} days before the end "
             f"and {cohort.n_beyond_horizon} fixed later than that are not compared",
             NO_ATTRIBUTION]
    rm_text = (f"restricted mean lifetime up to {horizon:.0f} days, before minus after: "
               f"{rm.value:+.1f} days [{rm.low:+.1f}, {rm.high:+.1f}]")
    try:
        res = fit_cox(d[["lifetime", "after"]].assign(event=True), "lifetime", "event",
                      level=claim.level, fallback=False)
    except InsufficientData as exc:
        raise Undecidable(str(exc)) from exc
    row = res.summary.set_index("term").loc["after"]
    # the Cox fit's own caveats minus the proportional-hazards one: when PH fails the
    # measure below does not assume it, so that failure does not block the verdict
    cav = [c for c in res.caveats if not c.message.startswith("proportional hazards")]
    method = SPECS[claim.kind].method
    if res.ph_holds:
        est = Estimate("hazard ratio of fixing, after/before", float(row["hazard_ratio"]),
                       float(row["hr_low"]), float(row["hr_high"]), claim.level, res.method,
                       res.n)
        z = float(row["z"])
        test = {"name": "Wald z of the Cox coefficient, one-sided (faster fixing after)",
                "p_value": float(stats.norm.sf(z))}
        extra += ["proportional hazards hold (Schoenfeld test), so the Cox hazard ratio "
                  "decides; a hazard ratio above 1 means faster fixing after the date",
                  rm_text + " (evidence)"]
        return cl.decide(claim, est, side="above", threshold=1.0, what="hazard ratio of "
                         "fixing (after/before)", method=method + "; used: Cox", n=res.n,
                         test=test, diagnostics=res.diagnostics, caveats=cav, extra=extra)
    test = {"name": "Wald z of the restricted-mean difference, one-sided (shorter after)",
            "p_value": cl.wald_p_above(rm)}
    extra += [f"proportional hazards do not hold (Schoenfeld test), so no single hazard "
              f"ratio describes the change; the restricted mean lifetime up to {horizon:.0f} "
              "days decides (a difference above 0 means shorter lifetimes after the date)",
              f"Cox hazard ratio after/before {float(row['hazard_ratio']):.3g} "
              f"[{float(row['hr_low']):.3g}, {float(row['hr_high']):.3g}] (evidence only: "
              "its assumption fails)"]
    return cl.decide(claim, rm, side="above", threshold=0.0,
                     what=f"restricted mean lifetime up to {horizon:.0f} days, before minus "
                     "after", method=method + "; used: restricted mean", n=rm.n, test=test,
                     diagnostics=res.diagnostics, caveats=cav,
                     fmt=lambda x: f"{x:+.1f} days" if x else "0 days", extra=extra)


EVALUATORS = {
    "median_lifetime_below": eval_median_lifetime,
    "lifetimes_shorter_after": eval_lifetimes_shorter,
}
