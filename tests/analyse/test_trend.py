"""GLM trends and shared diagnostics against published examples and oracles."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.discrete._diagnostics_count import test_poisson_dispersion as sm_dispersion
from statsmodels.discrete.discrete_model import Poisson

from procmetrics.analyse import diagnostics as dg
from procmetrics.analyse.glmfit import estimate_nb_alpha, fit_model
from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics
from procmetrics.analyse.change.trend import fit_trend, predict_trend
from tests.analyse.series_data import simulated_commits


def test_poisson_glm_dobson_example():
    # Dobson (1990) An Introduction to Generalized Linear Models, randomized controlled
    # trial counts (also the statsmodels GLM documentation example). Deviance 5.1291 is
    # recalled from memory and agrees with statsmodels' own fit (5.129141077).
    counts = np.array([18, 17, 15, 20, 10, 20, 25, 13, 12], dtype=float)
    outcome, treatment = np.tile([0, 1, 2], 3), np.repeat([0, 1, 2], 3)
    X = np.column_stack([np.ones(9), outcome == 1, outcome == 2, treatment == 1,
                         treatment == 2]).astype(float)
    f = fit_model(counts, X, kind="count", hac="never")
    assert f.model.startswith("Poisson GLM")
    assert f.deviance == pytest.approx(5.1291, abs=1e-4)
    b = f.params["estimate"].to_numpy()
    # The Poisson MLE reproduces the marginal totals in this balanced design, so the
    # coefficients have closed forms: outcome-1 mean (18+20+25)/3 = 21, and the outcome
    # effects log(40/63), log(47/63); statsmodels docs print 3.0445, -0.4543, -0.2930.
    assert b[0] == pytest.approx(np.log(21.0), abs=1e-7)
    assert b[1] == pytest.approx(np.log(40 / 63), abs=1e-7)
    assert b[2] == pytest.approx(np.log(47 / 63), abs=1e-7)
    assert b[3] == pytest.approx(0.0, abs=1e-8) and b[4] == pytest.approx(0.0, abs=1e-8)
    # R's ?glm example on the same Dobson data prints the intercept SE as 1.709e-01
    # (recalled from memory); statsmodels' GLM Poisson gives 0.17089865.
    assert f.params["std_error"].iloc[0] == pytest.approx(0.1708987, abs=1e-6)


def test_ols_longley_nist_certified_values():
    # NIST StRD Longley certified values (recalled from memory; statsmodels reproduces them).
    d = sm.datasets.longley.load_pandas()
    f = fit_model(d.endog.to_numpy(), sm.add_constant(d.exog).to_numpy(), kind="continuous",
                  hac="never")
    cert = [-3482258.63459582, 15.0618722713733, -0.358191792925910e-01,
            -2.02022980381683, -1.03322686717359, -0.511041056535807e-01, 1829.15146461355]
    cert_se = [890420.383607373, 84.9149257747669, 0.334910077722432e-01,
               0.488399681651699, 0.214274163161675, 0.226073200069370, 455.478499142212]
    np.testing.assert_allclose(f.params["estimate"], cert, rtol=1e-8)
    np.testing.assert_allclose(f.params["std_error"], cert_se, rtol=1e-8)
    diag = {d.name: d for d in f.diagnostics}
    # Longley is the textbook ill-conditioned design: the check must say so
    assert diag["condition_number"].verdict == "fail"
    assert diag["durbin_watson"].verdict != "n/a" and diag["breusch_pagan"].verdict != "n/a"
    assert diag["normality"].method == "Shapiro-Wilk W"


def test_negative_binomial_alpha_randhie():
    # NB2 on the RAND HIE data: alpha = exp(lnalpha) = 1.292953339909746 with 95% interval
    # 1.256989..1.329947 (Stata / R MASS glm.nb, as stored in statsmodels' test suite,
    # discrete/tests/results/results_discrete.py, RandHIE.negativebinomial_nb2_bfgs).
    data = sm.datasets.randhie.load_pandas()
    X = sm.add_constant(data.exog, prepend=False).to_numpy()
    a = estimate_nb_alpha(data.endog.to_numpy(float), X, None)
    assert a.value == pytest.approx(1.292953339909746, rel=1e-4)
    assert (a.low, a.high) == pytest.approx((1.256989, 1.329947), rel=1e-4)


def _ct_data():
    # statsmodels' test suite, discrete/tests/test_diagnostic.py TestPoissonDiagnosticClass
    rs = np.random.RandomState(987125643)
    x = np.repeat(np.arange(2), np.array([40, 60]))
    exog = (x[:, None] == np.arange(2)).astype(np.float64)
    y = rs.poisson(np.exp(exog @ np.array([0.1, 0.3])))
    return y, exog


def test_cameron_trivedi_against_reference_and_hand_computation():
    y, exog = _ct_data()
    res = Poisson(y, exog).fit(disp=0)
    mu = res.predict()
    _, t2, _ = dg.cameron_trivedi_stat(y, mu, "nb2")
    # reference number of the statsmodels test suite for "CT nb2"
    assert t2 == pytest.approx(0.1307899995877, rel=1e-8)
    # NB1 by hand: OLS of z on a constant = one-sample t statistic of z
    z = ((y - mu) ** 2 - y) / mu
    t1_hand = z.mean() / (z.std(ddof=1) / np.sqrt(len(z)))
    _, t1, _ = dg.cameron_trivedi_stat(y, mu, "nb1")
    assert t1 == pytest.approx(t1_hand, rel=1e-10)
    # Documented discrepancy: statsmodels 0.15 computes its non-robust "CT nb1" row with the
    # NB2 regressor (mu), so that row equals the NB2 one and differs from the hand value.
    sm_rows = sm_dispersion(res)
    assert sm_rows.statistic[4] == pytest.approx(sm_rows.statistic[3], rel=1e-12)
    assert sm_rows.statistic[4] != pytest.approx(t1_hand, rel=1e-3)


def _table(rng, p_review, n=4000, days=4 * 365):
    c, t, _ = simulated_commits(rng, n=n, start="2020-01-01", days=days, p_review=p_review)
    return compute_period_metrics(c, t, config=MetricConfig(period="month")).table


def test_binomial_trend_recovers_known_slope():
    rng = np.random.default_rng(11)
    origin = pd.Timestamp("2020-01-01", tz="UTC")
    slope = 0.5  # log-odds per year (simulation truth)

    def p(d):
        t = (d - origin) / pd.Timedelta(days=365.25)
        return 1 / (1 + np.exp(-(-1.0 + slope * t)))
    tr = fit_trend(_table(rng, p), "review_coverage")
    assert tr.model.startswith("binomial GLM")
    assert tr.slope.low < slope < tr.slope.high
    assert tr.fitted["extrapolated"].eq(False).all()
    assert {d.name for d in tr.diagnostics} >= {"dispersion", "ljung_box", "durbin_watson",
                                                "breusch_pagan", "design_rank",
                                                "condition_number", "cooks_distance"}


def test_overdispersed_proportions_switch_to_quasi_binomial():
    rng = np.random.default_rng(5)
    months = pd.date_range("2020-01-01", periods=48, freq="MS", tz="UTC")
    level = dict(zip(months, rng.beta(8, 12, len(months))))   # extra-binomial variation

    def p(d):
        return np.array([level[pd.Timestamp(x.year, x.month, 1, tz="UTC")] for x in d])
    tr = fit_trend(_table(rng, p), "review_coverage")
    disp = next(d for d in tr.diagnostics if d.name == "dispersion")
    assert disp.value > 1.5 and "quasi-binomial" in tr.model


def test_overdispersed_counts_use_negative_binomial_with_estimated_alpha():
    rng = np.random.default_rng(9)
    n_periods = 60
    alpha = 0.3  # simulation truth, NB2 Var = mu + alpha mu^2
    mu = 40.0
    lam = rng.gamma(1 / alpha, mu * alpha, n_periods)
    y = rng.poisson(lam).astype(float)
    X = np.column_stack([np.ones(n_periods), np.linspace(-1, 1, n_periods)])
    f = fit_model(y, X, kind="count")
    assert "negative binomial" in f.model
    assert f.nb_alpha is not None and f.nb_alpha.value != pytest.approx(1.0, abs=0.2)
    assert f.nb_alpha.low < alpha < f.nb_alpha.high


def test_autocorrelated_residuals_get_hac_errors():
    rng = np.random.default_rng(2)
    n = 80
    e = np.zeros(n)
    for i in range(1, n):
        e[i] = 0.8 * e[i - 1] + rng.normal()
    X = np.column_stack([np.ones(n), np.arange(n) / 12.0])
    f = fit_model(10 + e, X, kind="continuous")
    assert next(d for d in f.diagnostics if d.name == "ljung_box").verdict == "warn"
    assert f.cov_type.startswith("HAC")


def test_prediction_outside_window_is_flagged():
    rng = np.random.default_rng(4)
    tr = fit_trend(_table(rng, lambda d: 0.4, n=1500, days=2 * 365), "review_coverage")
    pred = predict_trend(tr, ["2021-01-01", "2030-01-01"])
    assert list(pred.table["extrapolated"]) == [False, True]
    assert [c.code for c in pred.caveats] == ["extrapolation"]


def test_normality_note_at_large_n():
    rng = np.random.default_rng(0)
    d = dg.normality(rng.standard_t(5, 6000))
    assert d.method == "Jarque-Bera" and "large n" in d.note


def test_cooks_distance_screening():
    d = dg.cooks_distance(np.array([0.01] * 6 + [0.6, 1.5]))   # 4/n = 0.5
    assert d.verdict == "warn" and d.note.startswith("2 of 8") and d.value == 1.5


def test_quasi_binomial_widens_binomial_errors_by_sqrt_dispersion():
    # Quasi-likelihood: the quasi-binomial covariance is the binomial one times the
    # Pearson X2/df dispersion (McCullagh & Nelder 1989, Generalized Linear Models,
    # 2nd ed., section 4.5). statsmodels' own scale="X2" gets this wrong for a
    # two-column endog (it came out 0.015 instead of 3.0 on a real history), so the
    # oracle here is the unscaled statsmodels fit times sqrt(Pearson X2/df).
    rng = np.random.default_rng(11)
    trials = rng.integers(60, 600, size=18)
    p = 1 / (1 + np.exp(-(-4 + 0.3 * np.arange(18) + rng.normal(0, 0.4, 18))))
    y = rng.binomial(trials, p)
    X = sm.add_constant(np.arange(18, dtype=float))
    ref = sm.GLM(np.column_stack([y, trials - y]), X, family=sm.families.Binomial()).fit()
    phi = ref.pearson_chi2 / ref.df_resid
    assert phi > 1.5
    fit = fit_model(y, X, kind="proportion", trials=trials, hac="never")
    assert "quasi-binomial" in fit.model
    np.testing.assert_allclose(fit.params["std_error"], ref.bse * np.sqrt(phi), rtol=1e-6)
    assert (fit.params["std_error"].to_numpy() > ref.bse).all()
