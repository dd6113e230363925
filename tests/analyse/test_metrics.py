"""Per-period metrics: definitions, intervals, periods, invariance and caveats."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from procmetrics.analyse.measures.metrics import ALL, METRIC_COLUMNS, MetricConfig, compute_period_metrics
from procmetrics.analyse.measures.periods import UNRELEASED, assign_periods
from tests.analyse.series_data import commits_frame, simulated_commits, trailers_frame


@pytest.fixture()
def small():
    c = commits_frame([
        # Jan: 4 non-merge commits + 1 merge
        dict(author_email="a@x.org", committer_date="2024-01-03", lines_added=10, lines_deleted=2),
        dict(author_email="B@x.org", committer_email="b@x.org", committer_date="2024-01-10",
             n_fix_refs=1, n_resolved_fixes=1, stable_request=True, subject="fix crash"),
        dict(author_email="c@x.org", committer_email="m@x.org", committer_date="2024-01-20",
             n_fix_refs=2, n_resolved_fixes=0),
        dict(author_email="a@x.org", committer_date="2024-01-30", is_revert=True),
        dict(author_email="m@x.org", committer_date="2024-01-31", is_merge=True, n_parents=2),
        # Feb: 2 commits
        dict(author_email="d@x.org", committer_email="m@x.org", committer_date="2024-02-02"),
        dict(author_email="e@x.org", committer_date="2024-02-20", n_fix_refs=1,
             n_resolved_fixes=1),
    ])
    h = list(c["hash"])
    t = trailers_frame([
        (h[0], "Reviewed-by", "r@x.org"),            # independent review
        (h[1], "reviewed-by", "b@X.org"),            # self-review (case differs): not independent
        (h[2], "Signed-off-by", "c@x.org"),          # not a review key
        (h[5], "Tested-by", None),                   # review without e-mail
        (h[4], "Reviewed-by", "r@x.org"),            # on the merge (excluded)
    ])
    return c, t


def _val(pm, metric, period, sub=ALL):
    t = pm.table
    r = t[(t.metric == metric) & (t.period == period) & (t.subsystem == sub)]
    assert len(r) == 1
    return r.iloc[0]


def test_definitions_by_hand(small):
    c, t = small
    pm = compute_period_metrics(c, t, config=MetricConfig(period="month",
                                                          heuristic_keywords=("fix",)))
    assert list(pm.table.columns) == METRIC_COLUMNS
    assert pm.n_merges_excluded == 1 and pm.n_commits == 6
    jan = {m: _val(pm, m, "2024-01") for m in pm.table.metric.unique()}
    assert (jan["commits"].value, jan["review_coverage"].numerator,
            jan["review_coverage"].denominator) == (4, 2, 4)
    assert jan["independent_review"].numerator == 1
    # self commits with no review: a@ (revert, 01-30); c@ committed by m@ is not a self commit
    assert jan["unreviewed_self_commits"].numerator == 1
    assert jan["fix_ratio"].numerator == 1 and jan["fixes_tag_adoption"].numerator == 2
    assert (jan["stable_request_share"].numerator, jan["stable_request_share"].denominator) == (1, 2)
    assert jan["revert_ratio"].numerator == 1
    assert jan["active_authors"].value == 3  # a, b (case-folded), c
    assert jan["fix_ratio_heuristic"].numerator == 1
    assert jan["churn_lines"].value == 12 + 3 * 1
    feb = _val(pm, "review_coverage", "2024-02")
    assert (feb.numerator, feb.denominator) == (1, 2)
    assert "heuristic_classification" in {cv.code for cv in pm.caveats}


def test_intervals_against_oracles(small):
    c, t = small
    pm = compute_period_metrics(c, t, config=MetricConfig(period="month"))
    r = _val(pm, "review_coverage", "2024-01")
    lo, hi = proportion_confint(2, 4, alpha=0.05, method="wilson")  # statsmodels oracle
    assert (r.ci_low, r.ci_high) == pytest.approx((lo, hi))
    k = _val(pm, "commits", "2024-01")
    # exact Poisson (Garwood): tail probabilities at the limits are alpha/2 (scipy oracle)
    assert stats.poisson.sf(k.value - 1, k.ci_low) == pytest.approx(0.025, rel=1e-6)
    assert stats.poisson.cdf(k.value, k.ci_high) == pytest.approx(0.025, rel=1e-6)


def test_merges_included_on_request(small):
    c, t = small
    pm = compute_period_metrics(c, t, config=MetricConfig(period="month", include_merges=True))
    assert _val(pm, "commits", "2024-01").value == 5
    assert _val(pm, "review_coverage", "2024-01").numerator == 3


def test_review_keys_are_configurable(small):
    c, t = small
    pm = compute_period_metrics(c, t, config=MetricConfig(period="month",
                                                               review_keys=("Signed-off-by",)))
    assert _val(pm, "review_coverage", "2024-01").numerator == 1


def test_permuting_rows_changes_nothing(small):
    c, t = small
    rng = np.random.default_rng(3)
    a = compute_period_metrics(c, t).table
    b = compute_period_metrics(c.sample(frac=1, random_state=rng),
                               t.sample(frac=1, random_state=rng)).table
    pd.testing.assert_frame_equal(a, b)


def test_release_periods_first_tag_on_or_after_commit():
    c = commits_frame([dict(author_email="a@x.org", committer_date=d) for d in
                       ("2024-01-01", "2024-02-01 12:00", "2024-03-01", "2024-04-01")])
    tags = pd.DataFrame({"repo": "demo", "name": ["v1", "v2"], "commit_hash": ["x", "y"],
                         "tag_date": pd.to_datetime(["2024-02-01 12:00", "2024-03-15 00:00"], utc=True),
                         "tag_offset_min": 0, "is_annotated": True})
    labels, frame = assign_periods(c["committer_date"], "release", tags)
    # a commit dated exactly at a tag belongs to that tag
    assert list(labels) == ["v1", "v1", "v2", UNRELEASED]
    assert list(frame["period"]) == ["v1", "v2", UNRELEASED]


def test_calendar_periods_include_empty_ones():
    c = commits_frame([dict(author_email="a@x.org", committer_date=d)
                       for d in ("2024-01-05", "2024-04-05")])
    pm = compute_period_metrics(c, trailers_frame([]), config=MetricConfig(period="month"))
    s = pm.series("commits")
    assert list(s.period) == ["2024-01", "2024-02", "2024-03", "2024-04"]
    assert list(s.value) == [1, 0, 0, 1]
    rc = pm.series("review_coverage")
    assert rc.value.isna().sum() == 2


def test_subsystems_and_all():
    rng = np.random.default_rng(1)
    c, t, cs = simulated_commits(rng, n=400, start="2023-01-01", days=365,
                                 p_review=lambda d: 0.5, subsystems=("net", "fs"))
    pm = compute_period_metrics(c, t, commit_subsystems=cs,
                                config=MetricConfig(period="quarter"))
    n = pm.table[pm.table.metric == "commits"].groupby("subsystem")["value"].sum()
    assert n[ALL] == 400 and n["net"] + n["fs"] == 400


def test_tag_adoption_rising_caveat():
    rng = np.random.default_rng(7)
    c, t, _ = simulated_commits(rng, n=3000, start="2020-01-01", days=3 * 365,
                                p_review=lambda d: 0.5)
    frac = np.linspace(0, 1, len(c))
    c = c.assign(n_fix_refs=(rng.random(len(c)) < 0.02 + 0.25 * frac).astype(int))
    pm = compute_period_metrics(c, t, config=MetricConfig(period="quarter"))
    assert "tag_adoption_rising" in {cv.code for cv in pm.caveats}
    flat = c.assign(n_fix_refs=(rng.random(len(c)) < 0.15).astype(int))
    pm2 = compute_period_metrics(flat, t, config=MetricConfig(period="quarter"))
    assert "tag_adoption_rising" not in {cv.code for cv in pm2.caveats}


def test_wilson_bounds_are_exact_at_zero_and_all_successes():
    # Wilson (1927): with 0 successes the lower bound is 0 and with n successes the
    # upper bound is 1 (the score interval's closed form); the upper bound at 0/n is
    # z^2 / (n + z^2), here checked for n = 358.
    from procmetrics.analyse.measures.intervals import wilson
    z = 1.959963984540054
    lo, hi = wilson(np.array([0, 358]), np.array([358, 358]))
    assert lo[0] == 0.0 and hi[1] == 1.0
    assert hi[0] == pytest.approx(z**2 / (358 + z**2), rel=1e-9)


def test_lower_folds_each_value_as_python_does() -> None:
    """``_lower`` folds each distinct value once; oracle: ``str.strip().casefold()`` per
    row, missing values kept missing, values differing only after a NUL kept apart."""
    from procmetrics.analyse.measures.metrics import _lower

    values = [" Ann@Example.ORG ", None, "ß@x", float("nan"), "ann@example.org", "",
              "\x00", "A\x00B", "a\x00b ", pd.NA]
    got = _lower(pd.Series(values, dtype=object, index=range(10, 20), name="email"))
    want = [None if v is None or v is pd.NA or v != v else v.strip().casefold()
            for v in values]
    assert [None if v is pd.NA else v for v in got] == want
    assert str(got.dtype) == "string" and list(got.index) == list(range(10, 20))
    assert got.name == "email"
    # all text (pandas' string hash table: the case where it merges "" and "\x00")
    text = ["", "\x00", "A\x00B", "a", "A"]
    assert list(_lower(pd.Series(text, dtype=object))) == ["", "\x00", "a\x00b", "a", "a"]
