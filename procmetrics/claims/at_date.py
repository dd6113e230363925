"""Claim kinds about a change AT a date, judged against the trend before it.

``rose_after``, ``fell_after`` and ``review_coverage_rose`` claim that a share
changed at a date. A share that was already rising before the date is higher
after it whether or not anything happened at the date, so these kinds are
decided by the segmented regression (interrupted time series) of the report's
before/after section, :func:`procmetrics.analyse.change.its.interrupted_time_series`,
called with the same per-period table and the same options as
:func:`procmetrics.analyse.change.policy.compare_policy` uses there, so claim and
section show the same numbers:

``logit(share) = b0 + b1 t + b2 post + b3 post * t`` per period, ``t`` in years
from the date, overdispersion (quasi-binomial) and autocorrelation (Newey-West)
handled as in the section, periods straddling the date left out.

Decision (see :mod:`procmetrics.claims.base` for the one-sided convention):
the **level change** ``b2`` decides. "Rose after the date" is supported only
when the whole two-sided interval of ``b2`` lies above 0 (a one-sided test at
alpha/2 that the share jumped at the date beyond the pre-date trend); "fell"
mirrors it. The slope change ``b3``, the pre-date trend ``b1``, placebo dates
and an optional control subsystem are reported as evidence and never turn a
verdict into ``supported``. A control subsystem that changed the same way makes
the claim undecidable (the change cannot be attributed to the date).

For "the share is higher after the date than before", with no attribution to
the date, use ``higher_after_than_before`` (:mod:`procmetrics.claims.shares`).

References
----------
Wagner, Soumerai, Zhang & Ross-Degnan (2002), J. Clin. Pharm. Ther. 27:299-309
(segmented regression); Bernal, Cummins & Gasparrini (2017), Int. J. Epidemiol.
46:348-355 (placebo and control series); Newey & West (1987).
"""
from __future__ import annotations

from dataclasses import replace
from typing import Any, Sequence

import pandas as pd

from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable
from procmetrics.claims.common import METRIC, SUBSYSTEM, adoption_caveat, pct
from procmetrics.analyse.result import Caveat, Estimate
from procmetrics.errors import InsufficientData

ITS_METHOD = ("level change at the date beyond the pre-date trend, from the segmented "
              "regression (interrupted time series) of the before/after section: binomial "
              "GLM (logit) on per-period counts, quasi-binomial when overdispersed, HAC "
              "errors when autocorrelated; slope change, placebo dates and control as "
              "evidence")
DATE = Param("date", True, help="the date of the change ('policy' or YYYY-MM-DD)")
CONTROL = Param("text", help="a subsystem the change did not target (control series)")
_PARAMS = {"metric": METRIC, "date": DATE, "subsystem": SUBSYSTEM, "control": CONTROL}
#: metrics the before/after section draws a segmented-regression figure for
_SECTION_FIGURES = ("review_coverage", "independent_review", "fix_ratio")

SPECS: dict[str, KindSpec] = {
    "rose_after": KindSpec(
        "the share rose at the date, beyond the trend it followed before", _PARAMS,
        ITS_METHOD, "up: level change at the date > 0",
        ("section:before-after",)),
    "fell_after": KindSpec(
        "the share fell at the date, beyond the trend it followed before", _PARAMS,
        ITS_METHOD, "down: level change at the date < 0",
        ("section:before-after",)),
    "review_coverage_rose": KindSpec(
        "review coverage rose at the date, beyond the trend it followed before",
        {"date": DATE, "subsystem": SUBSYSTEM, "control": CONTROL}, ITS_METHOD,
        "up: level change at the date > 0", ("section:before-after",)),
}


