"""Claim kinds about how changes are handled: applied by someone other than their author.

In a maintainer-driven project a patch is written by one person and applied by
another; the commit then records a committer who is not its author, whether
or not a review trailer was added. ``applied_by_other`` (share of non-merge
commits whose committer e-mail differs from the author's, after the .mailmap
git applied; :mod:`procmetrics.analyse.measures.metrics`) is that evidence,
shown beside review-trailer coverage. It is weaker than a review trailer: a
committer who applies a patch is not shown to have reviewed it.

This module also holds the review-adoption check every claim on a review
metric gets (:func:`review_adoption_caveat`).

References
----------
McCullagh & Nelder (1989) (binomial GLM, quasi-binomial scale); Newey & West
(1987) (HAC errors).
"""
from __future__ import annotations

from dataclasses import replace
from typing import Any

from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param
from procmetrics.claims.common import AFTER, BEFORE, GLM_METHOD, SUBSYSTEM
from procmetrics.analyse.memo import memoised
from procmetrics.analyse.result import Caveat

METRIC = "applied_by_other"
_PARAMS = {"threshold": Param("share", True), "after": AFTER, "before": BEFORE,
           "subsystem": SUBSYSTEM}

_SEE = ("section:process-series", "figure:series-applied-by-other")

SPECS: dict[str, KindSpec] = {
    "applied_by_other_at_least": KindSpec(
        "at least the threshold share of commits in the window were applied by someone "
        "other than their author (committer e-mail differs from the author's)", _PARAMS,
        "pooled share of applied_by_other from an intercept-only " + GLM_METHOD,
        "up: share > threshold", _SEE),
    "applied_by_other_at_most": KindSpec(
        "at most the threshold share of commits in the window were applied by someone "
        "other than their author", _PARAMS,
        "pooled share of applied_by_other from an intercept-only " + GLM_METHOD,
        "down: share < threshold", _SEE),
}

WORDS = ("applied by someone other than the author: the committer's e-mail differs from "
         "the author's (after the .mailmap git applied); this shows who applied a change, "
         "not that it was reviewed")


def _eval(claim: Claim, ctx: ClaimContext, side: str) -> ClaimVerdict:
    from procmetrics.claims.shares import eval_level

    inner = replace(claim, kind="at_least" if side == "above" else "at_most",
                    params={**claim.params, "metric": METRIC})
    v = eval_level(inner, ctx, side)
    return replace(v, claim=claim, method=SPECS[claim.kind].method,
                   reasons=(*v.reasons, WORDS))


EVALUATORS = {
    "applied_by_other_at_least": lambda c, x: _eval(c, x, "above"),
    "applied_by_other_at_most": lambda c, x: _eval(c, x, "below"),
}

#: claim kinds about review metrics, besides those naming one in ``metric``
_REVIEW_KINDS = ("review_coverage_rose",)


def review_adoption_caveat(claim: Claim, ctx: ClaimContext) -> Caveat | None:
    """``review_adoption_unsettled`` when ``claim`` is about a review metric and its
    window starts before review trailers settled into use (None otherwise)."""
    from procmetrics.analyse.measures.adoption import REVIEW_METRICS
    from procmetrics.errors import InsufficientData

    p = claim.params
    if claim.kind not in _REVIEW_KINDS and p.get("metric") not in REVIEW_METRICS:
        return None
    start: Any = None
    if "after" in p:
        try:
            start = cl.resolve_date(p["after"], ctx, "after")
        except cl.Undecidable:
            return None
    try:
        adoption = _review_adoption(ctx.commits, ctx.trailers, ctx.tags, ctx.period,
                                    f"{ctx.date_basis}_date")
    except InsufficientData:
        return None
    return adoption.caveat_for(start)


@memoised()
def _review_adoption(commits: Any, trailers: Any, tags: Any, period: str,
                     date_column: str) -> Any:
    """When review trailers settled into use in these tables (one computation for every
    claim judged on them while results are kept)."""
    from procmetrics.analyse.measures.adoption import review_adoption
    from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics

    pm = compute_period_metrics(commits, trailers, tags=tags, config=MetricConfig(
        period=period, metrics=("review_coverage",), date_column=date_column))
    return review_adoption(pm.table)
