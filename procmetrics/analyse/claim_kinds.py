"""The claim kinds: their parameters, their method and their evaluator.

Every kind names the method of the analysis layer it uses; the decision rule
is :func:`procmetrics.analyse.claims.decide` (interval entirely on the claimed
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
from typing import Any, Mapping

import numpy as np
import pandas as pd

from procmetrics.analyse import claims as cl
from procmetrics.analyse.claims import (
    Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable,
)
from procmetrics.analyse.result import Caveat, Estimate
from procmetrics.errors import InsufficientData

SHARE_METRICS = ("review_coverage", "independent_review", "unreviewed_self_commits",
                 "fix_ratio", "revert_ratio", "stable_request_share", "fixes_tag_adoption")
_FIX_METRICS = ("fix_ratio", "stable_request_share", "fixes_tag_adoption")

GLM_METHOD = ("binomial GLM (logit) on per-period counts, quasi-binomial when "
              "overdispersed, HAC errors when autocorrelated")

_SUB = Param("text", help="only commits touching this subsystem")
_AFTER = Param("date", help="only data on or after this date ('policy' or YYYY-MM-DD)")
_BEFORE = Param("date", help="only data before this date")
_METRIC = Param("metric", True, help="a share metric: " + ", ".join(SHARE_METRICS))

SPECS: dict[str, KindSpec] = {
    "rose_after": KindSpec("the share is higher after the date than before",
                           {"metric": _METRIC, "date": Param("date", True), "subsystem": _SUB},
                           "odds ratio after/before from a " + GLM_METHOD),
    "fell_after": KindSpec("the share is lower after the date than before",
                           {"metric": _METRIC, "date": Param("date", True), "subsystem": _SUB},
                           "odds ratio after/before from a " + GLM_METHOD),
    "review_coverage_rose": KindSpec(
        "review coverage is higher after the date than before",
        {"date": Param("date", True), "subsystem": _SUB},
        "odds ratio after/before from a " + GLM_METHOD),
    "at_least": KindSpec("the share in the window is at least the threshold",
                         {"metric": _METRIC, "threshold": Param("share", True),
                          "after": _AFTER, "before": _BEFORE, "subsystem": _SUB},
                         "pooled share from an intercept-only " + GLM_METHOD),
    "at_most": KindSpec("the share in the window is at most the threshold",
                        {"metric": _METRIC, "threshold": Param("share", True),
                         "after": _AFTER, "before": _BEFORE, "subsystem": _SUB},
                        "pooled share from an intercept-only " + GLM_METHOD),
    "declining": KindSpec("the share falls over time in the window",
                          {"metric": _METRIC, "after": _AFTER, "before": _BEFORE,
                           "subsystem": _SUB}, "time trend (procmetrics.analyse.change.trend)"),
    "rising": KindSpec("the share rises over time in the window",
                       {"metric": _METRIC, "after": _AFTER, "before": _BEFORE,
                        "subsystem": _SUB}, "time trend (procmetrics.analyse.change.trend)"),
    "fix_ratio_declining": KindSpec(
        "the share of commits that fix an earlier commit falls over time",
        {"after": _AFTER, "before": _BEFORE, "subsystem": _SUB},
        "time trend (procmetrics.analyse.change.trend)"),
    "median_lifetime_below": KindSpec(
        "half of the defects are fixed within the threshold",
        {"threshold_days": Param("days", True), "after": _AFTER, "before": _BEFORE,
         "subsystem": _SUB},
        "median of the truncation-aware (Lynden-Bell) lifetime distribution, "
        "percentile bootstrap interval"),
    "lifetimes_shorter_after": KindSpec(
        "defects introduced after the date are fixed sooner than those before",
        {"date": Param("date", True), "horizon_days": Param("days"), "subsystem": _SUB},
        "Cox hazard ratio of fixing (after/before) within a common follow-up horizon"),
    "fix_rate_declining": KindSpec(
        "the rate at which defects are fixed falls over time (reliability growth)",
        {"after": _AFTER, "before": _BEFORE},
        "power-law (Crow-AMSAA) NHPP shape beta with profile interval; Laplace and "
        "MIL-HDBK-189 trend tests"),
    "residual_defects_below": KindSpec(
        "fewer than N defects remain", {"threshold": Param("count", True)},
        "none: not supportable from commit data"),
    "no_defects_remain": KindSpec("no defects remain", {},
                                  "none: not supportable from commit data"),
}


# ------------------------------------------------------------------ helpers
def _window(ctx: ClaimContext, p: Mapping[str, Any]) -> tuple[pd.Timestamp | None,
                                                               pd.Timestamp | None]:
    after = cl.resolve_date(p["after"], ctx, "after") if "after" in p else None
    before = cl.resolve_date(p["before"], ctx, "before") if "before" in p else None
    if after is not None and before is not None and after >= before:
        raise Undecidable("the window is empty: 'after' is not earlier than 'before'")
    return after, before


def _commits(ctx: ClaimContext, subsystem: str | None) -> pd.DataFrame:
    c = ctx.commits
    if subsystem:
        cs = ctx.commit_subsystems
        if cs is None or not (cs["subsystem"] == subsystem).any():
            raise Undecidable(f"no commit touches the subsystem {subsystem!r}")
        c = c[c["hash"].isin(cs.loc[cs["subsystem"] == subsystem, "hash"])]
    return c


def _flag_column(metric: str) -> tuple[str, str | None]:
    """(numerator flag, denominator flag or None = all commits) in commit_flags."""
    return {"review_coverage": ("reviewed", None), "independent_review": ("independent", None),
            "unreviewed_self_commits": ("unreviewed_self", None), "fix_ratio": ("fix", None),
            "revert_ratio": ("revert", None), "stable_request_share": ("stable_request", "fix_ref"),
            "fixes_tag_adoption": ("fix_ref", None)}[metric]


def _flags(ctx: ClaimContext, metric: str, subsystem: str | None) -> pd.DataFrame:
    from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags

    f = commit_flags(_commits(ctx, subsystem), ctx.trailers, MetricConfig(period=ctx.period))
    num, den = _flag_column(metric)
    if den is not None:
        f = f[f[den]]
    f = f[f["date"].notna()]
    return f.assign(hit=f[num].astype(bool))


def _adoption_caveat(ctx: ClaimContext, metric: str) -> list[Caveat]:
    if metric not in _FIX_METRICS or metric == "fixes_tag_adoption":
        return []
    from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics

    pm = compute_period_metrics(ctx.commits, ctx.trailers, tags=ctx.tags, config=MetricConfig(
        period=ctx.period, metrics=("fixes_tag_adoption",)))
    return [c for c in pm.caveats if c.code == "tag_adoption_rising"]


def _per_period(f: pd.DataFrame, ctx: ClaimContext, split: pd.Timestamp | None = None
                ) -> pd.DataFrame:
    """Successes and trials per period (and side of ``split``), in time order."""
    from procmetrics.analyse.measures.periods import assign_periods

    labels, frame = assign_periods(f["date"], ctx.period, ctx.tags)
    d = f.assign(period=labels.to_numpy(),
                 after=(f["date"] >= split).to_numpy() if split is not None else False)
    g = d.groupby(["period", "after"], sort=False)
    out = pd.DataFrame({"x": g["hit"].sum(), "n": g.size(), "t": g["date"].min()}).reset_index()
    return out.sort_values(["t", "after"]).reset_index(drop=True)


def _glm(y: np.ndarray, X: np.ndarray, trials: np.ndarray, names: list[str], level: float):
    from procmetrics.analyse.glmfit import fit_model

    try:
        return fit_model(y, X, kind="proportion", trials=trials, names=names,
                         alpha=round(1 - level, 10), hac="auto")
    except InsufficientData as exc:
        raise Undecidable(f"the model cannot be fitted: {exc}") from exc


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


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
    f = _flags(ctx, metric, subsystem)
    before, after = f[f["date"] < date], f[f["date"] >= date]
    for side, part in (("before", before), ("after", after)):
        if len(part) < ctx.min_n:
            raise Undecidable(f"only {len(part)} commits {side} {date:%Y-%m-%d} "
                              f"(at least {ctx.min_n} are needed)")
    rows = _per_period(f, ctx, date)
    if rows["after"].sum() < 2 or (~rows["after"]).sum() < 2:
        raise Undecidable(f"fewer than two {ctx.period}s on one side of {date:%Y-%m-%d}")
    X = np.column_stack([np.ones(len(rows)), rows["after"].astype(float)])
    fit = _glm(rows["x"].to_numpy(float), X, rows["n"].to_numpy(float),
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
    extra = [f"{metric.replace('_', ' ')}: {_pct(sh.x_before / sh.n_before)} of "
             f"{sh.n_before:,} commits before {date:%Y-%m-%d}, "
             f"{_pct(sh.x_after / sh.n_after)} of {sh.n_after:,} after"]
    cav = list(sh.caveats) + _adoption_caveat(ctx, metric)
    return cl.decide(claim, sh.odds_ratio, side="above" if direction == "up" else "below",
                     threshold=1.0, what="odds ratio after/before", method=method, n=n,
                     test={"name": "Wald z (after term)", "p_value": sh.p_value},
                     diagnostics=sh.diagnostics, caveats=cav, extra=extra)


def eval_level(claim: Claim, ctx: ClaimContext, side: str) -> ClaimVerdict:
    p = claim.params
    metric = p["metric"]
    after, before = _window(ctx, p)
    f = _flags(ctx, metric, p.get("subsystem"))
    if after is not None:
        f = f[f["date"] >= after]
    if before is not None:
        f = f[f["date"] < before]
    if len(f) < ctx.min_n:
        raise Undecidable(f"only {len(f)} commits in the window (at least {ctx.min_n} needed)")
    rows = _per_period(f, ctx)
    fit = _glm(rows["x"].to_numpy(float), np.ones((len(rows), 1)), rows["n"].to_numpy(float),
               ["const"], claim.level)
    r = fit.params.set_index("term").loc["const"]
    inv = lambda e: float(1 / (1 + np.exp(-e)))  # noqa: E731
    est = Estimate(f"share ({metric})", inv(r["estimate"]), inv(r["ci_low"]),
                   inv(r["ci_high"]), claim.level, f"{fit.model}; {fit.cov_type} SE",
                   int(len(f)))
    cav = list(fit.caveats) + _adoption_caveat(ctx, metric)
    return cl.decide(claim, est, side=side, threshold=float(p["threshold"]),
                     what=f"share of {metric.replace('_', ' ')}", method=SPECS[claim.kind].method,
                     n=int(len(f)), diagnostics=fit.diagnostics, caveats=cav, fmt=_pct,
                     extra=[f"{int(rows['x'].sum()):,} of {len(f):,} commits over "
                            f"{len(rows)} {ctx.period}s"])


def eval_trend(claim: Claim, ctx: ClaimContext, side: str) -> ClaimVerdict:
    from procmetrics.analyse.measures.metrics import ALL, MetricConfig, compute_period_metrics
    from procmetrics.analyse.change.trend import fit_trend

    p = claim.params
    metric = p.get("metric", "fix_ratio")
    after, before = _window(ctx, p)
    sub = p.get("subsystem")
    c = _commits(ctx, sub)
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
    cav = list(tr.caveats) + _adoption_caveat(ctx, metric)
    est = tr.ratio_per_year or tr.slope
    what = ("odds ratio per year" if tr.ratio_per_year is not None else "slope per year")
    thr = 1.0 if tr.ratio_per_year is not None else 0.0
    return cl.decide(claim, est, side=side, threshold=thr, what=f"{what} of "
                     f"{metric.replace('_', ' ')}", method=f"{tr.model} over {tr.n_periods} "
                     f"{ctx.period}s", n=tr.n, diagnostics=tr.diagnostics, caveats=cav)


def _defect_kinds():
    """The defect evaluators (imported late: that module imports this one)."""
    from procmetrics.analyse import claim_defects

    return claim_defects


EVALUATORS = {
    "rose_after": lambda c, x: eval_shift(c, x, "up"),
    "fell_after": lambda c, x: eval_shift(c, x, "down"),
    "review_coverage_rose": lambda c, x: eval_shift(c, x, "up"),
    "at_least": lambda c, x: eval_level(c, x, "above"),
    "at_most": lambda c, x: eval_level(c, x, "below"),
    "declining": lambda c, x: eval_trend(c, x, "below"),
    "rising": lambda c, x: eval_trend(c, x, "above"),
    "fix_ratio_declining": lambda c, x: eval_trend(c, x, "below"),
    "median_lifetime_below": lambda c, x: _defect_kinds().eval_median_lifetime(c, x),
    "lifetimes_shorter_after": lambda c, x: _defect_kinds().eval_lifetimes_shorter(c, x),
    "fix_rate_declining": lambda c, x: _defect_kinds().eval_fix_rate(c, x),
    "residual_defects_below": lambda c, x: _defect_kinds().eval_not_supportable(c, x),
    "no_defects_remain": lambda c, x: _defect_kinds().eval_not_supportable(c, x),
}
