"""Every automatic flag fires on constructed data, and stays silent where it must."""
from __future__ import annotations

import pandas as pd
import pytest

from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics
from procmetrics.analyse.result import CAVEAT_CODES, Caveat, Diagnostic, Estimate
from procmetrics.analyse.change.twosample import compare_proportions
from procmetrics.analyse.measures import quality as ql
from procmetrics.report.build import build_report
from procmetrics.report.flags import from_result, rule_flags, store_flags
from procmetrics.report.jsonout import schema
from procmetrics.report.model import ReportOptions

from tests.report.synth import synth


def codes(flags) -> set[str]:
    return {f.code for f in flags}


@pytest.fixture(scope="module")
def clean():
    return synth(seed=11)


def sflags(data, **kw):
    q = ql.summary(data, "quarter")
    groups = store_flags(q, unresolved_limit=0.10, **kw)
    return [f for g in groups.values() for f in g]


# -- store-level checks --------------------------------------------------------------
def test_clean_store_raises_no_store_flags(clean):
    assert sflags(clean, adoption_rising=False) == []


def test_shallow_history(clean):
    assert "shallow_history" in codes(sflags(synth(seed=11, shallow=True)))
    assert "shallow_history" not in codes(sflags(clean))


def test_rewritten_history(clean):
    assert "rewritten_history" in codes(sflags(synth(seed=11, rewritten=True)))
    assert "rewritten_history" not in codes(sflags(clean))


def test_unresolved_share_above_limit_states_the_threshold():
    f = [x for x in sflags(synth(seed=12, fix_share=0.3, unresolved_share=0.3))
         if x.code == "unresolved_fix_references"]
    assert f and "10% limit" in f[0].message
    assert "unresolved_fix_references" not in codes(
        sflags(synth(seed=12, fix_share=0.3, unresolved_share=0.02)))


def test_tag_adoption_flag_follows_the_analysis(clean):
    assert "tag_adoption_rising" in codes(sflags(clean, adoption_rising=True))
    assert "tag_adoption_rising" not in codes(sflags(clean, adoption_rising=False))


def test_clock_skew():
    data = synth(seed=13)
    c = data["commits"]
    skewed = c.copy()
    skewed.loc[skewed.index[:60], "author_date"] += pd.Timedelta(days=3)  # 5% ahead
    d2 = type(data)(data.repo, {**data.tables, "commits": skewed})
    assert "clock_skew" in codes(sflags(d2))
    assert "clock_skew" not in codes(sflags(data))


@pytest.mark.parametrize("shift", [pd.Timestamp("1985-06-01", tz="UTC"), "future"])
def test_implausible_dates_are_counted_and_flagged(shift):
    # constructed data: 5% of commits dated before 1990, or after the mining run ended
    data = synth(seed=13)
    c = data["commits"].copy()
    rows = c.index[:60]
    if shift == "future":
        ended = data["mining_runs"]["ended"].max()
        c.loc[rows, "committer_date"] = ended + pd.Timedelta(days=400)
        c.loc[rows, "author_date"] = ended + pd.Timedelta(days=400)
    else:
        c.loc[rows, "author_date"] = shift
        c.loc[rows, "committer_date"] = shift
    d2 = type(data)(data.repo, {**data.tables, "commits": c})
    clock = ql.clock_skew(d2)
    key = "n_after_mining" if shift == "future" else "n_before_1990"
    assert clock[key] == 60 and ql.clock_skew(data)[key] == 0
    assert "clock_skew" in codes(sflags(d2))


# -- from results -----------------------------------------------------------------------
def test_result_caveats_and_failed_checks_become_flags():
    est = Estimate("x", 1.0, 0.5, 2.0, 0.95, "m", 10, extrapolated=True)
    dg = Diagnostic("ljung_box", 0.001, "p >= 0.05", "fail", "Ljung-Box")
    cv = Caveat("tuning_sensitive", "moves with the penalty")
    got = from_result({"a": [est, dg], "b": (cv,)}, "fig")
    assert codes(got) == {"extrapolation", "diagnostic_failed", "tuning_sensitive"}
    quiet = from_result({"a": [Estimate("x", 1.0, 0.5, 2.0, 0.95, "m", 10)],
                         "b": Diagnostic("ljung_box", 0.4, "p >= 0.05", "pass", "LB")}, "f")
    assert quiet == []


def test_heuristic_classification_from_the_metrics(clean):
    with_kw = compute_period_metrics(clean["commits"], clean["trailers"], config=MetricConfig(
        period="quarter", heuristic_keywords=("change",)))
    without = compute_period_metrics(clean["commits"], clean["trailers"],
                                     config=MetricConfig(period="quarter"))
    assert "heuristic_classification" in codes(from_result(with_kw, "f"))
    assert "heuristic_classification" not in codes(from_result(without, "f"))


# -- the report's own rules ---------------------------------------------------------------
def test_too_few_observations():
    assert codes(rule_flags("f", n=12, min_n=20)) == {"too_few_observations"}
    assert rule_flags("f", n=20, min_n=20) == []


def test_multiple_comparisons_only_without_correction():
    assert codes(rule_flags("t", n=None, min_n=None, n_tests=5)) == {"multiple_comparisons"}
    assert rule_flags("t", n=None, min_n=None, n_tests=5, corrected=True) == []


def test_negligible_effect_on_a_huge_sample():
    # 200,000 commits a side, shares 50.0% vs 50.6%: significant, and negligible
    c = compare_proportions(100_000, 200_000, 101_200, 200_000)
    p = min(t.p_value for t in c.tests)
    assert p < 0.05
    negligible = -0.02 < c.difference.low and c.difference.high < 0.02
    assert "negligible_effect" in codes(rule_flags("t", n=None, min_n=None, p_value=p,
                                                   effect_negligible=negligible))
    big = compare_proportions(60_000, 200_000, 100_000, 200_000)
    pb = min(t.p_value for t in big.tests)
    assert "negligible_effect" not in codes(rule_flags(
        "t", n=None, min_n=None, p_value=pb,
        effect_negligible=-0.02 < big.difference.low and big.difference.high < 0.02))


def test_absence_of_evidence_worded_as_such():
    f = rule_flags("t", n=None, min_n=None, p_value=0.4)
    assert codes(f) == {"absence_of_evidence"}
    assert "not evidence that nothing changed" in f[0].message
    assert rule_flags("t", n=None, min_n=None, p_value=0.001) == []


def test_truncation_bias_on_lifetime_summaries():
    assert codes(rule_flags("l", n=None, min_n=None, lifetime=True)) == {"truncation_bias"}
    assert rule_flags("l", n=None, min_n=None, lifetime=False) == []


def test_schema_knows_exactly_the_caveat_codes():
    enum = schema()["$defs"]["flag"]["properties"]["code"]["enum"]
    assert sorted(enum) == sorted(CAVEAT_CODES)


@pytest.mark.slow
def test_shallow_store_flags_every_figure():
    rep = build_report(synth(seed=14, shallow=True, n_commits=600),
                       ReportOptions(policy="2022-01-01", pdf_engine="none"))
    assert rep.figures
    for fig in rep.figures.values():
        assert "shallow_history" in codes(fig.flags), fig.key
    # the n rule fires exactly on the figures below the minimum
    for fig in rep.figures.values():
        rule = any(f.code == "too_few_observations" and f.source == "report" for f in fig.flags)
        assert rule == (fig.n is not None and fig.n < 20), fig.key
