"""Carry-over latency: Kaplan-Meier and log-rank against lifelines (oracle), and
the coverage of the median interval in a seeded simulation with a known truth."""
from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from lifelines import KaplanMeierFitter
from lifelines.statistics import logrank_test
from lifelines.utils import median_survival_times
from scipy import stats

from procmetrics.analyse.carryover.latency import (carryover_latency, km_curve,
                                                   logrank_one_sided)


def _sample(rng, n, scale=40.0, horizon=120.0):
    """Exponential latencies (days) of fixes landing uniformly over ``horizon`` days before
    the tip; a fix not carried by the tip is censored at its gap."""
    lat = rng.exponential(scale, n)
    gap = rng.uniform(0, horizon, n)
    ev = lat <= gap
    return np.where(ev, lat, gap), ev


def _table(dur, ev):
    return pd.DataFrame({"status": np.where(ev, "carried", "missing"),
                         "latency_days": np.where(ev, dur, np.nan),
                         "gap_days": np.where(ev, np.nan, dur)})


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_km_matches_lifelines(seed):
    rng = np.random.default_rng(seed)
    dur, ev = _sample(rng, 80)
    dur = np.round(dur)             # ties, as in day-resolution data
    ours = km_curve(dur, ev).set_index("time_days")
    kmf = KaplanMeierFitter().fit(dur, ev, alpha=0.05)
    sf = kmf.survival_function_.iloc[:, 0]
    ci = kmf.confidence_interval_
    assert np.allclose(ours["survival"].to_numpy(), sf.loc[ours.index].to_numpy())
    inside = (ours["survival"] > 0) & (ours["survival"] < 1)
    assert np.allclose(ours.loc[inside, "low"], ci.iloc[:, 0].loc[ours.index[inside]])
    assert np.allclose(ours.loc[inside, "high"], ci.iloc[:, 1].loc[ours.index[inside]])
    res = carryover_latency(_table(dur, ev))
    assert res.median.value == pytest.approx(kmf.median_survival_time_)
    lo, hi = median_survival_times(ci).iloc[0]
    assert (res.median.low, res.median.high) == pytest.approx((lo, hi))
    assert res.n == 80 and res.n_carried == int(ev.sum())


def test_logrank_matches_lifelines():
    rng = np.random.default_rng(7)
    d1, e1 = _sample(rng, 60, scale=50)
    d2, e2 = _sample(rng, 70, scale=25)
    z, p = logrank_one_sided(d1, e1, d2, e2)
    oracle = logrank_test(d1, d2, event_observed_A=e1, event_observed_B=e2)
    assert z ** 2 == pytest.approx(oracle.test_statistic, rel=1e-9)
    assert z > 0 and p == pytest.approx(oracle.p_value / 2, rel=1e-9)


def test_median_interval_covers_the_truth_at_the_nominal_rate():
    """Seeded simulation: exponential latency with scale 40 days (true median 40 ln 2),
    censoring by the tip; the 95 % median interval should cover ~95 % of the time."""
    rng = np.random.default_rng(20261202)
    truth = 40.0 * np.log(2)
    reps, covered = 400, 0
    for _ in range(reps):
        dur, ev = _sample(rng, 120)
        m = carryover_latency(_table(dur, ev), within_days=()).median
        covered += m.low <= truth <= m.high
    lo, hi = stats.beta.ppf([0.025, 0.975], [covered, covered + 1], [reps - covered + 1, reps - covered])
    print(f"median interval coverage {covered / reps:.3f} [{lo:.3f}, {hi:.3f}] (n={reps})")
    # Monte-Carlo error: binomial 99 % band around 0.95 for 400 replicates
    assert covered >= stats.binom.ppf(0.005, reps, 0.95)   # under-coverage would over-claim


def test_negative_latency_is_a_caveat_not_an_error():
    t = pd.DataFrame({"status": ["carried"] * 4 + ["missing"] * 2,
                      "latency_days": [-2.0, 3.0, 5.0, 9.0, np.nan, np.nan],
                      "gap_days": [np.nan] * 4 + [20.0, 30.0]})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = carryover_latency(t)
    assert [c.code for c in res.caveats] == ["clock_skew"]
    assert res.curve["time_days"].min() == 0.0


def test_compare_periods_matches_lifelines_on_the_split():
    from procmetrics.analyse.carryover.latency import compare_periods
    rng = np.random.default_rng(3)
    n = 200
    start = pd.Timestamp("2020-01-01", tz="UTC")
    split = pd.Timestamp("2021-01-01", tz="UTC")
    fd = start + pd.to_timedelta(rng.uniform(0, 700, n), unit="D")
    lat = rng.exponential(np.where(fd < split, 60.0, 30.0))     # twice as fast after
    gap = (pd.Timestamp("2021-12-01", tz="UTC") - fd).total_seconds().to_numpy() / 86400
    ev = lat <= gap
    t = pd.DataFrame({"fix_date": fd, "status": np.where(ev, "carried", "missing"),
                      "latency_days": np.where(ev, lat, np.nan),
                      "gap_days": np.where(ev, np.nan, gap)})
    c = compare_periods(t, split)
    b, a = (fd < split), (fd >= split)
    dur = np.where(ev, lat, gap)
    oracle = logrank_test(dur[b], dur[a], event_observed_A=ev[b], event_observed_B=ev[a])
    assert c.z ** 2 == pytest.approx(oracle.test_statistic, rel=1e-9)
    assert c.z > 0 and c.p_faster_after == pytest.approx(oracle.p_value / 2, rel=1e-9)
    assert c.before.n + c.after.n == n
