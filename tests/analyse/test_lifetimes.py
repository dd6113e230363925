"""Lifetime estimators against published data, an oracle library and simulation."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from lifelines import KaplanMeierFitter

from procmetrics.analyse.lifetimes.defects import build_defects
from procmetrics.analyse.lifetimes.analysis import analyse_lifetimes, restrict_to_horizon
from procmetrics.analyse.lifetimes.estimators import (
    curve_quantile, kaplan_meier, order_statistic_interval, quantile_estimates,
    truncated_product_limit,
)

# Freireich et al. (1963) 6-MP arm, remission weeks, as tabulated in Klein &
# Moeschberger (2003), Survival Analysis, sec. 1.2 (0 = censored).
SIXMP_T = [6, 6, 6, 6, 7, 9, 10, 10, 11, 13, 16, 17, 19, 20, 22, 23, 25, 32, 32, 34, 35]
SIXMP_E = [1, 1, 1, 0, 1, 0, 1, 0, 0, 1, 1, 0, 0, 0, 1, 1, 0, 0, 0, 0, 0]


def test_kaplan_meier_freireich_published_values():
    c = kaplan_meier(SIXMP_T, SIXMP_E, min_at_risk=5)
    # Klein & Moeschberger Table 4.1A (recalled from memory): S(10) = 0.753 with
    # Greenwood SE 0.096; S(23) = 0.448 with SE 0.135.
    assert c.survival_at(10) == pytest.approx(0.753, abs=5e-4)
    assert c.survival_at(23) == pytest.approx(0.448, abs=5e-4)
    tab = c.table.set_index("time")
    assert tab.loc[10, "greenwood_se"] == pytest.approx(0.096, abs=1e-3)
    assert tab.loc[23, "greenwood_se"] == pytest.approx(0.135, abs=1e-3)


def test_kaplan_meier_matches_lifelines_including_band():
    # oracle: lifelines KaplanMeierFitter (Greenwood, exponential/log(-log) band)
    k = KaplanMeierFitter().fit(SIXMP_T, SIXMP_E, alpha=0.05)
    ref = k.survival_function_.join(k.confidence_interval_)
    c = kaplan_meier(SIXMP_T, SIXMP_E).table.set_index("time")
    for t in c.index:
        assert c.loc[t, "survival"] == pytest.approx(ref.loc[t].iloc[0], abs=1e-12)
        assert c.loc[t, "low"] == pytest.approx(ref.loc[t].iloc[1], abs=1e-9)
        assert c.loc[t, "high"] == pytest.approx(ref.loc[t].iloc[2], abs=1e-9)


def test_curve_cut_where_fewer_than_ten_at_risk():
    x = np.arange(1, 31, dtype=float)
    c = kaplan_meier(x, min_at_risk=10)
    # at time 22 the risk set is 9 (30 - 21): the curve is cut there
    assert c.cut_time == 22
    assert not c.table.loc[c.table["time"] >= 22, "shown"].any()
    assert c.table.loc[c.table["time"] < 22, "shown"].all()


def test_lynden_bell_equals_ecdf_without_truncation():
    rng = np.random.default_rng(5)
    L = rng.exponential(10, 50)
    W = np.full_like(L, 1e6)   # windows never bind
    c = truncated_product_limit(L, W, n_boot=0)
    k = kaplan_meier(L)
    for t in (2.0, 5.0, 10.0, 20.0):
        assert c.survival_at(t) == pytest.approx(k.survival_at(t), abs=1e-12)


def test_lynden_bell_equals_reverse_time_left_truncated_km_in_lifelines():
    # Reverse time (Lagakos, Barraj & De Gruttola 1988): right truncation of L by W
    # is left truncation of c - L with entry c - W. Oracle: lifelines KM with entry.
    rng = np.random.default_rng(11)
    u = rng.uniform(0, 300, 400)
    L = rng.gamma(2.0, 40.0, 400)
    keep = L <= 300 - u
    L, W = L[keep], (300 - u)[keep]
    c = 1000.0
    km = KaplanMeierFitter().fit(c - L, entry=c - W)
    ours = truncated_product_limit(L, W, n_boot=0)
    for t in (20.0, 50.0, 80.0, 120.0, 200.0):
        # F(t) = P(L <= t) = P(c - L >= c - t) = S*((c - t)-)
        ref = float(km.survival_function_at_times(c - t - 1e-9).iloc[0])
        assert 1 - ours.survival_at(t) == pytest.approx(ref, abs=1e-9)


def test_truncation_bias_simulation():
    """Known truth: exponential(mean 100) lifetimes, uniform introduction on
    (0, 365), observed only if fixed by day 365. The identifiable target is the
    median of lifetime given lifetime <= 365."""
    tau, mean = 365.0, 100.0
    truth = -mean * np.log(1 - 0.5 * (1 - np.exp(-tau / mean)))
    naive_bias, lb_bias = [], []
    for seed in range(100):
        rng = np.random.default_rng(seed)
        L = rng.exponential(mean, 300)
        u = rng.uniform(0, tau, 300)
        keep = L <= tau - u
        L, W = L[keep], (tau - u)[keep]
        naive_bias.append(np.median(L) - truth)
        lb_bias.append(curve_quantile(truncated_product_limit(L, W, n_boot=0), 0.5) - truth)
    # naive: about -17 days (-25 %); corrected: within 3 days (4.5 %) on average
    assert np.mean(naive_bias) < -10
    assert abs(np.mean(lb_bias)) < 3
    assert abs(np.mean(lb_bias)) < abs(np.mean(naive_bias)) / 4


def test_bootstrap_band_and_quantile_intervals_cover_the_point():
    rng = np.random.default_rng(2)
    L = rng.exponential(30, 120)
    W = L + rng.uniform(0, 200, 120)
    c = truncated_product_limit(L, W, n_boot=100, rng=np.random.default_rng(1))
    tab = c.table
    assert (tab["low"] <= tab["survival"] + 1e-12).all()
    assert (tab["survival"] <= tab["high"] + 1e-12).all()
    for e in quantile_estimates(L, W, n_boot=100, rng=np.random.default_rng(1)):
        assert e.low <= e.value <= e.high
    naive = quantile_estimates(L)
    # oracle: numpy's inverted-CDF sample quantile (Hyndman & Fan 1996, definition 1)
    assert naive[1].value == np.quantile(L, 0.5, method="inverted_cdf")


def test_order_statistic_interval_matches_binomial_coverage():
    # oracle: scipy.stats.binom; interval [x_(r), x_(s)] has coverage
    # P(r <= B < s) for B ~ Bin(n, q), at least the nominal level (Conover 1999)
    from scipy import stats
    x = np.arange(1, 101, dtype=float)
    lo, hi = order_statistic_interval(x, 0.5, 0.95)
    r, s = int(lo), int(hi)
    cover = stats.binom.cdf(s - 1, 100, 0.5) - stats.binom.cdf(r - 1, 100, 0.5)
    assert cover >= 0.95


def _defects(n: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    t0 = pd.Timestamp("2020-01-01", tz="UTC")
    intro = rng.uniform(0, 700, n)
    life = rng.exponential(np.where(intro < 350, 80.0, 20.0))
    keep = intro + life <= 730
    rows = []
    for i, (u, L) in enumerate(zip(intro[keep], life[keep])):
        rows.append({"repo": "r", "fix_hash": f"f{i}", "position": 0, "ref_hash": f"i{i}",
                     "status": "resolved", "introducer_hash": f"i{i}", "cited_subject": None,
                     "subject_match": None, "in_trailer_block": True, "raw_text": "",
                     "fix_author_date": t0 + pd.Timedelta(days=u + L),
                     "fix_committer_date": t0 + pd.Timedelta(days=u + L),
                     "intro_author_date": t0 + pd.Timedelta(days=u),
                     "intro_committer_date": t0 + pd.Timedelta(days=u)})
    return pd.DataFrame(rows)


def test_analyse_lifetimes_by_period_with_horizon():
    links = _defects(400, 3)
    t = build_defects(links, end_date="2022-01-01", period_cuts=["2020-12-16"])
    res = analyse_lifetimes(t, by="period", horizon=120, n_boot=50,
                            rng=np.random.default_rng(0))
    assert set(res.summary["method"]) == {"naive", "truncation_aware", "horizon"}
    assert set(res.summary["group"]) == {"(all)", "before", "after"}
    med = res.summary[(res.summary["quantile"] == 0.5) & (res.summary["method"] == "horizon")]
    m = med.set_index("group")["value"]
    assert m["before"] > m["after"]          # the simulated change: mean 80 -> 20 days
    assert res.comparison is not None and res.comparison.p_value < 0.001
    assert "conditional" in res.population
    json.dumps(res.to_dict())
    cohort = restrict_to_horizon(t.defects, 120)
    assert (cohort.defects["window"] >= 120).all() and (cohort.defects["lifetime"] <= 120).all()


def test_no_comparison_without_horizon():
    t = build_defects(_defects(200, 4), end_date="2022-01-01", period_cuts=["2020-12-16"])
    res = analyse_lifetimes(t, by="period", n_boot=20)
    assert res.comparison is None
    assert any(c.code == "truncation_bias" for c in res.caveats)


def _mix_defects(n: int, seed: int, period_effect: float) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Known truth: 'net' defects live ~20 days, 'fs' ~100 days (exponential means).

    Before 2021-01-01 most defects are in fs, after it most are in net; within a
    subsystem the mean lifetime is multiplied by ``period_effect`` after the date.
    """
    rng = np.random.default_rng(seed)
    t0 = pd.Timestamp("2020-01-01", tz="UTC")
    intro = rng.uniform(0, 900, n)
    after = intro >= 366
    net = rng.random(n) < np.where(after, 0.8, 0.2)
    mean = np.where(net, 20.0, 100.0) * np.where(after, period_effect, 1.0)
    life = rng.exponential(mean)
    keep = intro + life <= 1095
    rows, subs = [], []
    for i in np.flatnonzero(keep):
        u, L = intro[i], life[i]
        rows.append({"repo": "r", "fix_hash": f"f{i}", "position": 0, "ref_hash": f"i{i}",
                     "status": "resolved", "introducer_hash": f"i{i}", "cited_subject": None,
                     "subject_match": None, "in_trailer_block": True, "raw_text": "",
                     "fix_author_date": t0 + pd.Timedelta(days=u + L),
                     "fix_committer_date": t0 + pd.Timedelta(days=u + L),
                     "intro_author_date": t0 + pd.Timedelta(days=u),
                     "intro_committer_date": t0 + pd.Timedelta(days=u)})
        subs.append({"repo": "r", "hash": f"i{i}", "subsystem": "net" if net[i] else "fs"})
    return pd.DataFrame(rows), pd.DataFrame(subs)


