"""Each verdict on constructed data with a known truth, and where it must not be given."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from procmetrics.claims.shares import share_shift
from procmetrics.claims.base import (
    NOT_SUPPORTABLE, NOT_SUPPORTED, SUPPORTED, UNDECIDABLE, Claim, ClaimContext, ClaimVerdict,
    exit_code,
)
from procmetrics.claims.registry import evaluate_claim
from procmetrics.errors import ConfigError

from tests.report.synth import synth

POLICY = pd.Timestamp("2022-01-01", tz="UTC")


def ctx_for(data, **kw) -> ClaimContext:
    return ClaimContext(commits=data["commits"], trailers=data["trailers"],
                        fix_links=data["fix_links"], commit_subsystems=None,
                        tags=data["tags"], policy_date=POLICY, **kw)


@pytest.fixture(scope="module")
def rose():
    return synth(seed=3, review_before=0.3, review_after=0.8)


def rose_claim() -> Claim:
    # the descriptive step comparison (higher after than before, nothing attributed
    # to the date); the trend-aware kinds are tested in tests/claims/
    return Claim("r", "coverage higher after", "higher_after_than_before",
                 {"metric": "review_coverage", "date": "policy"})


def test_supported_when_coverage_rose(rose):
    v = evaluate_claim(rose_claim(), ctx_for(rose))
    assert v.verdict == SUPPORTED, v.reasons
    assert v.estimate.low > 1 and v.n == 1200
    assert any("attributes nothing to the date" in r for r in v.reasons)


def test_review_coverage_rose_judged_against_the_trend_by_month(rose):
    # 48 months, a jump from 0.3 to 0.8 at the date (simulation truth: log-odds
    # step log(0.8/0.2) - log(0.3/0.7) = 2.23) and no trend
    c = Claim("r", "coverage rose", "review_coverage_rose", {"date": "policy"})
    v = evaluate_claim(c, ctx_for(rose, period="month"))
    assert v.verdict == SUPPORTED, v.reasons
    assert v.estimate.low < np.log(0.8 / 0.2) - np.log(0.3 / 0.7) < v.estimate.high
    # by quarter there are 8 periods a side: too few for the segmented model
    q = evaluate_claim(c, ctx_for(rose))
    assert q.verdict == UNDECIDABLE and "12 per segment" in q.reasons[0]


def test_not_supported_without_change_and_says_it_is_not_evidence_against():
    data = synth(seed=4, review_before=0.5, review_after=0.5)
    v = evaluate_claim(rose_claim(), ctx_for(data))
    assert v.verdict == NOT_SUPPORTED
    assert v.estimate.low <= 1 <= v.estimate.high
    assert "not evidence against" in v.reasons[0]


def test_not_supported_when_data_point_the_other_way():
    data = synth(seed=5, review_before=0.8, review_after=0.3)
    v = evaluate_claim(rose_claim(), ctx_for(data))
    assert v.verdict == NOT_SUPPORTED
    assert "other way" in v.reasons[0]


def test_undecidable_with_too_few_commits_after_the_date(rose):
    c = Claim("r", "x", "higher_after_than_before",
              {"metric": "review_coverage", "date": pd.Timestamp("2023-12-29").date()})
    v = evaluate_claim(c, ctx_for(rose))
    assert v.verdict == UNDECIDABLE
    assert "commits after" in v.reasons[0]


def test_undecidable_on_shallow_history_even_with_clear_data(rose):
    v = evaluate_claim(rose_claim(), ctx_for(rose, is_shallow=True))
    assert v.verdict == UNDECIDABLE and "shallow" in v.reasons[0]


def test_policy_claim_without_policy_date_is_a_usage_error(rose):
    ctx = ClaimContext(commits=rose["commits"], trailers=rose["trailers"],
                       fix_links=rose["fix_links"])
    with pytest.raises(ConfigError, match="needs a policy date"):
        evaluate_claim(rose_claim(), ctx)


@pytest.mark.parametrize("kind,params", [("residual_defects_below", {"threshold": 5}),
                                         ("no_defects_remain", {})])
def test_residual_defect_claims_are_never_supportable(rose, kind, params):
    v = evaluate_claim(Claim("d", "x", kind, params), ctx_for(rose))
    assert v.verdict == NOT_SUPPORTABLE
    assert any("found and fixed" in r for r in v.reasons)


def test_median_lifetime_supported_and_not_supported():
    # exponential lifetimes, mean 20 days: median 20 ln 2 = 13.9 days (known truth)
    data = synth(seed=6, lifetime_days=20.0, fix_share=0.25)
    ok = evaluate_claim(Claim("m", "x", "median_lifetime_below", {"threshold_days": 60.0}),
                        ctx_for(data))
    assert ok.verdict == SUPPORTED, ok.reasons
    assert ok.estimate.low < 20 * np.log(2) < ok.estimate.high
    no = evaluate_claim(Claim("m", "x", "median_lifetime_below", {"threshold_days": 5.0}),
                        ctx_for(data))
    assert no.verdict == NOT_SUPPORTED and "other way" in no.reasons[0]


def test_defect_claims_undecidable_above_unresolved_limit():
    data = synth(seed=7, fix_share=0.25, unresolved_share=0.4)
    v = evaluate_claim(Claim("m", "x", "median_lifetime_below", {"threshold_days": 60.0}),
                       ctx_for(data))
    assert v.verdict == UNDECIDABLE and "10% limit" in v.reasons[0]


def test_share_at_least(rose):
    ctx = ctx_for(rose)
    hi = evaluate_claim(Claim("a", "x", "at_least", {"metric": "review_coverage",
                                                     "threshold": 0.6, "after": "policy"}), ctx)
    lo = evaluate_claim(Claim("a", "x", "at_least", {"metric": "review_coverage",
                                                     "threshold": 0.95, "after": "policy"}), ctx)
    assert hi.verdict == SUPPORTED and lo.verdict == NOT_SUPPORTED


def test_step_model_odds_ratio_matches_statsmodels(rose):
    """Oracle: statsmodels GLM Binomial on the same per-period counts (no overdispersion
    expected in this binomial simulation, so the plain binomial fit applies)."""
    sh = share_shift(ctx_for(rose), "review_coverage", POLICY)
    rows = sh.rows
    X = sm.add_constant(rows["after"].astype(float).to_numpy())
    y = np.column_stack([rows["x"], rows["n"] - rows["x"]])
    ref = sm.GLM(y, X, family=sm.families.Binomial()).fit()
    assert sh.odds_ratio.value == pytest.approx(float(np.exp(ref.params[1])), rel=1e-6)
    # pooled shares: the model's fitted values reproduce them exactly (saturated in 'after')
    assert sh.x_before / sh.n_before == pytest.approx(
        rows.loc[~rows["after"], "x"].sum() / rows.loc[~rows["after"], "n"].sum())


def test_exit_code_bits(rose):
    c = rose_claim()

    def v(kind: str) -> ClaimVerdict:
        return ClaimVerdict(c, kind, ("r",), "m")

    assert exit_code([v(SUPPORTED)]) == 0
    assert exit_code([v(SUPPORTED), v(NOT_SUPPORTED)]) == 9
    assert exit_code([v(UNDECIDABLE)]) == 10
    assert exit_code([v(NOT_SUPPORTABLE)]) == 12
    assert exit_code([v(NOT_SUPPORTED), v(UNDECIDABLE), v(NOT_SUPPORTABLE)]) == 15
