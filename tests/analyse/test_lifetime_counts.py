"""Risk sets and event counts computed by sorting equal the definitions, exactly.

The Kaplan-Meier risk set, the empirical-quantile support and the log-rank
components were computed with one pass over every lifetime per distinct time
(quadratic: a fifth of a 300,000-commit report). They now come from one sort and
binary searches. Oracles: the definitions themselves (``#{t_i >= s}``, the
textbook per-time log-rank sums, Klein & Moeschberger 2003, sec. 7.3, computed
in time order as before), compared with ``numpy.testing.assert_array_equal``
(number for number), and lifelines for the test statistic.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from procmetrics.analyse.lifetimes.comparisons import (_components, _prepare,
                                                       stratified_logrank)
from procmetrics.analyse.lifetimes.estimators import kaplan_meier
from procmetrics.analyse.lifetimes.quantiles import forward_at_risk, forward_at_risk_sorted


def _loop_components(d: pd.DataFrame, levels: list[str]):
    """The per-time loop (the definition), kept here as the oracle."""
    k = len(levels)
    gi = pd.Categorical(d["g"], categories=levels).codes
    t, e = d["t"].to_numpy(), d["e"].to_numpy()
    O, E, V = np.zeros(k), np.zeros(k), np.zeros((k, k))
    for s in np.unique(t[e]):
        n_j = np.bincount(gi[t >= s], minlength=k).astype(float)
        d_j = np.bincount(gi[(t == s) & e], minlength=k).astype(float)
        n, dd = n_j.sum(), d_j.sum()
        O += d_j
        E += dd * n_j / n
        if n > 1:
            f = dd * (n - dd) / (n - 1)
            p = n_j / n
            V += f * (np.diag(p) - np.outer(p, p))
    return O - E, V, O, E


def _sample(seed: int, n: int, k: int, censor: float):
    rng = np.random.default_rng(seed)
    t = np.round(rng.gamma(0.7, 90.0, n))          # whole days: many ties
    e = rng.random(n) > censor
    g = rng.choice([f"g{i}" for i in range(k)], n)
    return t, e, g


@pytest.mark.parametrize("seed,n,k,censor", [(1, 400, 2, 0.0), (2, 2500, 3, 0.3),
                                              (3, 60, 4, 0.5), (4, 5, 2, 0.0)])
def test_logrank_components_equal_the_per_time_sums(seed, n, k, censor):
    t, e, g = _sample(seed, n, k, censor)
    d = _prepare(t, g, e)
    levels = sorted(d["g"].unique())
    for got, want in zip(_components(d, levels), _loop_components(d, levels)):
        np.testing.assert_array_equal(got, want)


def test_logrank_statistic_matches_lifelines():
    from lifelines.statistics import multivariate_logrank_test

    t, e, g = _sample(5, 1500, 3, 0.2)
    ours = stratified_logrank(t, g, observed=e)
    ref = multivariate_logrank_test(t, g, e)
    assert ours.statistic == pytest.approx(ref.test_statistic, rel=1e-9)
    assert ours.p_value == pytest.approx(ref.p_value, rel=1e-6)


@pytest.mark.parametrize("censor", [0.0, 0.4])
def test_kaplan_meier_counts_equal_the_definition(censor):
    t, e, _ = _sample(6, 3000, 2, censor)
    tab = kaplan_meier(t, e, min_at_risk=1).table
    tab = tab[tab["events"] > 0]
    times = np.unique(t[e])
    np.testing.assert_array_equal(tab["time"].to_numpy(), times)
    np.testing.assert_array_equal(tab["at_risk"].to_numpy(),
                                  [(t >= s).sum() for s in times])
    np.testing.assert_array_equal(tab["events"].to_numpy(),
                                  [((t == s) & e).sum() for s in times])


def test_kaplan_meier_survival_matches_lifelines():
    from lifelines import KaplanMeierFitter

    t, e, _ = _sample(7, 2000, 2, 0.3)
    tab = kaplan_meier(t, e, min_at_risk=1).table.set_index("time")
    ref = KaplanMeierFitter().fit(t, e).survival_function_["KM_estimate"]
    common = ref.index.intersection(tab.index)
    assert len(common) > 50
    np.testing.assert_allclose(tab.loc[common, "survival"], ref.loc[common], rtol=1e-12)


def test_forward_risk_sets_by_search_equal_the_count():
    x = np.sort(np.array([3.0, 1.0, 1.0, 7.5, np.nan, 0.0, 7.5, 2.0]))
    ts = np.array([-1.0, 0.0, 1.0, 1.5, 7.5, 8.0, np.nan])
    np.testing.assert_array_equal(forward_at_risk_sorted(x, ts),
                                  [forward_at_risk(x, s) for s in ts])