def test_period_comparison_stratified_by_subsystem_matches_statsmodels_and_truth():
    from statsmodels.duration.survfunc import survdiff

    # simulation with known truth: no period effect within subsystems, only a mix change
    links, subs = _mix_defects(600, 11, period_effect=1.0)
    t = build_defects(links, commit_subsystems=subs, end_date="2023-01-01",
                      period_cuts=["2021-01-01"])
    res = analyse_lifetimes(t, by="period", horizon=200, n_boot=20,
                            rng=np.random.default_rng(0))
    s = res.stratified_comparison
    assert s is not None and res.strata_by == "subsystem"
    assert s.name == "stratified log-rank" and s.df == 1
    # oracle: statsmodels survdiff with strata on the same horizon cohort
    c = restrict_to_horizon(t.defects, 200).defects
    stat, p = survdiff(c["lifetime"].to_numpy(), np.ones(len(c)), c["period"].to_numpy(),
                       strata=c["subsystem"].to_numpy())
    assert s.statistic == pytest.approx(stat, rel=1e-10)
    assert s.p_value == pytest.approx(p, rel=1e-8)
    # the plain comparison sees the mix change; stratified by subsystem it vanishes
    assert res.comparison.p_value < 1e-4
    assert s.p_value > 0.05
    assert any(cv.code == "tuning_sensitive" and "subsystem mix" in cv.message
               for cv in res.caveats)
    json.dumps(res.to_dict())

    # a real within-subsystem change (lifetimes halved after the date) is still seen
    links, subs = _mix_defects(600, 12, period_effect=0.5)
    t = build_defects(links, commit_subsystems=subs, end_date="2023-01-01",
                      period_cuts=["2021-01-01"])
    res = analyse_lifetimes(t, by="period", horizon=200, n_boot=20)
    assert res.stratified_comparison.p_value < 1e-3


