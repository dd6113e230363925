"""Small interval helpers shared by the period metrics and the comparisons.

References
----------
Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
inference. JASA 22:209-212.
Garwood, F. (1936). Fiducial limits for the Poisson distribution. Biometrika 28:437-442.
Conover, W. J. (1999). Practical Nonparametric Statistics, 3rd ed., sec. 3.2
(confidence interval for a quantile from order statistics).
"""
from __future__ import annotations

import numpy as np
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

WILSON = "Wilson score"
POISSON_EXACT = "exact Poisson (Garwood)"
ORDER_STATISTIC = "order-statistic (binomial, distribution-free)"


def wilson(count: np.ndarray, nobs: np.ndarray, alpha: float = 0.05
           ) -> tuple[np.ndarray, np.ndarray]:
    """Wilson score interval for ``count / nobs``; NaN where ``nobs`` is 0."""
    count = np.asarray(count, dtype=float)
    nobs = np.asarray(nobs, dtype=float)
    lo = np.full(count.shape, np.nan)
    hi = np.full(count.shape, np.nan)
    ok = nobs > 0
    if ok.any():
        lo[ok], hi[ok] = proportion_confint(count[ok], nobs[ok], alpha=alpha,
                                            method="wilson")
        # The closed form leaves rounding residue (e.g. 8.7e-19) at 0 successes and
        # just below 1 at all successes; the Wilson bounds are exactly 0 and 1 there.
        lo[ok & (count == 0)] = 0.0
        hi[ok & (count == nobs)] = 1.0
    return lo, hi


def poisson_exact(count: np.ndarray, alpha: float = 0.05) -> tuple[np.ndarray, np.ndarray]:
    """Exact (Garwood) interval for a Poisson mean given an observed count."""
    k = np.asarray(count, dtype=float)
    lo = np.where(k > 0, stats.chi2.ppf(alpha / 2, 2 * k) / 2, 0.0)
    hi = stats.chi2.ppf(1 - alpha / 2, 2 * k + 2) / 2
    return lo, hi


def median_ci(values: np.ndarray, alpha: float = 0.05) -> tuple[float, float, float]:
    """Sample median with its distribution-free order-statistic interval.

    The interval ``[x_(r), x_(n-r+1)]`` has coverage >= 1 - alpha for a continuous
    distribution (conservative with ties); NaN when n is too small for the level.
    """
    x = np.sort(np.asarray(values, dtype=float))
    x = x[~np.isnan(x)]
    n = len(x)
    if n == 0:
        return np.nan, np.nan, np.nan
    med = float(np.median(x))
    r = int(order_statistic_rank(np.array([n]), alpha)[0])
    if r < 1:
        return med, np.nan, np.nan
    return med, float(x[r - 1]), float(x[n - r])


def order_statistic_rank(n: np.ndarray, alpha: float = 0.05) -> np.ndarray:
    """The 1-based rank ``r`` of the lower end ``x_(r)`` of the median's interval for
    each sample size in ``n`` (the upper end is ``x_(n-r+1)``); below 1 when ``n`` is
    too small for the level: the largest ``r`` with ``P(Bin(n, 1/2) <= r - 1) <= alpha/2``."""
    n = np.asarray(n, dtype=np.int64)
    r = stats.binom.ppf(alpha / 2, n, 0.5).astype(np.int64)
    r = np.where(stats.binom.cdf(r, n, 0.5) > alpha / 2, r - 1, r)
    return r + 1


def grouped_median_ci(codes: np.ndarray, values: np.ndarray, n_groups: int,
                      alpha: float = 0.05) -> dict[str, np.ndarray]:
    """:func:`median_ci` of many groups at once: one sort instead of one call per group.

    ``codes`` (0..n_groups-1) names each value's group; NaN values are left out.
    Returns arrays of length ``n_groups``: ``n`` (values kept), ``sum``, ``median``,
    ``low``, ``high`` (NaN where a group has no value, or too few for the level; the
    sum of an empty group is 0). The same figures as ``median_ci`` on each group.
    """
    codes = np.asarray(codes, dtype=np.int64)
    values = np.asarray(values, dtype=float)
    keep = ~np.isnan(values)
    codes, values = codes[keep], values[keep]
    order = np.lexsort((values, codes))
    x = values[order]
    n = np.bincount(codes, minlength=n_groups)
    total = np.bincount(codes, weights=values, minlength=n_groups)
    start = np.cumsum(n) - n
    med = np.full(n_groups, np.nan)
    lo = np.full(n_groups, np.nan)
    hi = np.full(n_groups, np.nan)
    has = n > 0
    odd = has & (n % 2 == 1)
    even = has & (n % 2 == 0)
    med[odd] = x[(start + n // 2)[odd]]
    # as np.median: the mean of the two middle values
    med[even] = (x[(start + n // 2 - 1)[even]] + x[(start + n // 2)[even]]) / 2
    sizes = np.unique(n[has])
    ranks = np.zeros(n_groups, dtype=np.int64)
    if len(sizes):
        ranks[has] = order_statistic_rank(sizes, alpha)[np.searchsorted(sizes, n[has])]
    ok = has & (ranks >= 1)
    lo[ok] = x[(start + ranks - 1)[ok]]
    hi[ok] = x[(start + n - ranks)[ok]]
    return {"n": n, "sum": total, "median": med, "low": lo, "high": hi}


def median_difference_ci(a: np.ndarray, b: np.ndarray, level: float = 0.95
                         ) -> tuple[float, float, float, float]:
    """``median(b) - median(a)`` with a conservative distribution-free interval.

    Each median gets its order-statistic interval at level ``sqrt(level)``; both
    cover together with probability >= ``level`` (independent samples), so the
    difference of their ends covers the difference of medians with >= ``level``.
    Returns ``(difference, low, high, per_sample_level)``; NaN ends when a sample is
    too small for its interval.
    """
    lev = float(np.sqrt(level))
    ma, la, ha = median_ci(a, 1 - lev)
    mb, lb, hb = median_ci(b, 1 - lev)
    return mb - ma, lb - ha, hb - la, lev

