"""Compare two samples as distributions (and two proportions), with effect sizes.

Per-commit or per-defect quantities before and after a date are compared as
whole distributions, never by mean +- sd: Mann-Whitney U, two-sample
Kolmogorov-Smirnov and the k-sample Anderson-Darling test with a permutation
p-value; the Hodges-Lehmann shift with its distribution-free (Moses) interval;
Cliff's delta with a bootstrap interval; the difference of medians with a
bootstrap interval (or, for small samples, a conservative interval from the
two order-statistic intervals). Two proportions: difference with Newcombe's
hybrid score interval, Fisher's exact test and Pearson's chi-square.

Sign convention: every effect is ``b - a`` (e.g. after minus before).

Caveats: ``too_few_observations`` when a side has fewer than
:data:`MIN_PER_SIDE` values; ``absence_of_evidence`` when no test rejects;
``negligible_effect`` when a test rejects but ``|delta| < 0.147``.

References
----------
Hollander, M., Wolfe, D. A. & Chicken, E. (2014). Nonparametric Statistical
Methods, 3rd ed., sec. 4.2-4.3 (Hodges-Lehmann estimator, Moses interval).
Cliff, N. (1993). Dominance statistics. Psychological Bulletin 114:494-509.
Romano, J., Kromrey, J. D., Coraggio, J. & Skowronek, J. (2006). Appropriate
statistics for ordinal level data. Annual meeting of the Florida Association
of Institutional Research (|delta| thresholds 0.147, 0.33, 0.474).
Scholz, F. W. & Stephens, M. A. (1987). K-sample Anderson-Darling tests. JASA
82:918-924.
DeLong, E. R., DeLong, D. M. & Clarke-Pearson, D. L. (1988). Comparing the areas
under two or more correlated ROC curves. Biometrics 44:837-845 (placement variance,
used for Cliff's delta from :data:`DELONG_FROM` values a side: an analytic interval
does not move with the seed, where a bootstrap one moved in its third digit at 2,000
resamples; above :data:`LARGE_SAMPLE` the Anderson-Darling p-value is also
asymptotic and the median difference gets the order-statistic interval).
Newcombe, R. G. (1998). Interval estimation for the difference between
independent proportions. Statistics in Medicine 17:873-890 (method 10).
"""
from __future__ import annotations

import warnings

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from procmetrics.analyse.measures import intervals as iv
from procmetrics.analyse.result import Caveat, Estimate, caveat, to_plain
from procmetrics.errors import InsufficientData
from procmetrics.resampling import data_keyed_rng

MIN_PER_SIDE = 10
NEGLIGIBLE, SMALL, MEDIUM = 0.147, 0.33, 0.474
_EXACT_MAX_CELLS = 10_000
_MATERIALISE_MAX = 4_000_000
#: above this many values on the smaller side, resampling gives way to asymptotics
LARGE_SAMPLE = 5_000
#: from this many values a side Cliff's delta gets the DeLong interval (analytic, the
#: same for every seed); below it a percentile bootstrap
DELONG_FROM = 200


