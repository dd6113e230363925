"""Claim kinds about shares and rates: higher/lower after a date (descriptive), levels in a
window, trends. Claims about a change *at* a date are in :mod:`procmetrics.claims.at_date`.

Every kind names the method of the analysis layer it uses; the decision rule
is :func:`procmetrics.claims.base.decide` (interval entirely on the claimed
side). Share metrics are the proportion metrics of
:mod:`procmetrics.analyse.measures.metrics` (``review_coverage``, ``fix_ratio``, ...).

References
----------
McCullagh & Nelder (1989) (binomial GLM, quasi-binomial scale); Newey & West
(1987) (HAC errors); Lynden-Bell (1971) (right-truncated lifetimes); Cox (1972)
(hazard ratio); Crow (1974), MIL-HDBK-189C (power-law NHPP); Cox & Lewis
(1966) (Laplace test); Littlewood & Strigini (1993) (limits of evidence for
residual-defect claims).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable
from procmetrics.claims.common import (  # noqa: F401 - SHARE_METRICS re-exported
    AFTER, BEFORE, GLM_METHOD, METRIC, SHARE_METRICS, SUBSYSTEM, adoption_caveat, fit_share_glm,
    per_period, pct, share_flags, subsystem_commits, window,
)
from procmetrics.analyse.result import Estimate
from procmetrics.errors import InsufficientData

STEP_METHOD = ("odds ratio after/before from a " + GLM_METHOD + " with one step at the date "
               "and no time trend (descriptive: attributes nothing to the date)")
NO_ATTRIBUTION = ("this compares the share after the date with the share before it and "
                  "attributes nothing to the date: a trend already under way before the date "
                  "gives the same result (for a change at the date use rose_after / fell_after)")
_STEP_PARAMS = {"metric": METRIC, "date": Param("date", True), "subsystem": SUBSYSTEM}
_TRENDS = ("section:process-series", "table:trends")

SPECS: dict[str, KindSpec] = {
    "higher_after_than_before": KindSpec(
        "the share is higher after the date than before (descriptive; nothing is attributed "
        "to the date)", _STEP_PARAMS, STEP_METHOD, "up: odds ratio after/before > 1",
        ("section:before-after", "table:before-after-shares")),
    "lower_after_than_before": KindSpec(
        "the share is lower after the date than before (descriptive; nothing is attributed "
        "to the date)", _STEP_PARAMS, STEP_METHOD, "down: odds ratio after/before < 1",
        ("section:before-after", "table:before-after-shares")),
    "at_least": KindSpec("the share in the window is at least the threshold",
                         {"metric": METRIC, "threshold": Param("share", True),
                          "after": AFTER, "before": BEFORE, "subsystem": SUBSYSTEM},
                         "pooled share from an intercept-only " + GLM_METHOD,
                         "up: share > threshold", ("section:process-series",)),
    "at_most": KindSpec("the share in the window is at most the threshold",
                        {"metric": METRIC, "threshold": Param("share", True),
                         "after": AFTER, "before": BEFORE, "subsystem": SUBSYSTEM},
                        "pooled share from an intercept-only " + GLM_METHOD,
                        "down: share < threshold", ("section:process-series",)),
    "declining": KindSpec("the share falls over time in the window",
                          {"metric": METRIC, "after": AFTER, "before": BEFORE,
                           "subsystem": SUBSYSTEM}, "time trend (procmetrics.analyse.change.trend)",
                          "down: odds ratio per year < 1", _TRENDS),
    "rising": KindSpec("the share rises over time in the window",
                       {"metric": METRIC, "after": AFTER, "before": BEFORE,
                        "subsystem": SUBSYSTEM}, "time trend (procmetrics.analyse.change.trend)",
                       "up: odds ratio per year > 1", _TRENDS),
    "fix_ratio_declining": KindSpec(
        "the share of commits that fix an earlier commit falls over time",
        {"after": AFTER, "before": BEFORE, "subsystem": SUBSYSTEM},
        "time trend (procmetrics.analyse.change.trend)", "down: odds ratio per year < 1",
        _TRENDS),
}


# --------------------------------------------------------------- evaluators
@dataclass(frozen=True)
class ShareShift:
    """A share before and after a date: counts, the step model and its odds ratio.

    ``rows`` has one row per (period, side) with columns ``period``, ``after``,
    ``x`` (commits counted), ``n`` (commits) and ``t`` (first commit date).
    """

    metric: str
    date: pd.Timestamp
    n_before: int
    x_before: int
    n_after: int
    x_after: int
    odds_ratio: Estimate
    p_value: float
    rows: pd.DataFrame
    fit: Any

    @property
    def diagnostics(self) -> tuple:
        return self.fit.diagnostics

    @property
    def caveats(self) -> tuple:
        return self.fit.caveats


def share_shift(ctx: ClaimContext, metric: str, date: pd.Timestamp, *,
                subsystem: str | None = None, level: float = 0.95) -> ShareShift:
    """Step model of a share at ``date``: logit(share) = a + b * after, per-period counts.

    Raises :class:`Undecidable` when a side has fewer than ``ctx.min_n`` commits
    or fewer than two periods.

    References
    ----------
    McCullagh & Nelder (1989), ch. 4 (binomial GLM; quasi-likelihood scale).
    """
    f = share_flags(ctx, metric, subsystem)
    before, after = f[f["date"] < date], f[f["date"] >= date]
    for side, part in (("before", before), ("after", after)):
        if len(part) < ctx.min_n:
            raise Undecidable(f"only {len(part)} commits {side} {date:%Y-%m-%d} "
                              f"(at least {ctx.min_n} are needed)")
    rows = per_period(f, ctx, date)
    if rows["after"].sum() < 2 or (~rows["after"]).sum() < 2:
        raise Undecidable(f"fewer than two {ctx.period}s on one side of {date:%Y-%m-%d}")
    X = np.column_stack([np.ones(len(rows)), rows["after"].astype(float)])
    fit = fit_share_glm(rows["x"].to_numpy(float), X, rows["n"].to_numpy(float),
               ["const", "after"], level)
    r = fit.params.set_index("term").loc["after"]
    est = Estimate("odds ratio after/before", float(np.exp(r["estimate"])),
                   float(np.exp(r["ci_low"])), float(np.exp(r["ci_high"])), level,
                   f"{fit.model}; {fit.cov_type} SE", int(len(f)))
    return ShareShift(metric, date, int(len(before)), int(before["hit"].sum()),
                      int(len(after)), int(after["hit"].sum()), est, float(r["p_value"]),
                      rows, fit)


def eval_shift(claim: Claim, ctx: ClaimContext, direction: str) -> ClaimVerdict:
    p = claim.params
    metric = p.get("metric", "review_coverage")
    date = cl.resolve_date(p["date"], ctx, "date")
    sh = share_shift(ctx, metric, date, subsystem=p.get("subsystem"), level=claim.level)
    method = SPECS[claim.kind].method
    n = sh.n_before + sh.n_after
    extra = [f"{metric.replace('_', ' ')}: {pct(sh.x_before / sh.n_before)} of "
             f"{sh.n_before:,} commits before {date:%Y-%m-%d}, "
             f"{pct(sh.x_after / sh.n_after)} of {sh.n_after:,} after"]
    cav = list(sh.caveats) + adoption_caveat(ctx, metric)
    up = direction == "up"
    one_p = sh.p_value / 2 if (sh.odds_ratio.value > 1) == up else 1 - sh.p_value / 2
    return cl.decide(claim, sh.odds_ratio, side="above" if up else "below",
                     threshold=1.0, what="odds ratio after/before", method=method, n=n,
                     test={"name": "Wald z of the after/before step, one-sided in the claimed "
                                   "direction", "p_value": float(one_p)},
                     diagnostics=sh.diagnostics, caveats=cav, extra=extra + [NO_ATTRIBUTION])


def eval_level(claim: Claim, ctx: ClaimContext, side: str) -> ClaimVerdict:
    p = claim.params
    metric = p["metric"]
    after, before = window(ctx, p)
    f = share_flags(ctx, metric, p.get("subsystem"))
    if after is not None:
        f = f[f["date"] >= after]
    if before is not None:
        f = f[f["date"] < before]
    if len(f) < ctx.min_n:
        raise Undecidable(f"only {len(f)} commits in the window (at least {ctx.min_n} needed)")
    rows = per_period(f, ctx)
    fit = fit_share_glm(rows["x"].to_numpy(float), np.ones((len(rows), 1)), rows["n"].to_numpy(float),
               ["const"], claim.level)
    r = fit.params.set_index("term").loc["const"]
    inv = lambda e: float(1 / (1 + np.exp(-e)))  # noqa: E731
    est = Estimate(f"share ({metric})", inv(r["estimate"]), inv(r["ci_low"]),
                   inv(r["ci_high"]), claim.level, f"{fit.model}; {fit.cov_type} SE",
                   int(len(f)))
    cav = list(fit.caveats) + adoption_caveat(ctx, metric)
    return cl.decide(claim, est, side=side, threshold=float(p["threshold"]),
                     what=f"share of {metric.replace('_', ' ')}", method=SPECS[claim.kind].method,
                     n=int(len(f)), diagnostics=fit.diagnostics, caveats=cav, fmt=pct,
                     extra=[f"{int(rows['x'].sum()):,} of {len(f):,} commits over "
                            f"{len(rows)} {ctx.period}s"])


def eval_trend(claim: Claim, ctx: ClaimContext, side: str) -> ClaimVerdict:
    from procmetrics.analyse.measures.metrics import ALL, MetricConfig, compute_period_metrics
    from procmetrics.analyse.change.trend import fit_trend

    p = claim.params
    metric = p.get("metric", "fix_ratio")
    after, before = window(ctx, p)
    sub = p.get("subsystem")
    c = subsystem_commits(ctx, sub)
    if after is not None:
        c = c[c["committer_date"] >= after]
    if before is not None:
        c = c[c["committer_date"] < before]
    if len(c) < ctx.min_n:
        raise Undecidable(f"only {len(c)} commits in the window (at least {ctx.min_n} needed)")
    pm = compute_period_metrics(c, ctx.trailers, tags=ctx.tags,
                                config=MetricConfig(period=ctx.period, metrics=(metric,)))
    try:
        tr = fit_trend(pm.table, metric, ALL, alpha=round(1 - claim.level, 10))
    except InsufficientData as exc:
        raise Undecidable(f"no trend can be fitted: {exc}") from exc
    cav = list(tr.caveats) + adoption_caveat(ctx, metric)
    est = tr.ratio_per_year or tr.slope
    what = ("odds ratio per year" if tr.ratio_per_year is not None else "slope per year")
    thr = 1.0 if tr.ratio_per_year is not None else 0.0
    return cl.decide(claim, est, side=side, threshold=thr, what=f"{what} of "
                     f"{metric.replace('_', ' ')}", method=f"{tr.model} over {tr.n_periods} "
                     f"{ctx.period}s", n=tr.n, diagnostics=tr.diagnostics, caveats=cav)


EVALUATORS = {
    "higher_after_than_before": lambda c, x: eval_shift(c, x, "up"),
    "lower_after_than_before": lambda c, x: eval_shift(c, x, "down"),
    "at_least": lambda c, x: eval_level(c, x, "above"),
    "at_most": lambda c, x: eval_level(c, x, "below"),
    "declining": lambda c, x: eval_trend(c, x, "below"),
    "rising": lambda c, x: eval_trend(c, x, "above"),
    "fix_ratio_declining": lambda c, x: eval_trend(c, x, "below"),
}
