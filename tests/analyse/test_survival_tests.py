"""Log-rank, stratified log-rank and Cox regression against published fits and oracles."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from lifelines.datasets import load_leukemia, load_rossi
from lifelines import CoxPHFitter
from lifelines.statistics import multivariate_logrank_test, proportional_hazard_test
from statsmodels.duration.survfunc import survdiff

from procmetrics.analyse.lifetimes.cox import (
    categorical_groups, fit_cox, fit_lifetime_cox, lifetime_design,
)
from procmetrics.analyse.lifetimes.comparisons import logrank, stratified_logrank
from procmetrics.errors import InsufficientData

# Freireich et al. (1963), as in Klein & Moeschberger (2003) sec. 1.2.
SIXMP_T = [6, 6, 6, 6, 7, 9, 10, 10, 11, 13, 16, 17, 19, 20, 22, 23, 25, 32, 32, 34, 35]
SIXMP_E = [1, 1, 1, 0, 1, 0, 1, 0, 0, 1, 1, 0, 0, 0, 1, 1, 0, 0, 0, 0, 0]
PLACEBO_T = [1, 1, 2, 2, 3, 4, 4, 5, 5, 8, 8, 8, 8, 11, 11, 12, 12, 15, 17, 22, 23]


def test_logrank_freireich_published():
    t = SIXMP_T + PLACEBO_T
    e = SIXMP_E + [1] * 21
    g = ["6-MP"] * 21 + ["placebo"] * 21
    r = logrank(t, g, e)
    # published log-rank chi-square 16.79 on 1 df (recalled from memory; also the
    # value lifelines' logrank_test gives)
    assert r.statistic == pytest.approx(16.79, abs=0.01)
    assert r.df == 1 and r.p_value < 1e-4
    # our own computation (stratified_logrank with one stratum) agrees
    assert stratified_logrank(t, g, observed=e).statistic == pytest.approx(r.statistic, rel=1e-10)
    grp = r.groups.set_index("group")
    assert grp.loc["placebo", "observed"] == 21 and grp.loc["6-MP", "observed"] == 9


def test_lifelines_leukemia_dataset_is_the_same_data():
    # lifelines ships the same trial (Kleinbaum's "anderson" file; Rx=0 is 6-MP)
    df = load_leukemia()
    six = df[df["Rx"] == 0].sort_values("t")
    assert sorted(six["t"]) == sorted(SIXMP_T)
    assert int(six["status"].sum()) == sum(SIXMP_E)


def test_multigroup_logrank_matches_own_and_lifelines():
    rng = np.random.default_rng(7)
    t = np.round(rng.exponential(10, 150))
    g = rng.integers(0, 3, 150)
    e = rng.random(150) < 0.8
    r = logrank(t, g, e)
    ref = multivariate_logrank_test(t, g, e)     # oracle: lifelines k-group log-rank
    assert r.statistic == pytest.approx(ref.test_statistic, rel=1e-10) and r.df == 2
    assert stratified_logrank(t, g, observed=e).statistic == pytest.approx(r.statistic, rel=1e-8)


def test_stratified_logrank_matches_statsmodels():
    # oracle: statsmodels.duration.survfunc.survdiff with strata
    rng = np.random.default_rng(1)
    n = 200
    t = np.round(rng.exponential(10, n)) + 1
    e = rng.random(n) < 0.8
    g = rng.integers(0, 3, n)
    s = rng.integers(0, 2, n)
    t = t + (g == 1) * 2
    ours = stratified_logrank(t, g, s, e)
    stat, p = survdiff(t, e.astype(int), g, strata=s)
    assert ours.statistic == pytest.approx(stat, rel=1e-10)
    assert ours.p_value == pytest.approx(p, rel=1e-8)
    assert ours.name == "stratified log-rank" and ours.df == 2


def test_cox_rossi_published_efron_fit():
    rossi = load_rossi()
    r = fit_cox(rossi, "week", "arrest")
    c = r.summary.set_index("term")["coef"]
    # Fox & Weisberg, "Cox Proportional-Hazards Regression for Survival Data in R"
    # (appendix to An R Companion to Applied Regression), Efron ties; recalled from memory
    assert c["fin"] == pytest.approx(-0.379, abs=1e-3)
    assert c["age"] == pytest.approx(-0.0574, abs=1e-3)
    assert c["prio"] == pytest.approx(0.0915, abs=1e-3)
    assert c["mar"] == pytest.approx(-0.434, abs=1e-3)
    assert r.ties == "efron"
    # standard errors and hazard-ratio intervals: oracle lifelines' CoxPHFitter summary
    full = CoxPHFitter().fit(rossi, "week", "arrest").summary
    s = r.summary.set_index("term")
    for term in full.index:
        assert s.loc[term, "se"] == pytest.approx(full.loc[term, "se(coef)"], rel=1e-6)
        assert s.loc[term, "hr_low"] == pytest.approx(
            full.loc[term, "exp(coef) lower 95%"], rel=1e-6)
        assert s.loc[term, "hr_high"] == pytest.approx(
            full.loc[term, "exp(coef) upper 95%"], rel=1e-6)
    # The same appendix reports non-proportional hazards for age and wexp (recalled from
    # memory). Oracle: lifelines' own Schoenfeld test (rank transform) on the same fit.
    ref = proportional_hazard_test(CoxPHFitter().fit(rossi, "week", "arrest"), rossi,
                                   time_transform="rank").summary
    ph = r.ph_tests.set_index("term")
    for term in ref.index:
        assert ph.loc[term, "p"] == pytest.approx(ref.loc[term, "p"], rel=1e-8)
    failing = {t for t, p in ph["p"].items() if p * len(ph) < 0.05}   # Bonferroni
    assert failing == {"age", "wexp"} and not r.ph_holds
    # wexp is binary, so it is offered as a stratum; oracle: lifelines strata=["wexp"]
    assert r.strata == ("wexp",)
    sref = CoxPHFitter().fit(rossi, "week", "arrest", strata=["wexp"])
    ss = r.stratified_summary.set_index("term")
    assert "wexp" not in ss.index
    for term in sref.summary.index:
        assert ss.loc[term, "coef"] == pytest.approx(sref.summary.loc[term, "coef"], rel=1e-6)
        assert ss.loc[term, "se"] == pytest.approx(sref.summary.loc[term, "se(coef)"], rel=1e-6)
    sph = proportional_hazard_test(sref, rossi, time_transform="rank").summary
    assert r.stratified_ph_tests.set_index("term").loc["age", "p"] == pytest.approx(
        sph.loc["age", "p"], rel=1e-8)
    # stratified on wexp, age's Schoenfeld p (about 0.03) passes Bonferroni over 6 terms,
    # so the stratified model is the recommended fallback; the AFT fit is kept beside it
    assert r.stratified_ph_holds is True
    assert r.fallback == "stratified_cox (strata: wexp)"
    assert "wexp is categorical" in r.fallback_reason and "age" in r.fallback_reason
    assert r.aft_model.startswith(("weibull_aft", "lognormal_aft"))
    assert len(r.aft_summary) > 0 and r.fallback_summary is r.aft_summary
    assert any(d.name == "schoenfeld_min_p_stratified" and d.verdict == "pass"
               for d in r.diagnostics)
    json.dumps(r.to_dict())


def test_cox_stratifies_a_non_proportional_group_simulation():
    # known truth: crossing hazards between two groups (Weibull shapes 0.5 and 2.5),
    # and a proportional covariate x with log hazard ratio 0.5 in both
    rng = np.random.default_rng(4)
    n = 600
    g = rng.random(n) < 0.5
    x = rng.normal(size=n)
    shape = np.where(g, 2.5, 0.5)
    t = (-np.log(rng.random(n)) / (np.exp(0.5 * x) * 0.05 ** shape)) ** (1 / shape)
    r = fit_cox(pd.DataFrame({"t": t, "g": g.astype(float), "x": x}), "t")
    assert not r.ph_holds and "g" in set(r.ph_tests.loc[r.ph_tests["p"] < 0.025, "term"])
    assert r.fallback == "stratified_cox (strata: g)" and r.stratified_ph_holds
    row = r.stratified_summary.set_index("term").loc["x"]
    lo, hi = np.log(row["hr_low"]), np.log(row["hr_high"])
    assert lo < 0.5 < hi


def test_cox_continuous_violation_falls_back_to_aft_simulation():
    # known truth: log-normal AFT, log T = 1.0 x + 0.3 g + 0.4 e: x is not proportional
    rng = np.random.default_rng(5)
    n = 600
    x, z = rng.normal(size=n), rng.normal(size=n)
    g = (rng.random(n) < 0.5).astype(float)
    t = np.exp(1.0 * x + 0.3 * g + 0.4 * rng.normal(size=n))
    r = fit_cox(pd.DataFrame({"t": t, "x": x, "z": z, "g": g}), "t")
    assert not r.ph_holds and r.strata == () and r.stratified_ph_holds is None
    assert r.fallback.startswith("lognormal_aft") and "x not categorical" in r.fallback_reason
    a = r.aft_summary.set_index(["parameter", "term"])
    for term, truth in (("x", 1.0), ("g", 0.3)):
        assert a.loc[("mu_", term), "low"] < truth < a.loc[("mu_", term), "high"]


def test_cox_rank_check_drops_aliased_columns_and_warns_on_epv():
    rng = np.random.default_rng(3)
    n = 40
    x = rng.normal(size=n)
    df = pd.DataFrame({"t": rng.exponential(np.exp(-0.5 * x)), "x": x, "x2": 2 * x,
                       "c": 1.0, "z": rng.normal(size=n), "w": rng.normal(size=n),
                       "v": rng.normal(size=n), "u": rng.normal(size=n)})
    r = fit_cox(df, "t")
    assert set(r.dropped_terms) == {"c", "x2"}
    assert set(r.summary["term"]) == {"x", "z", "w", "v", "u"}
    # 40 events / 5 covariates = 8 < 10
    assert any(cv.code == "too_few_observations" for cv in r.caveats)
    with pytest.raises(InsufficientData):
        fit_cox(df[["t", "c"]], "t")


def test_lifetime_cox_design_and_fit():
    rng = np.random.default_rng(9)
    n = 300
    sub = rng.choice(["fs", "net", "mm"], n)
    rev = rng.random(n) < 0.5
    lines = rng.integers(1, 500, n)
    rate = np.exp(0.7 * rev)   # reviewed changes get fixed faster (hazard ratio 2)
    d = pd.DataFrame({"lifetime": rng.exponential(30 / rate), "subsystem": sub,
                      "period": np.where(rng.random(n) < 0.5, "before", "after"),
                      "reviewed_introducer": pd.array(rev, dtype="boolean"),
                      "intro_lines": pd.array(lines, dtype="Int64"),
                      "intro_files": pd.array([1] * n, dtype="Int64")})
    X = lifetime_design(d)
    # indicator columns against the most frequent level
    ref = pd.Series(sub).value_counts().sort_index().idxmax()
    assert sorted(c for c in X.columns if c.startswith("subsystem[")) == sorted(
        f"subsystem[{s}]" for s in {"fs", "net", "mm"} - {ref})
    assert {"reviewed_introducer", "log1p_intro_size", "lifetime", "event"} <= set(X.columns)
    assert sum(c.startswith("period[") for c in X.columns) == 1
    # stratum candidates: indicator groups and two-valued columns, not the size
    covs = [c for c in X.columns if c not in ("lifetime", "event")]
    groups = categorical_groups(covs, X)
    assert set(groups) == {"subsystem", "period", "reviewed_introducer"}
    assert len(groups["subsystem"]) == 2
    r = fit_lifetime_cox(d)
    hr = r.summary.set_index("term").loc["reviewed_introducer", ["hr_low", "hr_high"]]
    assert hr["hr_low"] < 2.0 < hr["hr_high"]