def test_no_stratified_comparison_without_subsystems():
    t = build_defects(_defects(300, 5), end_date="2022-01-01", period_cuts=["2020-12-16"])
    res = analyse_lifetimes(t, by="period", horizon=120, n_boot=20)
    assert res.comparison is not None and res.stratified_comparison is None
    assert any("share one subsystem" in cv.message for cv in res.caveats)


def test_band_in_a_second_process_changes_nothing(monkeypatch):
    """Oracle: the same analysis in one process. Three groups share one generator, so
    the second group's band is right only if the first group's state came with it."""
    import warnings

    from procmetrics import background
    from procmetrics.analyse.lifetimes import analysis

    t = build_defects(_defects(600, 8), end_date="2022-01-01", period_cuts=["2020-12-16"])

    def run(jobs: int, **kw) -> tuple[object, dict, list]:
        rng = np.random.default_rng(11)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = analyse_lifetimes(t, by="period", horizon=120, n_boot=200, rng=rng,
                                    jobs=jobs, **kw)
        return res, rng.bit_generator.state, sorted((w.category.__name__, str(w.message))
                                                    for w in caught)

    one, state_one, warned_one = run(1)
    asides: list[bool] = []
    real = background.AsideJob.result

    def spy(self):
        value = real(self)
        asides.append(self.ran_aside)
        return value

    monkeypatch.setattr(analysis, "ASIDE_MIN_DEFECTS", 0)
    monkeypatch.setattr(background.AsideJob, "result", spy)
    two, state_two, warned_two = run(2)
    # started elsewhere, as the report does, with a generator in the same state
    job = background.AsideJob(analysis.truncation_aware_bands, t, by="period", n_boot=200,
                              rng=np.random.default_rng(11))
    three, state_three, warned_three = run(1, bands=job)
    assert asides == [True, True]
    for res, state, warned in ((two, state_two, warned_two),
                               (three, state_three, warned_three)):
        assert state == state_one
        pd.testing.assert_frame_equal(res.curves, one.curves)
        pd.testing.assert_frame_equal(res.summary, one.summary)
        assert json.dumps(res.to_dict(), default=str) == json.dumps(one.to_dict(), default=str)
        assert warned == warned_one


def test_bands_drawn_for_another_table_are_not_used():
    t = build_defects(_defects(600, 8), end_date="2022-01-01", period_cuts=["2020-12-16"])
    other = build_defects(_defects(500, 9), end_date="2022-01-01", period_cuts=["2020-12-16"])
    from procmetrics.analyse.lifetimes.analysis import truncation_aware_bands

    wrong = truncation_aware_bands(other, by="period", n_boot=100,
                                   rng=np.random.default_rng(5))
    got = analyse_lifetimes(t, by="period", n_boot=100, rng=np.random.default_rng(5),
                            bands=wrong)
    want = analyse_lifetimes(t, by="period", n_boot=100, rng=np.random.default_rng(5))
    pd.testing.assert_frame_equal(got.curves, want.curves)
