"""When did review trailers come into use, and when had their use settled?

Review trailers (Reviewed-by, Acked-by, Tested-by) appear years after many
histories start, and their share then climbs while the habit spreads. A trend
of review coverage, or a claim about it, whose window starts in that climb
mixes the adoption of a trailer with a change of practice. This module finds:

``first_use``
    the date of the first commit with a review trailer;
``settled_at``
    the start of the first period, from the first period whose next
    ``horizon_years`` have at least ``in_use_share`` (5%) of their commits with
    a review trailer (sporadic early use does not start the era), after which
    the share of commits with a review trailer did not rise over the following
    ``horizon_years`` (binomial GLM of the per-period counts on time, logit
    link, quasi-binomial scale when overdispersed: the whole interval of the
    yearly odds ratio lies below ``max_rise``, 1.25, so settling is shown, not
    presumed from a window too noisy to see a rise). None when no such window
    exists: adoption had not settled by the end of the history.

A step in coverage (a policy switched on at one date) after a flat stretch is
not adoption: the first flat stretch already settles it. Caveat code
``review_adoption_unsettled`` (:data:`procmetrics.analyse.result.CAVEAT_CODES`)
marks a window that starts before ``settled_at``.

References
----------
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed.
(binomial GLM, quasi-likelihood scale from Pearson's X2).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.analyse.measures.periods import period_midpoints, years_since
from procmetrics.analyse.measures.vocabulary import ALL
from procmetrics.analyse.result import Caveat, caveat, to_plain

#: review metrics whose trends and claims the adoption era concerns
REVIEW_METRICS = ("review_coverage", "independent_review", "unreviewed_self_commits")
METHOD = ("first period, once at least {u:.0%} of the commits of the next {h:g} years "
          "carry a review trailer, from which that share is shown not to rise by more than "
          "an odds ratio of {r:g} a year over the next {h:g} years (binomial GLM on time, "
          "quasi-binomial when overdispersed; {lv:.0%} interval)")


@dataclass(frozen=True)
class ReviewAdoption:
    """Start and settling of review-trailer use (see the module docstring)."""

    first_use: pd.Timestamp | None
    settled_at: pd.Timestamp | None
    end: pd.Timestamp | None
    n_periods: int
    method: str

    def caveat_for(self, start: Any) -> Caveat | None:
        """``review_adoption_unsettled`` when a window starting at ``start`` (None: the
        start of the history) begins before review-trailer use had settled."""
        if self.first_use is None:
            return None
        if self.settled_at is not None and start is not None \
                and pd.Timestamp(start) >= self.settled_at:
            return None
        if self.settled_at is not None and start is None and self.settled_at <= self.first_use:
            return None
        if self.settled_at is None:
            text = (f"review trailers came into use on {self.first_use:%Y-%m-%d} and their "
                    "share was still rising at the end of the history")
        else:
            text = (f"review trailers came into use on {self.first_use:%Y-%m-%d} and their "
                    f"share kept rising until {self.settled_at:%Y-%m-%d}")
        return caveat("review_adoption_unsettled", text + ": a window starting earlier "
                      "mixes the spread of the trailers with a change of review practice")

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def review_adoption(table: pd.DataFrame, *, first_use: Any = None, horizon_years: float = 3.0,
                    in_use_share: float = 0.05, max_rise: float = 1.25, alpha: float = 0.05,
                    min_periods: int = 4) -> ReviewAdoption:
    """Find when review-trailer use settled, from a per-period metrics table.

    Parameters
    ----------
    table : ``PeriodMetrics.table`` holding ``review_coverage`` rows for ``"(all)"``.
    first_use : date of the first reviewed commit; default the start of the first
        period with a reviewed commit.
    horizon_years : length of the window after each candidate period.
    in_use_share : share of commits with a review trailer, pooled over the
        ``horizon_years`` after a period, from which the trailers count as in use
        (a tuning choice; sporadic earlier use is ignored).
    max_rise : odds ratio per year of the share that still counts as settled: the
        window's whole interval for the yearly odds ratio must lie below it, so a
        window too short or too noisy to show that does not settle adoption.
    alpha : level of the slope's interval.
    min_periods : fewest periods a window needs to be judged.

    References
    ----------
    McCullagh & Nelder (1989).
    """
    from procmetrics.analyse.glmfit import fit_model  # local: glmfit is heavier
    from procmetrics.errors import InsufficientData

    method = METHOD.format(u=in_use_share, h=horizon_years, r=max_rise, lv=1 - alpha)
    s = table[(table["metric"] == "review_coverage") & (table["subsystem"] == ALL)
              & (table["denominator"] > 0)].sort_values("period_start").reset_index(drop=True)
    used = s.index[s["numerator"] > 0]
    if len(used) == 0:
        return ReviewAdoption(None, None, None, len(s), method)
    first = pd.Timestamp(first_use) if first_use is not None \
        else s["period_start"].iloc[int(used[0])]
    end = pd.Timestamp(s["period_end"].iloc[-1])
    t = years_since(period_midpoints(s), s["period_start"].iloc[0])
    x_all, n_all = s["numerator"].to_numpy(float), s["denominator"].to_numpy(float)
    pooled = np.array([x_all[(t >= a) & (t < a + horizon_years)].sum()
                       / n_all[(t >= a) & (t < a + horizon_years)].sum() for a in t])
    in_use = np.flatnonzero(pooled >= in_use_share)
    if len(in_use) == 0:
        return ReviewAdoption(first, None, end, len(s), method)
    s, t = s.iloc[int(in_use[0]):].reset_index(drop=True), t[int(in_use[0]):]
    for k in range(len(s)):
        win = (t >= t[k]) & (t < t[k] + horizon_years)
        if win.sum() < min_periods:
            break
        x, n, tt = (s["numerator"].to_numpy(float)[win], s["denominator"].to_numpy(float)[win],
                    t[win])
        if x.sum() == n.sum():
            return ReviewAdoption(first, max(first, s["period_start"].iloc[k]), end, len(s),
                                  method)
        X = np.column_stack([np.ones(len(tt)), tt - tt.mean()])
        try:
            fit = fit_model(x, X, kind="proportion", trials=n, names=["const", "time"],
                            alpha=alpha, hac="never")
        except InsufficientData:
            continue
        if fit.params.set_index("term").loc["time", "ci_high"] <= np.log(max_rise):
            return ReviewAdoption(first, max(first, s["period_start"].iloc[k]), end, len(s),
                                  method)
    return ReviewAdoption(first, None, end, len(s), method)


__all__ = ["REVIEW_METRICS", "ReviewAdoption", "review_adoption"]
