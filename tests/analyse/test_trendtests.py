"""Laplace and MIL-HDBK-189 trend tests: published data, null distributions."""
from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import stats

from procmetrics.analyse.growth.trendtests import laplace_test, power_law_trend_test, trend_tests
from procmetrics.errors import InsufficientData

# NTDS interfailure times in days (Jelinski & Moranda 1972; the 26 production-phase
# failures used by Goel & Okumoto 1979) -- recalled from memory.
NTDS_GAPS = [9, 12, 11, 4, 7, 2, 5, 8, 5, 7, 1, 6, 1, 9, 4, 1, 3, 3, 6, 1, 11, 33, 7, 91, 2, 1]
NTDS = np.cumsum(NTDS_GAPS).astype(float)


def test_ntds_laplace_failure_truncated_independent_formula():
    assert NTDS[-1] == 250
    r = laplace_test(NTDS)
    # independent computation (Cox & Lewis 1966, failure-truncated form over n-1 points)
    pts, T = NTDS[:-1], NTDS[-1]
    u = (pts.mean() - T / 2) / (T * np.sqrt(1 / (12 * len(pts))))
    assert r.statistic == pytest.approx(u, rel=1e-12)
    # -2.447 is the formula above evaluated on NTDS (a pin, no published figure found)
    assert r.statistic == pytest.approx(-2.447, abs=1e-3)
    assert r.direction == "growth" and r.p_growth == pytest.approx(stats.norm.cdf(u))


def test_ntds_tests_disagree_and_say_so():
    res = trend_tests(NTDS)
    # power-law statistic 2*sum(log(t_n/t_i)), i < n, on 2(n-1) = 50 df
    s = 2 * np.log(NTDS[-1] / NTDS[:-1]).sum()
    assert res.power_law.statistic == pytest.approx(s, rel=1e-12)
    assert res.power_law.df == 50
    assert res.power_law.p_growth == pytest.approx(stats.chi2.sf(s, 50), rel=1e-12)
    assert res.power_law.direction == "no evidence"
    assert not res.agree and "disagree" in res.message
    assert not res.evidence_of_growth                          # default: both required
    assert trend_tests(NTDS, require="either").evidence_of_growth
    json.dumps(res.to_dict())


def test_power_law_statistic_is_chi2_2n_under_constant_rate():
    # Time-truncated HPP: 2*sum(log(T/t_i)) ~ chi2(2n) given n (MIL-HDBK-189C);
    # oracle: scipy.stats.kstest against chi2(2n) over simulated statistics
    rng = np.random.default_rng(42)
    stats_ = [power_law_trend_test(np.sort(rng.uniform(0, 100, 15)), 100.0).statistic
              for _ in range(400)]
    assert stats.kstest(stats_, stats.chi2(30).cdf).pvalue > 0.01


def test_laplace_size_under_constant_rate():
    rng = np.random.default_rng(8)
    rej = np.mean([laplace_test(np.sort(rng.uniform(0, 1, 30)), 1.0).p_growth < 0.05
                   for _ in range(400)])
    assert 0.02 < rej < 0.09     # nominal 5 %


def test_decreasing_rate_detected_by_both():
    rng = np.random.default_rng(4)
    # power-law process with beta = 0.5 on (0, 100]: t = 100 * U^(1/beta)
    t = np.sort(100 * rng.uniform(size=60) ** 2)
    res = trend_tests(t, 100.0)
    assert res.agree and res.evidence_of_growth
    assert res.power_law.beta_hat == pytest.approx(0.5, abs=0.2)


def test_input_checks():
    with pytest.raises(InsufficientData):
        laplace_test([1.0, 2.0])
    with pytest.raises(ValueError):
        laplace_test([0.0, 1.0, 2.0])
    with pytest.raises(ValueError):
        power_law_trend_test([1.0, 2.0, 5.0], end=4.0)