def its_for_claim(ctx: ClaimContext, metric: str, at: pd.Timestamp, *,
                  subsystem: str | None = None, control: str | None = None,
                  level: float = 0.95) -> tuple[Any, pd.DataFrame]:
    """The before/after section's segmented fit of one share at ``at``.

    The same call as :func:`~procmetrics.analyse.change.policy.compare_policy`
    makes: the per-period table of
    :func:`~procmetrics.analyse.measures.metrics.compute_period_metrics` split at
    ``at`` (``ctx.period``, committer dates, default review keys), then
    :func:`~procmetrics.analyse.change.its.interrupted_time_series` with
    ``alpha = 1 - level`` and the default dispersion threshold and HAC rule.
    Returns the result and the series it was fitted on; the level change's
    guarded interval (see :mod:`procmetrics.analyse.change.its`) is the one the
    section prints and the one the verdict uses.
    """
    from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics

    alpha = round(1.0 - level, 10)
    named = tuple(x for x in (subsystem, control) if x)
    pm = compute_period_metrics(
        ctx.commits, ctx.trailers, commit_subsystems=ctx.commit_subsystems if named else None,
        tags=ctx.tags, config=MetricConfig(period=ctx.period, alpha=alpha,
                                           subsystems=named or None, metrics=(metric,)),
        split_at=at, extra_subsystems=named)
    r, series = its_on_table(pm.table, metric, at, subsystem=subsystem, control=control,
                             level=level, placebo_shifts=ctx.placebo_shifts)
    return r, series


def its_on_table(table: pd.DataFrame, metric: str, at: pd.Timestamp, *,
                 subsystem: str | None = None, control: str | None = None,
                 level: float = 0.95, placebo_shifts: int = 8) -> tuple[Any, pd.DataFrame]:
    """:func:`~procmetrics.analyse.change.its.interrupted_time_series` on a per-period
    metric table, with the before/after section's options; returns the fit and the series."""
    from procmetrics.analyse.change.its import interrupted_time_series
    from procmetrics.analyse.change.trend import select_series
    from procmetrics.analyse.measures.metrics import ALL

    series = subsystem or ALL
    res = interrupted_time_series(table, metric, at, subsystem=series,
                                  control_subsystem=control, alpha=round(1.0 - level, 10),
                                  placebo_shifts=placebo_shifts)
    return res, select_series(table, metric, series)


def _refs(metric: str, subsystem: str | None) -> tuple[str, ...]:
    key = "its-" + metric.replace("_", "-")
    if subsystem:
        return ("section:before-after", "table:its-subsystems")
    return ("section:before-after",) + ((f"figure:{key}",) if metric in _SECTION_FIGURES
                                        else ())


def _ci(e: Estimate, fmt: str = "+.2f") -> str:
    return f"{e.value:{fmt}} [{e.low:{fmt}}, {e.high:{fmt}}]"


def _on_side(e: Estimate, up: bool) -> bool:
    return e.low is not None and e.high is not None and (e.low > 0 if up else e.high < 0)


def eval_change_at_date(claim: Claim, ctx: ClaimContext, direction: str) -> ClaimVerdict:
    """Judge "the share rose (fell) at the date" by the level change beyond the trend."""
    p = claim.params
    metric = p.get("metric", "review_coverage")
    at = cl.resolve_date(p["date"], ctx, "date")
    sub, control = p.get("subsystem"), p.get("control")
    try:
        r, s = its_for_claim(ctx, metric, at, subsystem=sub, control=control,
                                    level=claim.level)
    except InsufficientData as exc:
        raise Undecidable(f"the segmented model cannot be fitted: {exc}") from exc
    return judge_change_at_date(claim, r, s, up=direction == "up", period=ctx.period,
                                min_n=ctx.min_n, caveats=adoption_caveat(ctx, metric))


