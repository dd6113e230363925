"""Distribution and proportion comparisons against scipy/statsmodels and published examples."""
from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.proportion import confint_proportions_2indep

from procmetrics.analyse.change.twosample import (_kth_difference, _moses_k, cliffs_delta,
                                           compare_distributions, compare_proportions,
                                           hodges_lehmann, mwu_null_cdf, newcombe_interval)
from procmetrics.resampling import data_keyed_rng

# Hollander & Wolfe (1973), Nonparametric Statistical Methods, p. 69: permeability
# constants of the human chorioamnion (also the example data of R's wilcox.test).
HW_X = [0.80, 0.83, 1.89, 1.04, 1.45, 1.38, 1.91, 1.64, 0.73, 1.46]
HW_Y = [1.15, 0.88, 0.90, 0.74, 1.21]


def test_tests_match_scipy():
    rng = np.random.default_rng(1)
    a, b = rng.lognormal(0, 1, 40), rng.lognormal(0.4, 1, 35)
    r = compare_distributions(a, b, n_resamples=299, n_boot=200)
    t = {x.name: x for x in r.tests}
    # oracles: scipy.stats mannwhitneyu, ks_2samp and anderson_ksamp on the same data
    mw = stats.mannwhitneyu(b, a, alternative="two-sided")
    ks = stats.ks_2samp(a, b)
    # the permutations draw from the stream keyed by the two samples (documented in
    # compare_distributions); scipy given that same stream must give the same p-value
    keyed = data_keyed_rng(a, [np.nan], b, purpose="two-sample comparison")
    ad = stats.anderson_ksamp([a, b], variant="midrank", method=stats.PermutationMethod(
        n_resamples=299, rng=keyed))
    assert (t["mann_whitney_u"].statistic, t["mann_whitney_u"].p_value) == (mw.statistic, mw.pvalue)
    assert (t["kolmogorov_smirnov"].statistic, t["kolmogorov_smirnov"].p_value) == \
        (ks.statistic, ks.pvalue)
    # same stream -> same permutation p-value (scipy oracle)
    assert t["anderson_darling"].p_value == pytest.approx(ad.pvalue)
    assert (r.n_a, r.n_b) == (40, 35)


def test_hodges_lehmann_hollander_wolfe_example():
    est, lo, hi = hodges_lehmann(HW_Y, HW_X)
    # R: wilcox.test(x, y, conf.int = TRUE) "difference in location 0.305" (recalled from
    # memory); here checked against the brute-force median of all 50 differences
    assert est == pytest.approx(0.305, abs=1e-12)
    d = np.sort(np.subtract.outer(np.array(HW_X), np.array(HW_Y)).ravel())
    assert est == pytest.approx(np.median(d))
    k = _moses_k(5, 10, 0.05)
    assert (lo, hi) == pytest.approx((d[k - 1], d[len(d) - k]))


def test_moses_k_from_brute_force_null_distribution():
    # exact null distribution of U by enumerating all C(15, 5) arrangements
    m, n = 5, 10
    us = []
    for comb in itertools.combinations(range(m + n), m):
        a = np.array(comb)
        b = np.setdiff1d(np.arange(m + n), a)
        us.append(int((b[:, None] > a[None, :]).sum()))
    us = np.array(us)
    brute = np.array([(us <= u).mean() for u in range(m * n + 1)])
    np.testing.assert_allclose(mwu_null_cdf(m, n), brute, atol=1e-12)
    k = _moses_k(m, n, 0.05)
    assert brute[k - 1] <= 0.025 < brute[k]


def test_large_sample_hodges_lehmann_without_materialising():
    rng = np.random.default_rng(2)
    a, b = rng.normal(0, 1, 300), rng.normal(0.5, 1, 250)
    d = np.sort(np.subtract.outer(b, a).ravel())
    for k in (1, 100, 37_500, 75_000):
        assert _kth_difference(a, b, k) == d[k - 1]   # exactly one of the differences
    # heavily tied integer data (as in "reviewers per commit"): the shift is exactly 0
    ta, tb = rng.integers(0, 3, 2000).astype(float), rng.integers(0, 3, 2500).astype(float)
    td = np.sort(np.subtract.outer(tb, ta).ravel())
    for k in (1, 2_500_000, 5_000_000):
        assert _kth_difference(ta, tb, k) == td[k - 1]


