"""Change-at-a-date claims: trend-aware verdicts, their wording, and the section's numbers.

Invented histories with a known truth (:mod:`tests.claims.sim`,
:mod:`tests.report.synth`); the oracle for "the same numbers" is the report's
before/after computation itself (``compare_policy``), and statsmodels for the
segmented GLM (see ``tests/analyse/test_its.py``).
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest

from procmetrics.analyse.change.policy import compare_policy
from procmetrics.analyse.measures.metrics import MetricConfig
from procmetrics.claims.at_date import its_for_claim
from procmetrics.claims.base import NOT_SUPPORTED, SUPPORTED, Claim, ClaimContext
from procmetrics.claims.registry import SPECS, evaluate_claim
from tests.claims.sim import share_history
from tests.report.synth import synth

ROSE = Claim("r", "coverage rose at the date", "rose_after",
             {"metric": "review_coverage", "date": "policy"})
HIGHER = Claim("h", "coverage is higher after", "higher_after_than_before",
               {"metric": "review_coverage", "date": "policy"})


def _ctx(seed: int, **kw) -> ClaimContext:
    ctx, at = share_history(np.random.default_rng(seed), **kw)
    return dataclasses.replace(ctx, policy_date=at)


def test_a_trend_alone_is_not_a_rise_at_the_date_and_says_so_in_plain_words():
    # truth: logit coverage rises 1.0 per year for 4 years, nothing happens at the date
    ctx = _ctx(1, slope_per_year=1.0)
    v = evaluate_claim(ROSE, ctx)
    assert v.verdict == NOT_SUPPORTED, v.reasons
    assert v.reasons[0].startswith("review coverage was already rising before the date")
    assert "no change at the date beyond that trend" in v.reasons[0]
    assert v.estimate.low <= 0 <= v.estimate.high
    # the descriptive kind finds the share higher after, and says it attributes nothing
    d = evaluate_claim(HIGHER, ctx)
    assert d.verdict == SUPPORTED, d.reasons
    assert any("attributes nothing to the date" in r for r in d.reasons)


def test_a_step_at_the_date_is_supported_beyond_the_trend():
    ctx = _ctx(2, slope_per_year=0.6, step=1.0)
    v = evaluate_claim(ROSE, ctx)
    assert v.verdict == SUPPORTED, v.reasons
    truth = 1.0   # simulation truth: log-odds step at the date
    assert v.estimate.low < truth < v.estimate.high
    assert v.see[:1] == ("section:before-after",)
    assert "figure:its-review-coverage" in v.see
    assert v.to_dict()["evidence_refs"][0] == {"kind": "section", "key": "before-after"}


def test_a_step_down_is_a_fall_and_never_a_rise():
    ctx = _ctx(3, slope_per_year=0.6, step=-1.0)
    assert evaluate_claim(ROSE, ctx).verdict == NOT_SUPPORTED
    fell = Claim("f", "x", "fell_after", {"metric": "review_coverage", "date": "policy"})
    assert evaluate_claim(fell, ctx).verdict == SUPPORTED


def test_claim_and_before_after_section_fit_the_same_model_with_the_same_numbers():
    data = synth(seed=3, review_before=0.3, review_after=0.8, n_commits=3000)
    at = pd.Timestamp("2022-01-01", tz="UTC")
    ctx = ClaimContext(commits=data["commits"], trailers=data["trailers"],
                       fix_links=data["fix_links"], tags=data["tags"], policy_date=at,
                       period="quarter")
    # the report's call (report/sec_compare.py run_compare), default options
    pc = compare_policy(data["commits"], data["trailers"], at=at, tags=data["tags"],
                        config=MetricConfig(period="quarter", alpha=0.05), alpha=0.05)
    sec = next(r for r in pc.its if r.metric == "review_coverage")
    r, _ = its_for_claim(ctx, "review_coverage", at)
    for a, b in ((r.level_change, sec.level_change), (r.slope_change, sec.slope_change),
                 (r.pre_slope, sec.pre_slope)):
        assert (a.value, a.low, a.high) == (b.value, b.low, b.high)
    assert (r.model, r.cov_type, r.n_before, r.n_after) == (sec.model, sec.cov_type,
                                                            sec.n_before, sec.n_after)
    assert r.level_p_value == sec.level_p_value
    v = evaluate_claim(Claim("r", "x", "review_coverage_rose", {"date": "policy"}), ctx)
    # the verdict decides on the very interval the section prints (one computation)
    assert (v.estimate.value, v.estimate.low, v.estimate.high) == (
        sec.level_change.value, sec.level_change.low, sec.level_change.high)


def test_too_few_periods_on_a_side_is_undecidable_not_supported():
    # 8 months after the date: the segmented model wants >= 12 per segment
    ctx = _ctx(4, n_periods=32, change_at=24, step=1.5)
    v = evaluate_claim(ROSE, ctx)
    assert v.verdict == "undecidable"
    assert "12 per segment" in v.reasons[0]


@pytest.mark.parametrize("kind", sorted(SPECS))
def test_every_kind_states_its_direction_and_evidence_places(kind):
    spec = SPECS[kind]
    assert spec.direction and spec.see
    assert all(ref.split(":", 1)[0] in ("section", "figure", "table") for ref in spec.see)


def test_every_verdict_states_the_one_sided_convention():
    v = evaluate_claim(ROSE, _ctx(5, slope_per_year=0.0))
    decision = v.to_dict()["evidence"]["decision"]
    assert "one-sided" in decision and "0.025" in decision and "95%" in decision