def judge_change_at_date(claim: Claim, r: Any, s: pd.DataFrame, *, up: bool,
                         period: str = "quarter", min_n: int = 20,
                         caveats: Sequence[Caveat] = ()
                         ) -> ClaimVerdict:
    """The verdict from a segmented fit ``r`` (an ``ITSResult``) of the series ``s``.

    Supported only when the whole interval of the level change lies on the
    claimed side of 0; see the module docstring. The interval is
    ``r.level_change``: the guarded interval the before/after section prints too
    (:mod:`procmetrics.analyse.change.its`), so claim and section read alike.
    """
    metric, at, control = r.metric, r.at, r.control_subsystem
    sub = None if r.subsystem == "(all)" else r.subsystem
    words = metric.replace("_", " ")
    s = s[~((s["period_start"] < at) & (s["period_end"] > at))]   # as the fit: no straddler
    post = (s["period_start"] >= at).to_numpy()
    n_b, n_a = int(s.loc[~post, "denominator"].sum()), int(s.loc[post, "denominator"].sum())
    for side, n in (("before", n_b), ("after", n_a)):
        if n < min_n:
            raise Undecidable(f"only {n} commits {side} {at:%Y-%m-%d} "
                              f"(at least {min_n} are needed)")
    x_b, x_a = float(s.loc[~post, "numerator"].sum()), float(s.loc[post, "numerator"].sum())
    lv, sl, pre = r.level_change, r.slope_change, r.pre_slope
    dec, why = lv, r.guard_note
    est = Estimate(f"level change of {words} at {at:%Y-%m-%d} beyond the pre-date trend",
                   dec.value, dec.low, dec.high, dec.level, dec.method, dec.n, dec.unit)
    extra = [f"{words}: {pct(x_b / n_b)} of {n_b:,} commits in the {r.n_before} "
             f"{period}s before {at:%Y-%m-%d}, {pct(x_a / n_a)} of {n_a:,} in the "
             f"{r.n_after} from it"
             + (f" ({r.n_transition} straddling the date left out)" if r.n_transition else ""),
             f"pre-date trend {_ci(pre)} {pre.unit}; slope change at the date {_ci(sl)} "
             f"{sl.unit} (evidence only: the level change decides)"]
    if why:
        extra.append(why)
    if r.level_ratio is not None and lv.value is not None:
        extra.append(f"odds ratio at the date {_ci(r.level_ratio, '.3g')}")
    if r.placebo_p_level is not None:
        extra.append(f"placebo dates: {len(r.placebo)} fitted, share with an effect at least "
                     f"as large: p = {r.placebo_p_level:.2f}")
    if r.control_level_change is not None:
        extra.append(f"control subsystem {control!r}: level change "
                     f"{_ci(r.control_level_change)} {lv.unit}")
    cav = list(r.caveats) + list(caveats)
    one_p = None
    if dec.value is not None and r.level_p_value is not None:
        # one-sided from the two-sided p of the interval shown (same quantile, t or normal)
        on_side = (dec.value > 0) == up
        one_p = r.level_p_value / 2 if on_side else 1 - r.level_p_value / 2
    v = cl.decide(claim, est, side="above" if up else "below", threshold=0.0,
                  what=f"level change at the date beyond the pre-date trend ({lv.unit})",
                  method=f"{ITS_METHOD}; decided on: {dec.method}", n=r.n,
                  test={"name": "level change, one-sided in the claimed direction (p from "
                                "the interval that decides)", "p_value": one_p},
                  diagnostics=r.diagnostics, caveats=cav, fmt=lambda x: f"{x:+.3g}" if x else "0",
                  extra=extra)
    reasons = list(v.reasons)
    moving = "rising" if up else "falling"
    if v.verdict == cl.NOT_SUPPORTED and _on_side(pre, up):
        reasons.insert(0, f"{words} was already {moving} before the date ({_ci(pre)} "
                          f"{pre.unit}); the data show no change at the date beyond that "
                          "trend")
        if (x_a / n_a > x_b / n_b) == up:
            reasons.insert(1, f"the share is {'higher' if up else 'lower'} after the date "
                              "than before, but the trend under way before the date "
                              "accounts for that")
    if v.verdict == cl.SUPPORTED and _on_side(sl, not up):
        reasons.append(f"caution: the slope turns {'down' if up else 'up'} after the date "
                       f"({_ci(sl)} {sl.unit}): the change at the date fades over time")
    return replace(v, reasons=tuple(reasons), see=_refs(metric, sub))


EVALUATORS = {
    "rose_after": lambda c, x: eval_change_at_date(c, x, "up"),
    "fell_after": lambda c, x: eval_change_at_date(c, x, "down"),
    "review_coverage_rose": lambda c, x: eval_change_at_date(c, x, "up"),
}