def test_cliffs_delta_brute_force_and_magnitude_caveats():
    rng = np.random.default_rng(3)
    a, b = rng.integers(0, 5, 30), rng.integers(0, 6, 25)
    gt = (b[:, None] > a[None, :]).sum()
    lt = (b[:, None] < a[None, :]).sum()
    assert cliffs_delta(a, b) == pytest.approx((gt - lt) / (len(a) * len(b)))
    # large samples, tiny shift: significant but negligible (Romano et al. 2006 threshold)
    big_a, big_b = rng.normal(0, 1, 20000), rng.normal(0.08, 1, 20000)
    r = compare_distributions(big_a, big_b, n_resamples=99, n_boot=50)
    codes = {c.code for c in r.caveats}
    assert r.magnitude == "negligible" and "negligible_effect" in codes


def test_no_difference_and_small_samples():
    rng = np.random.default_rng(4)
    r = compare_distributions(rng.normal(0, 1, 8), rng.normal(0, 1, 9), n_resamples=99,
                              n_boot=100)
    codes = {c.code for c in r.caveats}
    assert {"absence_of_evidence", "too_few_observations"} <= codes
    assert "order-statistic" in r.median_difference.method


def test_newcombe_worked_example():
    # Newcombe (1998) Statistics in Medicine 17:873, example 56/70 vs 48/80: difference 0.2,
    # hybrid score interval 0.0524 to 0.3339 (recalled from memory; statsmodels agrees).
    d, lo, hi = newcombe_interval(48, 80, 56, 70)
    assert d == pytest.approx(0.2)
    assert (lo, hi) == pytest.approx((0.0524, 0.3339), abs=5e-5)
    sm = confint_proportions_2indep(56, 70, 48, 80, method="newcomb", compare="diff")
    assert (lo, hi) == pytest.approx(sm, abs=1e-12)
    r = compare_proportions(48, 80, 56, 70)
    t = {x.name: x for x in r.tests}
    assert t["fisher_exact"].p_value == pytest.approx(
        stats.fisher_exact([[48, 32], [56, 14]])[1])
    assert t["chi_square"].p_value == pytest.approx(
        stats.chi2_contingency([[48, 32], [56, 14]], correction=False)[1])
    assert r.p_a.n == 80 and r.p_b.n == 70


def test_proportions_without_difference():
    r = compare_proportions(30, 100, 31, 100)
    assert "absence_of_evidence" in {c.code for c in r.caveats}


def test_delong_interval_for_cliffs_delta_against_brute_force_and_bootstrap():
    # DeLong, DeLong & Clarke-Pearson (1988): Var(AUC) from placement values. Oracle 1:
    # the placements computed by brute force over all pairs (tied data). Oracle 2: the
    # bootstrap percentile interval on the same data agrees to within 0.03.
    from scipy import stats as st

    from procmetrics.analyse.change.twosample import cliffs_delta_delong
    rng = np.random.default_rng(8)
    a, b = rng.integers(0, 12, 60).astype(float), rng.integers(2, 14, 50).astype(float)
    gt = (b[:, None] > a[None, :]) + 0.5 * (b[:, None] == a[None, :])
    v_b, v_a = gt.mean(axis=1), gt.mean(axis=0)
    var = v_b.var(ddof=1) / len(b) + v_a.var(ddof=1) / len(a)
    d = 2 * gt.mean() - 1
    half = st.norm.ppf(0.975) * 2 * np.sqrt(var)
    lo, hi = cliffs_delta_delong(a, b)
    assert (lo, hi) == pytest.approx((d - half, d + half), abs=1e-12)
    assert d == pytest.approx(cliffs_delta(a, b), abs=1e-12)
    x, y = rng.lognormal(0, 1, 400), rng.lognormal(0.3, 1, 300)
    boot = [cliffs_delta(rng.choice(x, 400), rng.choice(y, 300)) for _ in range(2000)]
    blo, bhi = np.quantile(boot, [0.025, 0.975])
    lo, hi = cliffs_delta_delong(x, y)
    assert abs(lo - blo) < 0.03 and abs(hi - bhi) < 0.03


