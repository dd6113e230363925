"""``lifetimes_shorter_after`` through the commit-level input (as ``procmetrics check``).

Invented right-truncated histories with a known truth (:mod:`tests.claims.sim`):
fix links between commits, built into defects by ``build_defects`` inside the
evaluator. Calibration over many replicates is in
``test_calibration_lifetimes.py``.
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd

import procmetrics.claims.lifetimes as lt
from procmetrics.claims.base import NOT_SUPPORTED, SUPPORTED, Claim, ClaimContext
from procmetrics.claims.registry import evaluate_claim
from tests.claims.sim import lifetime_history

CLAIM = Claim("l", "fixed sooner after the date", "lifetimes_shorter_after",
              {"date": "policy"})


def _ctx(seed: int, **kw) -> ClaimContext:
    ctx, at = lifetime_history(np.random.default_rng(seed), **kw)
    return dataclasses.replace(ctx, policy_date=at)


def test_median_120_to_45_days_is_supported_one_sided():
    v = evaluate_claim(CLAIM, _ctx(1, n_visible=700, factor_after=45 / 120))
    assert v.verdict == SUPPORTED, v.reasons
    assert v.test["p_value"] < 0.025
    assert v.see == ("section:lifetimes", "figure:lifetime-before-after")


def test_longer_lifetimes_after_are_never_called_shorter():
    # truth: lifetimes 15% longer after the date (the case the old rule got wrong)
    v = evaluate_claim(CLAIM, _ctx(2, n_visible=700, factor_after=1.15))
    assert v.verdict == NOT_SUPPORTED, v.reasons
    assert v.test["p_value"] > 0.5          # one-sided: the data lean the other way


def test_comparison_keeps_the_horizon_conditioning():
    # only defects introduced >= H before the end and fixed within H are compared
    ctx = _ctx(3, n_visible=700)
    v = evaluate_claim(dataclasses.replace(CLAIM, params={"date": "policy",
                                                           "horizon_days": 200.0}), ctx)
    assert any("lifetimes conditional on lifetime <= 200 days" in r for r in v.reasons)
    from procmetrics.analyse.lifetimes.analysis import restrict_to_horizon
    from procmetrics.analyse.lifetimes.defects import build_defects

    table = build_defects(ctx.fix_links, commits=ctx.commits)
    cohort = restrict_to_horizon(table.defects, 200.0).defects
    assert v.n == len(cohort)
    assert (cohort["lifetime"] <= 200).all() and (cohort["window"] >= 200).all()


def test_no_tolerance_the_wrong_way_is_left():
    assert not hasattr(lt, "_ordered_after_below")


def test_history_ending_before_the_date_is_undecidable():
    ctx = _ctx(4, n_visible=200)
    late = dataclasses.replace(ctx, policy_date=pd.Timestamp("2040-01-01", tz="UTC"))
    assert evaluate_claim(CLAIM, late).verdict == "undecidable"


def test_lifetime_claims_follow_the_panels_link_era_and_clock():
    """The robustness panel varies the link-era start and the clock through the context;
    the lifetime kinds read both (they used to ignore them and show 'same evidence')."""
    from procmetrics.analyse.lifetimes.defects import build_defects

    ctx = _ctx(4, n_visible=700)
    later = ctx.policy_date - pd.Timedelta(days=900)
    base = lt.defect_table(CLAIM.kind, ctx)
    moved = lt.defect_table(CLAIM.kind, dataclasses.replace(ctx, links_from=later))
    # oracle: the defect table built directly with that start
    want = build_defects(ctx.fix_links, commits=ctx.commits, links_from=later)
    assert len(moved.defects) == len(want.defects) < len(base.defects)
    v0 = evaluate_claim(CLAIM, ctx)
    v1 = evaluate_claim(CLAIM, dataclasses.replace(ctx, links_from=later))
    assert v1.n < v0.n
    # the median claim starts at the settled era and a later start only moves it later
    med = Claim("m", "half within 200 days", "median_lifetime_below", {"threshold_days": 200})
    settled = lt.defect_table(med.kind, ctx)
    earlier = lt.defect_table(med.kind, dataclasses.replace(
        ctx, links_from=ctx.commits["committer_date"].min()))
    assert len(earlier.defects) == len(settled.defects)


def test_one_set_of_defects_has_one_median_interval_everywhere():
    """The claim, the lifetimes analysis (CLI and report table) and a shuffled copy of
    the same defects print one interval, whatever the seed: the bootstrap is keyed by
    the data (invariance check: row order and seed must not matter)."""
    from procmetrics.analyse.lifetimes.analysis import analyse_lifetimes
    from procmetrics.analyse.lifetimes.defects import lifetimes_for_estimation
    from procmetrics.analyse.lifetimes.estimators import quantile_estimates

    ctx = _ctx(5, n_visible=400)
    med = Claim("m", "half within 200 days", "median_lifetime_below", {"threshold_days": 200})
    table = lt.defect_table(med.kind, ctx)
    d, _ = lifetimes_for_estimation(table.defects)
    L, W = d["lifetime"].to_numpy(float), d["window"].to_numpy(float)
    (a,) = quantile_estimates(L, W, quantiles=(0.5,))
    perm = np.random.default_rng(9).permutation(len(L))
    (b,) = quantile_estimates(L[perm], W[perm], quantiles=(0.5,))
    assert (a.value, a.low, a.high) == (b.value, b.low, b.high)
    for seed in (1, 2):
        s = analyse_lifetimes(table, n_boot=2000, rng=np.random.default_rng(seed)).summary
        row = s[(s["group"] == "(all)") & (s["method"] == "truncation_aware")
                & (s["quantile"] == 0.5)].iloc[0]
        assert (row["value"], row["low"], row["high"]) == (a.value, a.low, a.high), seed
    v = evaluate_claim(med, dataclasses.replace(ctx, seed=123))
    assert (v.estimate.value, v.estimate.low, v.estimate.high) == (a.value, a.low, a.high)


def test_a_trend_under_way_before_the_date_is_not_credited_to_the_date():
    """Lifetimes shortening steadily (log median -0.15 a year over 10 years, no step):
    the cohort comparison may find 'sooner after', and then says it attributes
    nothing to the date (seeded; known truth: no change at the date)."""
    v = evaluate_claim(CLAIM, _ctx(6, n_visible=1500, trend_per_year=-0.15))
    print(v.verdict, v.reasons[0])
    assert lt.NO_ATTRIBUTION in v.reasons
    assert v.verdict == SUPPORTED          # the cohorts do differ: the wording must carry it