@dataclass(frozen=True)
class HypothesisTest:
    """One test: statistic, p-value and how it was computed."""

    name: str
    statistic: float
    p_value: float
    method: str
    note: str = ""

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class DistributionComparison:
    """Two samples compared as distributions (effects are ``b - a``)."""

    quantity: str
    label_a: str
    label_b: str
    n_a: int
    n_b: int
    median_a: Estimate
    median_b: Estimate
    median_difference: Estimate
    hodges_lehmann: Estimate
    cliffs_delta: Estimate
    magnitude: str
    tests: tuple[HypothesisTest, ...]
    caveats: tuple[Caveat, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class ProportionComparison:
    """Two proportions compared (difference is ``p_b - p_a``)."""

    quantity: str
    label_a: str
    label_b: str
    p_a: Estimate
    p_b: Estimate
    difference: Estimate
    tests: tuple[HypothesisTest, ...]
    caveats: tuple[Caveat, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def mwu_null_cdf(m: int, n: int) -> np.ndarray:
    """Exact null distribution of the Mann-Whitney U (no ties): ``P(U <= u)``, u=0..mn.

    Counts arrangements with the recursion f(m, n, u) = f(m-1, n, u-n) + f(m, n-1, u)
    (Mann & Whitney 1947).
    """
    # f[j] holds counts for the current (i, j) over u; build row by row
    prev = [np.ones(1)]  # i = 0: for each j, U = 0 only
    for j in range(1, n + 1):
        prev.append(np.ones(1))
    for i in range(1, m + 1):
        cur = [np.ones(1)]  # j = 0
        for j in range(1, n + 1):
            a = prev[j]                 # f(i-1, j, u - j): shifted by j
            b = cur[j - 1]              # f(i, j-1, u)
            out = np.zeros(i * j + 1)
            out[j:j + len(a)] += a
            out[:len(b)] += b
            cur.append(out)
        prev = cur
    f = prev[n]
    return np.cumsum(f) / f.sum()


def _moses_k(m: int, n: int, alpha: float) -> int:
    """Largest k with P(U <= k - 1) <= alpha/2 (exact for small samples, normal otherwise)."""
    if m * n <= _EXACT_MAX_CELLS:
        cdf = mwu_null_cdf(m, n)
        ok = np.flatnonzero(cdf <= alpha / 2)
        return int(ok[-1]) + 1 if len(ok) else 0
    z = stats.norm.ppf(1 - alpha / 2)
    return int(np.floor(m * n / 2 - z * np.sqrt(m * n * (m + n + 1) / 12.0)))


def _whole_numbers(x: np.ndarray) -> bool:
    """Finite whole numbers small enough that float arithmetic on them is exact."""
    return bool(len(x)) and bool(np.all(np.isfinite(x))) and bool(
        np.all(np.abs(x) < 2.0 ** 50)) and bool(np.all(x == np.floor(x)))


def _kth_difference(a: np.ndarray, b: np.ndarray, k: int) -> float:
    """k-th smallest (1-based) of all differences b_j - a_i without materialising them."""
    a = np.sort(a)
    if _whole_numbers(a) and _whole_numbers(b):
        # whole numbers (lines changed, reviewers): the differences are whole numbers
        # too, so a bisection over the integers ends in ~log2(range) counts and lands
        # on the difference itself (the same value the general search snaps to)
        ilo, ihi = int(b.min() - a.max()), int(b.max() - a.min())
        while ilo < ihi:
            mid = (ilo + ihi) // 2
            if int((len(a) - np.searchsorted(a, b - mid, side="left")).sum()) >= k:
                ihi = mid
            else:
                ilo = mid + 1
        return float(ilo)
    lo, hi = float(b.min() - a.max()), float(b.max() - a.min())
    for _ in range(200):
        mid = (lo + hi) / 2
        cnt = int((len(a) - np.searchsorted(a, b - mid, side="left")).sum())
        if cnt >= k:
            hi = mid
        else:
            lo = mid
        if hi - lo <= 1e-12 * max(1.0, abs(hi)):
            break
    # Snap the bisection bound to the actual difference just below it, so the result
    # is one of the b_j - a_i (no rounding residue such as 4.5e-13 for a zero shift).
    tol = 1e-9 * max(1.0, abs(hi), abs(lo))
    cands: set[float] = set()
    for bound in (lo - tol, hi + tol):
        # per b_j, the differences nearest the bound from either side
        idx = np.searchsorted(a, b - bound, side="left")
        for shift in (-1, 0):
            j = idx + shift
            ok = (j >= 0) & (j < len(a))
            cands.update((b[ok] - a[j[ok]]).tolist())
    for c in sorted(x for x in cands if lo - tol <= x <= hi + tol):
        # c is the k-th smallest when at least k differences are <= c
        if int((len(a) - np.searchsorted(a, b - c, side="left")).sum()) >= k:
            return float(c)
    return hi


def hodges_lehmann(a: np.ndarray, b: np.ndarray, alpha: float = 0.05
                   ) -> tuple[float, float | None, float | None]:
    """Hodges-Lehmann shift ``median(b_j - a_i)`` with the Moses interval."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    m, n = len(a), len(b)
    N = m * n
    k = _moses_k(m, n, alpha)
    if N <= _MATERIALISE_MAX:
        d = np.sort(np.subtract.outer(b, a).ravel())
        est = float(np.median(d))
        lo = float(d[k - 1]) if k >= 1 else None
        hi = float(d[N - k]) if k >= 1 else None
        return est, lo, hi
    mid = (N + 1) / 2
    est = (_kth_difference(a, b, int(np.floor(mid))) + _kth_difference(a, b, int(np.ceil(mid)))) / 2
    if k < 1:
        return est, None, None
    return est, _kth_difference(a, b, k), _kth_difference(a, b, N - k + 1)


def cliffs_delta(a: np.ndarray, b: np.ndarray) -> float:
    """``P(B > A) - P(B < A)`` from the Mann-Whitney U of b (ties count half)."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    ranks = stats.rankdata(np.concatenate([a, b]))
    u_b = ranks[len(a):].sum() - len(b) * (len(b) + 1) / 2
    return float(2 * u_b / (len(a) * len(b)) - 1)


def cliffs_delta_delong(a: np.ndarray, b: np.ndarray, alpha: float = 0.05
                        ) -> tuple[float, float]:
    """Normal-approximation interval for Cliff's delta from DeLong's placement variance.

    Cliff's delta is ``2 AUC - 1`` with ``AUC = P(B > A) + P(B = A) / 2``; DeLong et al.
    (1988) estimate ``Var(AUC)`` from the placement values of each sample
    (``O(n log n)``); the interval is clipped to [-1, 1].
    """
    a, b = np.sort(np.asarray(a, float)), np.sort(np.asarray(b, float))
    m, n = len(a), len(b)
    lo_a, hi_a = np.searchsorted(a, b, "left"), np.searchsorted(a, b, "right")
    v_b = (lo_a + 0.5 * (hi_a - lo_a)) / m          # placement of each b among a
    lo_b, hi_b = np.searchsorted(b, a, "left"), np.searchsorted(b, a, "right")
    v_a = ((n - hi_b) + 0.5 * (hi_b - lo_b)) / n    # placement of each a among b
    var_auc = v_b.var(ddof=1) / n + v_a.var(ddof=1) / m
    delta = 2 * v_b.mean() - 1
    half = stats.norm.ppf(1 - alpha / 2) * 2 * np.sqrt(var_auc)
    return max(-1.0, float(delta - half)), min(1.0, float(delta + half))


def magnitude(delta: float) -> str:
    """Romano et al. (2006) label for |Cliff's delta|."""
    d = abs(delta)
    return ("negligible" if d < NEGLIGIBLE else "small" if d < SMALL
            else "medium" if d < MEDIUM else "large")


def compare_distributions(a, b, *, quantity: str = "value", label_a: str = "before",
                          label_b: str = "after", alpha: float = 0.05,
                          n_resamples: int = 999, n_boot: int = 1000,
                          ) -> DistributionComparison:
    """Compare two samples as distributions (see the module docstring).

    Parameters
    ----------
    a, b : the two samples (NaN dropped).
    alpha : 1 - interval level and test level.
    n_resamples : permutations for the Anderson-Darling p-value.
    n_boot : bootstrap replicates for Cliff's delta and the median difference.

    Every resampling (permutations, bootstraps) draws from one stream keyed by the
    two samples (:func:`procmetrics.resampling.data_keyed_rng`): the same samples
    give the same p-value and intervals in the CLI, the report and every rerun.

    Raises
    ------
    InsufficientData
        When a side has fewer than 2 values.

    References
    ----------
    Hollander, Wolfe & Chicken (2014); Cliff (1993); Romano et al. (2006);
    Scholz & Stephens (1987).
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    a, b = a[np.isfinite(a)], b[np.isfinite(b)]
    m, n = len(a), len(b)
    if m < 2 or n < 2:
        raise InsufficientData(f"{quantity}: {m} values {label_a} and {n} {label_b}; need >= 2 each")
    if np.unique(np.concatenate([a, b])).size < 2:
        # every value equal (e.g. no review trailer at all): the rank tests are undefined
        raise InsufficientData(f"{quantity}: all {m + n} values are equal ({a[0]:g}); "
                               "no distribution to compare")
    level = 1 - alpha
    rng = data_keyed_rng(a, [np.nan], b, purpose="two-sample comparison")
    mw = stats.mannwhitneyu(b, a, alternative="two-sided")
    ks = stats.ks_2samp(a, b)
    large = min(m, n) > LARGE_SAMPLE
    if large:
        # asymptotic p (Scholz & Stephens' table; scipy caps it to [0.001, 0.25]): with
        # thousands per side the permutation p-value costs minutes and says the same
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            ad = stats.anderson_ksamp([a, b], variant="midrank")
        ad_method = ("k-sample Anderson-Darling, asymptotic p (table; capped to "
                     "[0.001, 0.25]: 0.001 means p <= 0.001)")
    else:
        ad = stats.anderson_ksamp([a, b], variant="midrank", method=stats.PermutationMethod(
            n_resamples=n_resamples, rng=rng))
        ad_method = f"k-sample Anderson-Darling, permutation p ({n_resamples} resamples)"
    tests = (
        HypothesisTest("mann_whitney_u", float(mw.statistic), float(mw.pvalue),
                       "Mann-Whitney U (scipy, two-sided; U of b)"),
        HypothesisTest("kolmogorov_smirnov", float(ks.statistic), float(ks.pvalue),
                       "two-sample Kolmogorov-Smirnov (scipy)"),
        HypothesisTest("anderson_darling", float(ad.statistic), float(ad.pvalue), ad_method),
    )
    ma, la, ha = iv.median_ci(a, alpha)
    mb, lb, hb = iv.median_ci(b, alpha)
    med_a = Estimate("median", ma, _n(la), _n(ha), level, iv.ORDER_STATISTIC, m)
    med_b = Estimate("median", mb, _n(lb), _n(hb), level, iv.ORDER_STATISTIC, n)
    if 20 <= min(m, n) and not large:
        bs = np.array([np.median(rng.choice(b, n)) - np.median(rng.choice(a, m))
                       for _ in range(n_boot)])
        dlo, dhi = np.quantile(bs, [alpha / 2, 1 - alpha / 2])
        mdiff = Estimate("median_difference", mb - ma, float(dlo), float(dhi), level,
                         f"bootstrap percentile ({n_boot} replicates)", m + n)
    else:
        _, dlo, dhi, lev = iv.median_difference_ci(a, b, level)
        mdiff = Estimate("median_difference", mb - ma, _n(dlo), _n(dhi), level,
                         "conservative: difference of order-statistic intervals at "
                         f"level {lev:.4f} each ({'large' if large else 'small'} sample)",
                         m + n)
    hl, hlo, hhi = hodges_lehmann(a, b, alpha)
    hle = Estimate("hodges_lehmann_shift", hl, hlo, hhi, level,
                   "Hodges-Lehmann with Moses distribution-free interval", m + n)
    delta = cliffs_delta(a, b)
    if min(m, n) >= DELONG_FROM:
        clo, chi = cliffs_delta_delong(a, b, alpha)
        cd_method = ("Cliff's delta, DeLong variance (normal approximation; at least "
                     f"{DELONG_FROM} values a side)")
    else:
        boot = np.array([cliffs_delta(rng.choice(a, m), rng.choice(b, n))
                         for _ in range(n_boot)])
        clo, chi = np.quantile(boot, [alpha / 2, 1 - alpha / 2])
        cd_method = f"Cliff's delta, bootstrap percentile ({n_boot} replicates)"
    cd = Estimate("cliffs_delta", delta, float(clo), float(chi), level, cd_method, m + n)
    mag = magnitude(delta)
    cavs = _caveats(quantity, m, n, label_a, label_b, tests, delta, mag, alpha)
    return DistributionComparison(quantity, label_a, label_b, m, n, med_a, med_b, mdiff, hle,
                                  cd, mag, tests, tuple(cavs))


def _n(x) -> float | None:
    return None if x is None or not np.isfinite(x) else float(x)


def _caveats(quantity, m, n, label_a, label_b, tests, delta, mag, alpha) -> list[Caveat]:
    cavs = []
    if min(m, n) < MIN_PER_SIDE:
        cavs.append(caveat("too_few_observations",
                           f"{quantity}: n={m} {label_a}, n={n} {label_b} "
                           f"(< {MIN_PER_SIDE} on a side)"))
    significant = any(t.p_value < alpha for t in tests)
    if not significant:
        cavs.append(caveat("absence_of_evidence",
                           f"{quantity}: no test rejects at {alpha}; this is no evidence of a "
                           "change, not evidence that nothing changed", "info"))
    elif mag == "negligible":
        cavs.append(caveat("negligible_effect",
                           f"{quantity}: statistically significant but |Cliff's delta| = "
                           f"{abs(delta):.3f} < {NEGLIGIBLE} (negligible)", "info"))
    return cavs


def newcombe_interval(x_a: int, n_a: int, x_b: int, n_b: int, alpha: float = 0.05
                      ) -> tuple[float, float, float]:
    """Difference ``x_b/n_b - x_a/n_a`` with Newcombe's hybrid score interval (method 10)."""
    pa, pb = x_a / n_a, x_b / n_b
    (la,), (ua,) = iv.wilson(np.array([x_a]), np.array([n_a]), alpha)
    (lb,), (ub,) = iv.wilson(np.array([x_b]), np.array([n_b]), alpha)
    d = pb - pa
    lo = d - np.sqrt((pb - lb) ** 2 + (ua - pa) ** 2)
    hi = d + np.sqrt((ub - pb) ** 2 + (pa - la) ** 2)
    return float(d), float(lo), float(hi)


def compare_proportions(x_a: int, n_a: int, x_b: int, n_b: int, *, quantity: str = "share",
                        label_a: str = "before", label_b: str = "after",
                        alpha: float = 0.05) -> ProportionComparison:
    """Compare two proportions: Newcombe interval, Fisher exact and Pearson chi-square.

    References
    ----------
    Newcombe (1998) method 10; Fisher's exact test (scipy); Pearson chi-square
    without continuity correction (scipy ``chi2_contingency(correction=False)``).
    """
    if n_a < 1 or n_b < 1:
        raise InsufficientData(f"{quantity}: n={n_a} {label_a}, n={n_b} {label_b}")
    level = 1 - alpha
    (la,), (ua,) = iv.wilson(np.array([x_a]), np.array([n_a]), alpha)
    (lb,), (ub,) = iv.wilson(np.array([x_b]), np.array([n_b]), alpha)
    pa = Estimate("proportion", x_a / n_a, float(la), float(ua), level, iv.WILSON, n_a)
    pb = Estimate("proportion", x_b / n_b, float(lb), float(ub), level, iv.WILSON, n_b)
    d, lo, hi = newcombe_interval(x_a, n_a, x_b, n_b, alpha)
    diff = Estimate("difference", d, lo, hi, level, "Newcombe hybrid score (method 10)",
                    n_a + n_b)
    table = np.array([[x_a, n_a - x_a], [x_b, n_b - x_b]])
    _, p_f = stats.fisher_exact(table)
    tests = [HypothesisTest("fisher_exact", float("nan"), float(p_f),
                            "Fisher's exact test (scipy, two-sided)")]
    cavs: list[Caveat] = []
    if (table.sum(axis=0) > 0).all():
        chi2, p_c, _, expected = stats.chi2_contingency(table, correction=False)
        note = "" if expected.min() >= 5 else "an expected count < 5: rely on Fisher's test"
        tests.append(HypothesisTest("chi_square", float(chi2), float(p_c),
                                    "Pearson chi-square, no continuity correction", note))
    if min(n_a, n_b) < MIN_PER_SIDE:
        cavs.append(caveat("too_few_observations",
                           f"{quantity}: n={n_a} {label_a}, n={n_b} {label_b}"))
    if all(t.p_value >= alpha for t in tests):
        cavs.append(caveat("absence_of_evidence",
                           f"{quantity}: no test rejects at {alpha}; no evidence of a change, "
                           "not evidence that nothing changed", "info"))
    return ProportionComparison(quantity, label_a, label_b, pa, pb, diff, tuple(tests),
                                tuple(cavs))
