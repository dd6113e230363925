"""Change points: Nile reference, ruptures oracle, false-positive rate, known changes."""
from __future__ import annotations

import numpy as np
import pytest
import ruptures as rpt
import statsmodels.api as sm
from scipy import stats

from procmetrics.analyse.change.changepoints import (STATED_FALSE_POSITIVE_RATE, ChangePointConfig,
                                              CostWeightedL2, detect_changes)
from procmetrics.analyse.change.its import relate_changes_to_date

import pandas as pd


@pytest.fixture(scope="module")
def nile():
    return sm.datasets.nile.load_pandas().data


def test_nile_change_between_1898_and_1899(nile):
    # Cobb, G. W. (1978). The problem of the Nile: conditional solution to a changepoint
    # problem. Biometrika 65:243-251: the annual flow drops after 1898 (new regime from 1899).
    r = detect_changes(nile["volume"].to_numpy(), kind="continuous",
                       labels=[str(int(y)) for y in nile["year"]],
                       config=ChangePointConfig(n_boot=100))
    assert [c.period for c in r.changes] == ["1899"]
    c = r.changes[0]
    assert c.position.low <= 28 <= c.position.high   # index 28 is 1899 (series starts 1871)
    assert c.level_before.value > c.level_after.value
    assert not c.tuning_sensitive and c.support > 0.8


def test_weighted_cost_with_unit_weights_equals_ruptures_l2(nile):
    y = nile["volume"].to_numpy(float)
    signal = np.column_stack([y, np.ones_like(y)])
    pen = 2 * np.var(y) * np.log(len(y)) / 4
    ours = rpt.Pelt(custom_cost=CostWeightedL2(), min_size=2, jump=1).fit(signal).predict(pen=pen)
    oracle = rpt.Pelt(model="l2", min_size=2, jump=1).fit(y.reshape(-1, 1)).predict(pen=pen)
    assert ours == oracle and len(oracle) > 1


def test_change_off_the_jump_grid_is_found_exactly():
    # jump=1: a change at index 7 (not a multiple of ruptures' default jump=5)
    rng = np.random.default_rng(3)
    y = np.r_[rng.normal(0, 1, 7), rng.normal(4, 1, 17)]
    r = detect_changes(y, kind="continuous", config=ChangePointConfig(n_boot=0))
    assert [c.index for c in r.changes] == [7]


def test_false_positive_rate_without_change():
    # 200 binomial series of 24 periods without a change (simulation, known truth); the
    # count of series with a false change must stay within the stated rate plus a
    # one-sided 99% binomial margin.
    rng = np.random.default_rng(2024)
    cfg = ChangePointConfig(n_boot=0, penalty_grid=(4.0,))
    hits = 0
    for _ in range(200):
        m = rng.integers(30, 200, 24)
        x = rng.binomial(m, 0.35)
        hits += bool(detect_changes(x, kind="proportion", trials=m, config=cfg).changes)
    assert hits <= stats.binom.ppf(0.99, 200, STATED_FALSE_POSITIVE_RATE)


def test_known_change_found_within_tolerance():
    rng = np.random.default_rng(8)
    cfg = ChangePointConfig(n_boot=0, penalty_grid=(4.0,))
    found = 0
    for _ in range(20):
        m = rng.integers(60, 120, 30)
        p = np.where(np.arange(30) < 18, 0.30, 0.50)
        r = detect_changes(rng.binomial(m, p), kind="proportion", trials=m, config=cfg)
        found += any(abs(c.index - 18) <= 1 for c in r.changes)
    assert found >= 18


def test_counts_use_anscombe_and_report_levels():
    rng = np.random.default_rng(12)
    y = np.r_[rng.poisson(5, 20), rng.poisson(15, 20)]
    r = detect_changes(y, kind="count", config=ChangePointConfig(n_boot=50))
    assert [c.index for c in r.changes] == [20]
    c = r.changes[0]
    assert c.level_before.low < 5 < c.level_before.high
    assert c.level_after.low < 15 < c.level_after.high
    assert list(r.penalty_path["c"]) == list(ChangePointConfig().penalty_grid)


def test_marginal_change_is_flagged_tuning_sensitive():
    # A change so small that it appears only for small penalties in the band c/2..2c.
    y = np.r_[np.zeros(15), np.full(15, 1.0)] + np.tile([0.6, -0.6], 15)
    r = detect_changes(y, kind="continuous", config=ChangePointConfig(c=1.0, n_boot=0))
    assert r.changes and any(c.tuning_sensitive for c in r.changes)
    assert "tuning_sensitive" in {cv.code for cv in r.caveats}


def test_relation_to_declared_date():
    rng = np.random.default_rng(1)
    dates = list(pd.date_range("2020-01-01", periods=30, freq="MS", tz="UTC"))
    y = np.r_[rng.normal(0, 1, 15), rng.normal(5, 1, 15)]
    r = detect_changes(y, kind="continuous", dates=dates, config=ChangePointConfig(n_boot=0))
    assert relate_changes_to_date(r, "2021-04-01").status == "at declared date"
    assert relate_changes_to_date(r, "2020-03-01").status == "elsewhere"
    flat = detect_changes(rng.normal(0, 1, 30), kind="continuous", dates=dates,
                          config=ChangePointConfig(n_boot=0))
    rel = relate_changes_to_date(flat, "2021-04-01")
    assert rel.status == "none"
    assert "absence_of_evidence" in {cv.code for cv in flat.caveats}
