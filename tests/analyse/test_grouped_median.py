"""intervals.grouped_median_ci: the churn median and its order-statistic interval of
every subsystem-period in one pass.

Oracle: numpy's median of each group, and the order-statistic interval of Conover
(1999, sec. 3.2) found by brute force from scipy's binomial distribution (the largest
rank r with P(Bin(n, 1/2) <= r - 1) <= alpha / 2; the interval is [x_(r), x_(n-r+1)])."""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from procmetrics.analyse.measures.intervals import grouped_median_ci, median_ci


def _brute(x, alpha):
    x = np.sort(x[~np.isnan(x)])
    n = len(x)
    if n == 0:
        return 0, 0.0, np.nan, np.nan, np.nan
    rs = [r for r in range(1, n + 1) if stats.binom.cdf(r - 1, n, 0.5) <= alpha / 2]
    lo, hi = (x[rs[-1] - 1], x[n - rs[-1]]) if rs else (np.nan, np.nan)
    return n, x.sum(), np.median(x), lo, hi


@pytest.mark.parametrize("alpha", [0.05, 0.1])
def test_grouped_median_ci_equals_each_group_on_its_own(alpha):
    rng = np.random.default_rng(7)
    sizes = [0, 1, 2, 3, 5, 6, 8, 9, 17, 40, 101, 250]
    codes = np.concatenate([np.full(k, g) for g, k in enumerate(sizes)])
    values = rng.integers(0, 400, len(codes)).astype(float)   # churn: whole lines, ties
    values[rng.random(len(values)) < 0.1] = np.nan             # unknown churn
    values[codes == 2] = np.nan                                 # a group with no value
    perm = rng.permutation(len(codes))                          # groups interleaved
    got = grouped_median_ci(codes[perm], values[perm], len(sizes), alpha)
    for g in range(len(sizes)):
        n, total, med, lo, hi = _brute(values[codes == g], alpha)
        assert got["n"][g] == n and got["sum"][g] == total
        np.testing.assert_array_equal([got["median"][g], got["low"][g], got["high"][g]],
                                      [med, lo, hi])
        if n:   # the one-sample function gives the same figures, bit for bit
            assert median_ci(values[codes == g], alpha) == pytest.approx(
                (med, lo, hi), rel=0, abs=0, nan_ok=True)
    # the interval needs n >= 6 at the 5% level (P(Bin(5, 1/2) = 0) = 1/32 > 0.025)
    assert np.isnan(got["low"][4]) == (alpha == 0.05)
