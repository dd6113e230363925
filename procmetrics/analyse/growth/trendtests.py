"""Trend tests for a point process of fix times: is the fix rate falling?

Two tests, run before any reliability-growth model is fitted:

* the **Laplace test** (centroid test): under a homogeneous Poisson process
  the fix times are uniform on the observation window, so their mean is
  ``T/2``; a mean well below it means fixes crowd early (growth);
* the **power-law (MIL-HDBK-189) test**: under the power-law NHPP with
  ``beta = 1`` (constant rate), ``2 * sum(log(T / t_i))`` is chi-square with
  ``2n`` degrees of freedom (time-truncated) or ``2(n-1)`` (failure-truncated);
  ``beta < 1`` (growth) makes it large.

Both have a *time-truncated* form (observation ends at a chosen ``T`` after
the last fix) and a *failure-truncated* form (``T`` is the last fix time and
that fix is not counted among the uniform points). Times are measured from an
origin at which observation starts and must be positive.

"Growth" here means a falling fix rate, which commit data cannot separate
from falling effort, changes in tagging practice or a shrinking team.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from scipy import stats

from procmetrics.analyse.result import to_plain
from procmetrics.errors import InsufficientData

Direction = Literal["growth", "deterioration", "no evidence"]


@dataclass(frozen=True)
class TrendTest:
    """One trend test. ``p_growth`` is one-sided for a falling rate."""

    name: str
    statistic: float
    df: int | None
    p_growth: float
    p_deterioration: float
    p_two_sided: float
    n: int
    truncation: str
    end: float
    direction: Direction
    alpha: float
    method: str
    beta_hat: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class TrendTests:
    """Both tests side by side, whether they agree, and the decision taken."""

    laplace: TrendTest
    power_law: TrendTest
    agree: bool
    evidence_of_growth: bool
    rule: str
    message: str

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def _check(times: Any, end: float | None) -> tuple[np.ndarray, float, str]:
    t = np.sort(np.asarray(times, float))
    if len(t) < 3:
        raise InsufficientData(f"a trend test needs at least 3 fix times, got {len(t)}")
    if np.any(t <= 0) or np.any(~np.isfinite(t)):
        raise ValueError("fix times must be finite and strictly after the origin (> 0)")
    if end is None:
        return t, float(t[-1]), "failure"
    if end < t[-1]:
        raise ValueError("end of observation precedes the last fix time")
    return t, float(end), "time"


def _direction(p_growth: float, p_det: float, alpha: float) -> Direction:
    if p_growth < alpha:
        return "growth"
    if p_det < alpha:
        return "deterioration"
    return "no evidence"


def laplace_test(times: Any, end: float | None = None, *, alpha: float = 0.05) -> TrendTest:
    """Laplace trend test.

    ``U = (mean(t) - T/2) / (T * sqrt(1 / (12 m)))`` over the ``m`` uniform
    points (all ``n`` when time-truncated at ``end``; the first ``n - 1`` with
    ``T = t_n`` when failure-truncated, ``end=None``); ``U ~ N(0, 1)`` under a
    constant rate. Negative ``U`` indicates growth.

    References
    ----------
    Cox & Lewis (1966), The Statistical Analysis of Series of Events, ch. 3;
    Ascher & Feingold (1984), Repairable Systems Reliability, ch. 5.
    """
    t, T, trunc = _check(times, end)
    pts = t if trunc == "time" else t[:-1]
    m = len(pts)
    u = float((pts.mean() - T / 2) / (T * np.sqrt(1.0 / (12 * m))))
    pg, pd_ = float(stats.norm.cdf(u)), float(stats.norm.sf(u))
    return TrendTest("laplace", u, None, pg, pd_, float(2 * min(pg, pd_)), len(t),
                     f"{trunc}-truncated", T, _direction(pg, pd_, alpha), alpha,
                     "Laplace centroid test, normal approximation")


def power_law_trend_test(times: Any, end: float | None = None, *,
                         alpha: float = 0.05) -> TrendTest:
    """MIL-HDBK-189 chi-square test of ``beta = 1`` in the power-law NHPP.

    Time-truncated: ``S = 2 sum_{i<=n} log(T/t_i) ~ chi2(2n)``;
    failure-truncated: ``S = 2 sum_{i<n} log(t_n/t_i) ~ chi2(2(n-1))``.
    ``beta_hat = n / (S / 2)`` is the maximum-likelihood shape.
    Large ``S`` (``beta < 1``) indicates growth.

    References
    ----------
    MIL-HDBK-189C (2011), Reliability Growth Management, sec. 5 (AMSAA/Crow
    model); Crow (1974), "Reliability analysis for complex, repairable
    systems"; Bain & Engelhardt (1991), Statistical Analysis of Reliability
    and Life-Testing Models, ch. 9.
    """
    t, T, trunc = _check(times, end)
    n = len(t)
    pts = t if trunc == "time" else t[:-1]
    s = float(2 * np.log(T / pts).sum())
    dfree = 2 * len(pts)
    if s <= 0:
        raise InsufficientData("all fix times coincide with the end of observation")
    beta = n / (s / 2)
    pg, pd_ = float(stats.chi2.sf(s, dfree)), float(stats.chi2.cdf(s, dfree))
    return TrendTest("power_law", s, dfree, pg, pd_, float(2 * min(pg, pd_)), n,
                     f"{trunc}-truncated", T, _direction(pg, pd_, alpha), alpha,
                     "MIL-HDBK-189 chi-square test of beta = 1", beta_hat=float(beta))


def trend_tests(times: Any, end: float | None = None, *, alpha: float = 0.05,
                require: Literal["both", "either"] = "both") -> TrendTests:
    """Run both trend tests and decide whether there is evidence of growth.

    ``require="both"`` (default, conservative) asks both tests to show growth
    at ``alpha``; ``"either"`` accepts one. Disagreement is always reported.

    References
    ----------
    Cox & Lewis (1966); MIL-HDBK-189C (2011).
    """
    la = laplace_test(times, end, alpha=alpha)
    pl = power_law_trend_test(times, end, alpha=alpha)
    agree = la.direction == pl.direction
    ok = [x.direction == "growth" for x in (la, pl)]
    evidence = all(ok) if require == "both" else any(ok)
    if agree:
        msg = f"both tests: {la.direction} (alpha={alpha})"
    else:
        msg = (f"the tests disagree: Laplace says {la.direction} (p_growth={la.p_growth:.3g}), "
               f"the power-law test says {pl.direction} (p_growth={pl.p_growth:.3g}); the "
               "Laplace test is sensitive to a rate falling late, the power-law test assumes "
               "a power-law shape")
    rule = f"growth requires {'both tests' if require == 'both' else 'either test'} at alpha={alpha}"
    return TrendTests(la, pl, agree, evidence, rule, msg)
