"""Restricted mean lifetime: lifelines as the oracle for the estimate, the plug-in
variance without censoring, and the censored variance against its simulated spread."""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from lifelines import KaplanMeierFitter
from lifelines.utils import restricted_mean_survival_time

from procmetrics.analyse.lifetimes.rmst import restricted_mean, rmst_difference


@pytest.mark.parametrize("tau", [20.0, 60.0, 400.0])
def test_estimate_matches_lifelines_with_censoring_and_ties(tau):
    rng = np.random.default_rng(3)
    t = np.ceil(rng.exponential(50, 250))           # whole days: ties
    e = rng.random(250) < 0.7
    kmf = KaplanMeierFitter().fit(t, e)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")             # lifelines' quadrature notes
        ref = restricted_mean_survival_time(kmf, t=tau)
    assert restricted_mean(t, e, horizon=tau).value == pytest.approx(ref, rel=1e-9)


def test_variance_without_censoring_is_the_plug_in_variance_over_n():
    # with every lifetime observed the Kaplan-Meier curve is the empirical one and the
    # Greenwood-type variance is var(min(T, tau)) / n with divisor n (Klein &
    # Moeschberger 2003, sec. 4.5); numpy computes the right-hand side directly
    rng = np.random.default_rng(4)
    t = rng.lognormal(4, 1, 500)
    r = restricted_mean(t, horizon=90.0)
    clipped = np.minimum(t, 90.0)
    assert r.value == pytest.approx(clipped.mean(), rel=1e-12)
    assert r.variance == pytest.approx(clipped.var() / len(t), rel=1e-9)


def test_censored_variance_matches_the_spread_of_the_estimate():
    # simulation with known truth: 400 samples of 300 exponential lifetimes (mean 50)
    # under uniform censoring; the mean estimated variance should match the
    # variance of the 400 estimates within Monte-Carlo error (about +-15% here)
    rng = np.random.default_rng(5)
    est, var = [], []
    for _ in range(400):
        life = rng.exponential(50, 300)
        cens = rng.uniform(0, 150, 300)
        r = restricted_mean(np.minimum(life, cens), life <= cens, horizon=80.0)
        est.append(r.value)
        var.append(r.variance)
    truth = 50 * (1 - np.exp(-80 / 50))             # RMST of an exponential up to 80
    assert np.mean(est) == pytest.approx(truth, rel=0.01)
    assert np.mean(var) == pytest.approx(np.var(est, ddof=1), rel=0.15)


def test_difference_sign_and_interval():
    rng = np.random.default_rng(6)
    before, after = rng.exponential(80, 400), rng.exponential(40, 400)
    d = rmst_difference(before, after, horizon=200.0)
    assert d.low > 0 and d.value > 0 and d.unit == "days"    # shorter after: positive
    flip = rmst_difference(after, before, horizon=200.0)
    assert flip.value == pytest.approx(-d.value) and flip.high < 0
