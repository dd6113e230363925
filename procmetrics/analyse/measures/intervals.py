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
    # largest r with P(Bin(n, 1/2) <= r - 1) <= alpha / 2
    r = int(stats.binom.ppf(alpha / 2, n, 0.5))
    if stats.binom.cdf(r, n, 0.5) > alpha / 2:
        r -= 1
    r += 1  # 1-based order statistic
    if r < 1:
        return med, np.nan, np.nan
    return med, float(x[r - 1]), float(x[n - r])


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