def test_large_samples_switch_to_asymptotic_methods_and_say_so():
    from procmetrics.analyse.change.twosample import LARGE_SAMPLE, compare_distributions
    rng = np.random.default_rng(9)
    a = rng.poisson(10, LARGE_SAMPLE + 1).astype(float)
    b = rng.poisson(10.4, LARGE_SAMPLE + 2).astype(float)
    r = compare_distributions(a, b)
    ad = next(t for t in r.tests if t.name == "anderson_darling")
    assert "asymptotic" in ad.method and "DeLong" in r.cliffs_delta.method
    assert r.cliffs_delta.low < r.cliffs_delta.value < r.cliffs_delta.high
    # the same data below the threshold use permutations and the bootstrap
    small = compare_distributions(a[:300], b[:300], n_resamples=99, n_boot=99)
    assert "permutation" in next(t for t in small.tests if t.name == "anderson_darling").method


def test_median_intervals_against_scipy_quantile_test_and_coverage():
    # Oracle: scipy.stats.quantile_test(...).confidence_interval() is the same
    # distribution-free order-statistic interval for the median (Conover 1999, 3.2).
    from scipy import stats as st

    from procmetrics.analyse.measures.intervals import median_ci, median_difference_ci
    rng = np.random.default_rng(12)
    for n in (15, 40, 201):
        x = rng.lognormal(3, 1, n)
        _, lo, hi = median_ci(x, 0.05)
        ref = st.quantile_test(x, q=np.median(x), p=0.5).confidence_interval(0.95)
        assert (lo, hi) == pytest.approx((ref.low, ref.high))
    # simulation with a known truth: the conservative difference interval covers the
    # true difference of medians (ln 2 * (80 - 50) for exponentials) in >= 95% of draws
    true = np.log(2) * (80 - 50)
    hits = 0
    for _ in range(300):
        a, b = rng.exponential(50, 60), rng.exponential(80, 60)
        d, lo, hi, lev = median_difference_ci(a, b, 0.95)
        hits += lo <= true <= hi
    assert lev == pytest.approx(np.sqrt(0.95)) and hits / 300 >= 0.95


def test_resampled_figures_depend_on_the_data_only():
    """The permutation p-value and the bootstrap intervals are a function of the two
    samples: repeated calls (any seed, any call order) print the same strings, and the
    p-value lies within Monte-Carlo error of scipy's on an independent stream."""
    rng = np.random.default_rng(21)
    a, b = rng.lognormal(0, 1, 60), rng.lognormal(0.3, 1, 70)
    first = compare_distributions(a, b, n_resamples=299, n_boot=300)
    np.random.default_rng(99).random(10)        # unrelated draws in between change nothing
    again = compare_distributions(a, b, n_resamples=299, n_boot=300)
    assert first.tests == again.tests
    for f in ("median_difference", "cliffs_delta"):
        x, y = getattr(first, f), getattr(again, f)
        assert (x.low, x.high) == (y.low, y.high), f
    ad = next(t for t in first.tests if t.name == "anderson_darling").p_value
    other = stats.anderson_ksamp([a, b], variant="midrank", method=stats.PermutationMethod(
        n_resamples=299, rng=np.random.default_rng(1))).pvalue
    assert abs(ad - other) < 4 * np.sqrt(0.25 / 299) * np.sqrt(2)   # two independent MC errors


def test_kth_difference_of_whole_numbers_is_the_materialised_one() -> None:
    """The integer bisection (lines changed, reviewers) gives the k-th smallest of the
    materialised, sorted differences b_j - a_i (oracle), at the ends and in between,
    with ties and negative values; non-integer data take the general search."""
    import numpy as np

    from procmetrics.analyse.change.twosample import _kth_difference

    rng = np.random.default_rng(20261202)
    for _ in range(200):
        m, n = int(rng.integers(1, 50)), int(rng.integers(1, 50))
        a = rng.integers(-20, 200, m).astype(float)
        b = rng.integers(-20, 400, n).astype(float)
        d = np.sort(np.subtract.outer(b, a).ravel())
        for k in {1, m * n, int(rng.integers(1, m * n + 1))}:
            assert _kth_difference(a, b, k) == d[k - 1]
    a, b = rng.random(40) * 10, rng.random(30) * 10 + 0.5
    d = np.sort(np.subtract.outer(b, a).ravel())
    assert _kth_difference(a, b, 600) == d[599]
