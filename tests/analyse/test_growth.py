"""NHPP growth models: published NTDS fit, independent optimisation, refusals."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, stats

from procmetrics.analyse.growth.analysis import FixTimes, analyse_growth, select_fix_times
from procmetrics.analyse.growth.checks import prequential_u, predictions
from procmetrics.analyse.growth.nhpp import (
    fit_goel_okumoto, fit_power_law, go_loglik, pl_loglik, simulate_nhpp,
)

# NTDS data (Jelinski & Moranda 1972), recalled from memory; see test_trendtests.
NTDS = np.cumsum([9, 12, 11, 4, 7, 2, 5, 8, 5, 7, 1, 6, 1, 9, 4, 1, 3, 3, 6, 1, 11, 33,
                  7, 91, 2, 1]).astype(float)
O = pd.Timestamp("2021-01-01", tz="UTC")


def _fix_times(t: np.ndarray, end: float) -> FixTimes:
    ev = pd.DataFrame({"fix_hash": [f"h{i}" for i in range(len(t))],
                       "fix_date": O + pd.to_timedelta(t, unit="D"), "time_days": t,
                       "n_defects": 1})
    return FixTimes(ev, O, O + pd.Timedelta(days=end), end, "test", 0)


def test_goel_okumoto_ntds_published():
    f = fit_goel_okumoto(NTDS)          # failure-truncated at the 26th failure
    # Goel & Okumoto (1979), IEEE Trans. Reliability R-28: a = 33.99, b = 0.00579
    # (recalled from memory)
    assert f.value("a") == pytest.approx(33.99, abs=0.01)
    assert f.value("b") == pytest.approx(0.00579, abs=1e-5)
    assert f.truncation == "failure-truncated"


def test_goel_okumoto_mle_independent_optimiser():
    # independent: Nelder-Mead on the NHPP log-likelihood written out here
    t, T = NTDS, 260.0

    def nll(p):
        a, b = np.exp(p)
        return -(len(t) * np.log(a * b) - b * t.sum() - a * (1 - np.exp(-b * T)))
    r = optimize.minimize(nll, np.log([30, 0.01]), method="Nelder-Mead",
                          options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 5000})
    f = fit_goel_okumoto(t, T)
    assert f.value("a") == pytest.approx(np.exp(r.x[0]), rel=1e-5)
    assert f.value("b") == pytest.approx(np.exp(r.x[1]), rel=1e-5)
    assert f.loglik == pytest.approx(-r.fun, abs=1e-8)


def test_profile_interval_ends_are_at_the_chi2_cutoff():
    f = fit_goel_okumoto(NTDS)
    b = f.params[1]
    T, n = NTDS[-1], len(NTDS)
    cut = f.loglik - stats.chi2.ppf(0.95, 1) / 2
    for bb in (b.low, b.high):
        # profile over a by a bounded scalar search (independent of the closed form)
        r = optimize.minimize_scalar(lambda la: -go_loglik(np.exp(la), bb, NTDS, T),
                                     bounds=(np.log(n / 2), np.log(1e6)), method="bounded",
                                     options={"xatol": 1e-12})
        assert -r.fun == pytest.approx(cut, abs=1e-4)
    assert b.low < b.value < b.high


def test_power_law_mle_closed_form_vs_optimiser():
    rng = np.random.default_rng(1)
    t = simulate_nhpp("power_law", (2.0, 0.6), 200.0, rng)
    f = fit_power_law(t, 200.0)
    r = optimize.minimize(lambda p: -pl_loglik(np.exp(p[0]), np.exp(p[1]), t, 200.0),
                          np.log([1.0, 1.0]), method="Nelder-Mead",
                          options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 5000})
    assert f.value("beta") == pytest.approx(np.exp(r.x[1]), rel=1e-4)
    lo, hi = f.params[1].low, f.params[1].high
    assert lo < 0.6 < hi


def test_goel_okumoto_recovers_simulated_truth():
    # known truth a=200, b=0.01 on (0, 300]; mean of 10 estimates within 10 %
    est = [fit_goel_okumoto(simulate_nhpp("goel_okumoto", (200.0, 0.01), 300.0,
                                          np.random.default_rng(s)), 300.0).theta
           for s in range(10)]
    a, b = np.mean(est, axis=0)
    assert a == pytest.approx(200, rel=0.1) and b == pytest.approx(0.01, rel=0.1)


def test_growth_on_ntds_fits_go_refuses_power_law():
    res = analyse_growth(_fix_times(NTDS, 260.0), n_boot=60, rng=np.random.default_rng(0))
    go, pl = res.model("goel_okumoto"), res.model("power_law")
    assert go.fitted and not pl.fitted and "power_law" in pl.refused_reason
    assert {d.name for d in go.diagnostics} >= {"cramer_von_mises", "kolmogorov_smirnov",
                                               "u_plot_distance", "holdout_count"}
    preds = {p.name: p for p in go.predictions}
    for p in preds.values():
        assert p.estimate is None or p.estimate.extrapolated
    codes = {c.code for c in res.caveats}
    assert {"model_refused", "not_identifiable", "extrapolation"} <= codes
    assert set(res.curve["model"]) == {"observed", "goel_okumoto"}
    json.dumps(res.to_dict())


def test_constant_rate_gets_no_growth_model():
    rng = np.random.default_rng(3)
    t = np.sort(rng.uniform(0, 500, 80))
    res = analyse_growth(_fix_times(t, 500.0), n_boot=20)
    assert res.refused and all(not m.fitted for m in res.models)
    assert any(c.code == "model_refused" for c in res.caveats)
    assert res.model("goel_okumoto").predictions == ()


def test_residual_refused_when_interval_reaches_zero():
    # a flattened curve: nearly all expected fixes already seen
    t = simulate_nhpp("goel_okumoto", (40.0, 0.05), 400.0, np.random.default_rng(5))
    f = fit_goel_okumoto(t, 400.0)
    preds, _ = predictions(f, t, n_boot=30, rng=np.random.default_rng(1))
    res = {p.name: p for p in preds}["expected_residual_fixes"]
    assert res.estimate is None and "no defects remain" in res.refused_reason


def test_prequential_u_roughly_uniform_for_the_true_model():
    t = simulate_nhpp("goel_okumoto", (150.0, 0.01), 250.0, np.random.default_rng(2))
    u, failed = prequential_u("goel_okumoto", t)
    assert len(u) > 30 and ((u >= 0) & (u <= 1)).all()
    assert stats.kstest(u, "uniform").pvalue > 0.01


def test_select_fix_times_scopes():
    t0 = pd.Timestamp("2022-01-01", tz="UTC")
    dd = pd.DataFrame({
        "introducer_hash": ["i1", "i2", "i3", "i4"], "fix_hash": ["f1", "f1", "f2", "f3"],
        "intro_date": [t0, t0 + pd.Timedelta(days=1), t0 + pd.Timedelta(days=50),
                       t0 + pd.Timedelta(days=5)],
        "fix_date": [t0 + pd.Timedelta(days=d) for d in (10, 10, 60, 70)],
        "subsystems": ["fs", "fs;net", "net", "mm"], "negative": False})
    ft = select_fix_times(dd, end=t0 + pd.Timedelta(days=100))
    assert list(ft.events["fix_hash"]) == ["f1", "f2", "f3"]      # f1 counted once
    assert list(ft.events["n_defects"]) == [2, 1, 1] and ft.end_days == 100
    assert list(select_fix_times(dd, end=t0 + pd.Timedelta(days=100),
                                 subsystem="net").events["fix_hash"]) == ["f1", "f2"]
    tags = pd.DataFrame({"name": ["v1"], "commit_hash": ["c"], "tag_date": [t0 + pd.Timedelta(days=20)]})
    cont = pd.DataFrame({"tag": "v1", "commit_hash": ["i1", "i4"], "contains": True})
    ft = select_fix_times(dd, end=t0 + pd.Timedelta(days=100), after_tag="v1", tags=tags,
                          tag_containment=cont)
    # i1 was fixed before the tag; i4 shipped in v1 and fixed 50 days after it
    assert list(ft.events["fix_hash"]) == ["f3"] and ft.events["time_days"].iloc[0] == 50
    ft2 = select_fix_times(dd, end=t0 + pd.Timedelta(days=100), after_tag="v1", tags=tags)
    assert any(c.code == "heuristic_classification" for c in ft2.caveats)


def test_go_total_unbounded_when_a_constant_rate_fits_as_well():
    # known truth: a homogeneous Poisson process (30 uniform times on (0, 100]); the
    # Goel-Okumoto MLE exists (mean time below T/2) but the likelihood-ratio statistic
    # against the constant-rate limit, computed here directly, is below chi2(1, 0.95)
    from scipy import stats

    from procmetrics.analyse.growth.checks import predictions
    from procmetrics.analyse.growth.nhpp import go_residual_profile

    rng = np.random.default_rng(2)
    T = 100.0
    t = np.sort(rng.uniform(0, T, 30))
    assert t.mean() < T / 2
    fit = fit_goel_okumoto(t, T)
    n = len(t)
    lr = 2 * (fit.loglik - (n * np.log(n / T) - n))
    assert lr < stats.chi2.ppf(0.95, 1)
    a, b = fit.params
    assert a.high is None and b.low is None and a.low is not None
    assert go_residual_profile(fit, t)[2] is None
    preds, _ = predictions(fit, t, n_boot=20, rng=np.random.default_rng(0))
    res = next(p for p in preds if p.name == "expected_residual_fixes")
    assert res.estimate is None and "do not bound" in res.refused_reason


def test_batching_merges_patch_series_and_flags_them():
    t0 = pd.Timestamp("2022-01-01", tz="UTC")
    hours = [24, 24.2, 24.5, 100, 200, 200.1, 300, 400, 500, 600, 700]
    dd = pd.DataFrame({
        "introducer_hash": [f"i{k}" for k in range(len(hours))],
        "fix_hash": [f"f{k}" for k in range(len(hours))],
        "intro_date": [t0] * len(hours),
        "fix_date": [t0 + pd.Timedelta(hours=h) for h in hours],
        "subsystems": "", "negative": False})
    ft = select_fix_times(dd, end=t0 + pd.Timedelta(days=40), origin=t0)
    assert len(ft.events) == 11
    # 3 of 10 gaps are under an hour: flagged
    assert any(c.code == "tuning_sensitive" and "3 of 10 gaps" in c.message for c in ft.caveats)
    fb = select_fix_times(dd, end=t0 + pd.Timedelta(days=40), origin=t0, batch_hours=1)
    assert list(fb.events["fix_hash"]) == ["f0", "f3", "f4", "f6", "f7", "f8", "f9", "f10"]
    assert list(fb.events["n_defects"]) == [3, 1, 2, 1, 1, 1, 1, 1]
    assert fb.events["n_defects"].sum() == len(dd)
    assert not any("gaps" in c.message for c in fb.caveats)


def test_fits_without_intervals_give_the_same_estimates() -> None:
    """Bootstrap and prequential refits skip the profile-likelihood searches: the point
    estimates and log-likelihood equal those of the full fit (which stays the oracle),
    and no interval is claimed."""
    import numpy as np

    from procmetrics.analyse.growth.nhpp import FITTERS, simulate_nhpp

    rng = np.random.default_rng(20261202)
    for model, theta in (("goel_okumoto", (120.0, 0.004)), ("power_law", (0.9, 0.7))):
        t = simulate_nhpp(model, theta, 1000.0, rng)
        full = FITTERS[model](t, 1000.0)
        bare = FITTERS[model](t, 1000.0, intervals=False)
        assert bare.theta == full.theta and bare.loglik == full.loglik
        assert all(p.low is None and p.high is None for p in bare.params)
        assert any(p.low is not None for p in full.params)
