"""Interrupted time series on simulated series with a known effect (ground truth)."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from procmetrics.analyse.change.its import interrupted_time_series
from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics
from procmetrics.errors import InsufficientData
from tests.analyse.series_data import simulated_commits

AT = pd.Timestamp("2021-01-01", tz="UTC")


def _table(seed, p_before, p_after, *, days=4 * 365, n=6000, start="2019-01-01",
           subsystems=("net", "fs"), control_change=True):
    rng = np.random.default_rng(seed)

    def p(d):
        return np.where(d >= AT, p_after, p_before)
    c, t, cs = simulated_commits(rng, n=n, start=start, days=days, p_review=p,
                                 subsystems=subsystems)
    if not control_change:  # only "net" changes: drop post-date reviews of "fs" commits
        fs_post = set(cs.loc[cs.subsystem == "fs", "hash"]) & set(c.loc[c.committer_date >= AT,
                                                                           "hash"])
        keep = rng.random(len(t)) < (p_before / p_after)
        t = t[~t.hash.isin(fs_post) | keep]
    return compute_period_metrics(c, t, commit_subsystems=cs,
                                  config=MetricConfig(period="month")).table


def test_level_change_recovered_with_interval():
    table = _table(1, 0.4, 0.7)
    r = interrupted_time_series(table, "review_coverage", AT)
    truth = np.log(0.7 / 0.3) - np.log(0.4 / 0.6)  # log-odds jump (simulation truth)
    assert r.level_change.low < truth < r.level_change.high
    assert r.slope_change.low < 0 < r.slope_change.high
    assert r.cov_type in ("nonrobust",) or r.cov_type.startswith("HAC")
    forced = interrupted_time_series(table, "review_coverage", AT, hac="always",
                                     placebo_shifts=0)
    assert forced.cov_type.startswith("HAC (Newey-West")
    assert (r.n_before, r.n_after) == (24, 24)
    assert len(r.placebo) > 0 and r.placebo_p_level == pytest.approx(1 / (1 + len(r.placebo)))
    assert r.fitted.loc[r.fitted.post, "extrapolated"].all()


def test_no_change_carries_absence_of_evidence():
    r = interrupted_time_series(_table(4, 0.5, 0.5), "review_coverage", AT)
    assert r.level_change.low < 0 < r.level_change.high
    assert "absence_of_evidence" in {c.code for c in r.caveats}


def test_false_level_changes_near_nominal_rate():
    # 60 simulated series without a change (truth: no effect): at the 95% level the
    # intervals for the level change may exclude 0 in about 5% of them; allow the
    # one-sided 99% binomial quantile.
    rng = np.random.default_rng(77)
    months = pd.date_range("2019-01-01", periods=48, freq="MS", tz="UTC")
    hits = 0
    for _ in range(60):
        m = rng.integers(100, 150, 48)
        x = rng.binomial(m, 0.5)
        tab = pd.DataFrame({"period": [f"{d:%Y-%m}" for d in months], "period_start": months,
                            "period_end": months + pd.offsets.MonthBegin(1),
                            "subsystem": "(all)", "metric": "review_coverage",
                            "numerator": x, "denominator": m, "value": x / m, "n": m})
        r = interrupted_time_series(tab, "review_coverage", AT, placebo_shifts=0)
        hits += not (r.level_change.low <= 0 <= r.level_change.high)
    assert hits <= stats.binom.ppf(0.99, 60, 0.05)


def test_control_series_that_changed_too_is_flagged():
    table = _table(3, 0.4, 0.7)
    r = interrupted_time_series(table, "review_coverage", AT, subsystem="net",
                                control_subsystem="fs")
    assert "not_identifiable" in {c.code for c in r.caveats}
    clean = _table(3, 0.4, 0.7, control_change=False)
    r2 = interrupted_time_series(clean, "review_coverage", AT, subsystem="net",
                                 control_subsystem="fs")
    assert r2.control_level_change.low < 0.3
    assert "not_identifiable" not in {c.code for c in r2.caveats}


def test_short_segments_warn_and_too_short_refuse():
    table = _table(4, 0.4, 0.7, days=16 * 30.5, start="2020-05-01", n=1500)
    r = interrupted_time_series(table, "review_coverage", AT, placebo_shifts=0)
    assert "too_few_observations" in {c.code for c in r.caveats}
    with pytest.raises(InsufficientData):
        interrupted_time_series(table, "review_coverage", "2021-08-15")


def test_transition_period_is_left_out():
    table = _table(5, 0.4, 0.7)
    r = interrupted_time_series(table, "review_coverage", "2021-01-15", placebo_shifts=0)
    assert r.n_transition == 1 and r.n_before + r.n_after == 47


def test_share_of_zero_before_the_date_is_flagged_not_estimable():
    # Simulation with a known degenerate truth: nobody reviews before the date, so the
    # log-odds level change is infinite. The result must say so (not report a huge
    # number as an effect) and must not overflow while doing it.
    import warnings
    table = _table(3, 0.0, 0.5)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        r = interrupted_time_series(table, "review_coverage", AT)
    msgs = [c.message for c in r.caveats if c.code == "diagnostic_failed"]
    assert any("not estimable" in m for m in msgs)
    # and an ordinary change is not flagged that way
    r2 = interrupted_time_series(_table(1, 0.4, 0.7), "review_coverage", AT)
    assert not any("not estimable" in c.message for c in r2.caveats)


def test_level_and_slope_change_equal_a_direct_statsmodels_fit():
    # Oracle: statsmodels' binomial GLM on the segmented-regression design of Wagner
    # et al. (2002) (intercept, time, post, post x time), built here from the metric
    # table itself: period midpoints in years from the date.
    import statsmodels.api as sm
    table = _table(1, 0.4, 0.7)
    r = interrupted_time_series(table, "review_coverage", AT, guard=False)
    assert r.cov_type == "nonrobust" and "quasi" not in r.model   # plain binomial here
    s = table[(table.metric == "review_coverage") & (table.subsystem == "(all)")]
    s = s[(s.period_end <= AT) | (s.period_start >= AT)].sort_values("period_start")
    mid = s.period_start + (s.period_end - s.period_start) / 2
    t = ((mid - AT).dt.total_seconds() / (365.25 * 86400)).to_numpy()
    np.testing.assert_allclose(t, r.fitted["time_years"].to_numpy(), atol=2e-3)
    post = (s.period_start >= AT).to_numpy(float)
    X = np.column_stack([np.ones(len(t)), t, post, post * t])
    y, n = s.numerator.to_numpy(), s.denominator.to_numpy()
    ref = sm.GLM(np.column_stack([y, n - y]), X, family=sm.families.Binomial()).fit()
    ci = ref.conf_int(0.05)
    assert r.level_change.value == pytest.approx(ref.params[2], rel=1e-3)
    assert (r.level_change.low, r.level_change.high) == pytest.approx(tuple(ci[2]), rel=1e-2)
    assert r.slope_change.value == pytest.approx(ref.params[3], rel=1e-2)


def test_guarded_interval_is_the_wider_of_the_binomial_and_the_quasi_binomial_fit():
    """Oracle: two statsmodels GLMs on the same design, the binomial one (normal
    quantile) and the quasi-binomial one (scale = Pearson X2/df, Student t quantile on
    periods - 4 df, as the verdicts need): the level change's printed interval is the
    wider of the two around the binomial estimate, and its p-value comes from it."""
    import statsmodels.api as sm
    from scipy import stats

    table = _table(1, 0.4, 0.7)
    r = interrupted_time_series(table, "review_coverage", AT)
    s = table[(table.metric == "review_coverage") & (table.subsystem == "(all)")]
    s = s[(s.period_end <= AT) | (s.period_start >= AT)].sort_values("period_start")
    X = np.column_stack([np.ones(len(s)), r.fitted["time_years"].to_numpy(),
                         r.fitted["post"].to_numpy(float),
                         r.fitted["post"].to_numpy(float) * r.fitted["time_years"].to_numpy()])
    y, n = s.numerator.to_numpy(), s.denominator.to_numpy()
    endog = np.column_stack([y, n - y])
    plain = sm.GLM(endog, X, family=sm.families.Binomial()).fit()
    phi = plain.pearson_chi2 / plain.df_resid
    z = stats.norm.ppf(0.975)
    half = z * plain.bse[2]
    if phi > 1:
        t = stats.t.ppf(0.975, len(s) - 4)
        half = max(half, t * plain.bse[2] * np.sqrt(phi))
    assert r.level_change.value == pytest.approx(plain.params[2], rel=1e-6)
    assert (r.level_change.low, r.level_change.high) == pytest.approx(
        (plain.params[2] - half, plain.params[2] + half), rel=1e-3)
    own = interrupted_time_series(table, "review_coverage", AT, guard=False).level_change
    assert r.level_change.high - r.level_change.low >= own.high - own.low
    if phi > 1:
        se = half / t
        assert r.level_p_value == pytest.approx(
            2 * stats.t.sf(abs(plain.params[2]) / se, len(s) - 4), rel=1e-3)
        assert "refit" in r.level_change.method and r.guard_note


def test_level_change_at_is_the_guarded_level_change_of_the_full_its():
    """The per-subsystem tests of ``compare`` read ``level_change_at``. Oracle: the
    guarded interval built from statsmodels' binomial GLM (normal quantile) and its
    quasi-binomial scale (Student t on periods - 4 df), as in the test above, on a
    subsystem series; and the full ITS gives the same estimate, interval and p-value."""
    import statsmodels.api as sm

    from procmetrics.analyse.change.levels import level_change_at

    table = _table(1, 0.4, 0.7)
    for sub in ("net", "fs"):
        lc = level_change_at(table, "review_coverage", AT, subsystem=sub)
        full = interrupted_time_series(table, "review_coverage", AT, subsystem=sub,
                                       placebo_shifts=0)
        assert lc.level_change == full.level_change
        assert lc.p_value == full.level_p_value
        assert (lc.n_before, lc.n_after) == (full.n_before, full.n_after) == (24, 24)
        assert lc.estimable
        s = table[(table.metric == "review_coverage") & (table.subsystem == sub)]
        s = s[(s.period_end <= AT) | (s.period_start >= AT)].sort_values("period_start")
        t, post = full.fitted["time_years"].to_numpy(), full.fitted["post"].to_numpy(float)
        X = np.column_stack([np.ones(len(s)), t, post, post * t])
        y, n = s.numerator.to_numpy(), s.denominator.to_numpy()
        plain = sm.GLM(np.column_stack([y, n - y]), X, family=sm.families.Binomial()).fit()
        phi = plain.pearson_chi2 / plain.df_resid
        half = stats.norm.ppf(0.975) * plain.bse[2]
        if phi > 1:
            half = max(half, stats.t.ppf(0.975, len(s) - 4) * plain.bse[2] * np.sqrt(phi))
        assert lc.level_change.value == pytest.approx(plain.params[2], rel=1e-6)
        assert (lc.level_change.low, lc.level_change.high) == pytest.approx(
            (plain.params[2] - half, plain.params[2] + half), rel=1e-3)


def test_level_change_at_says_not_estimable_where_the_its_caveat_does():
    # Simulation with a known degenerate truth: no review before the date.
    from procmetrics.analyse.change.levels import level_change_at

    table = _table(3, 0.0, 0.5)
    lc = level_change_at(table, "review_coverage", AT, subsystem="net")
    full = interrupted_time_series(table, "review_coverage", AT, subsystem="net",
                                   placebo_shifts=0)
    assert not lc.estimable
    assert any("not estimable" in c.message for c in full.caveats)
    with pytest.raises(InsufficientData):
        level_change_at(table, "review_coverage", "2018-06-01", subsystem="net")


def test_level_changes_of_a_split_table_equal_one_test_at_a_time():
    """``compare`` splits the metric table into its series once (``level_changes``);
    every result, and every refusal, equals ``level_change_at`` on the whole table
    (oracle above: statsmodels), including a subsystem the table lacks."""
    from procmetrics.analyse.change import levels as its

    table = _table(1, 0.4, 0.7)
    metrics = ("review_coverage", "fix_ratio", "commits")
    subs = ("fs", "net", "no-such-subsystem")
    got = list(its.level_changes(table, metrics, AT, subs))
    assert [(s, m) for s, m, _ in got] == [(s, m) for s in subs for m in metrics]
    for s, m, r in got:
        try:
            one = its.level_change_at(table, m, AT, subsystem=s)
        except InsufficientData as exc:
            assert isinstance(r, InsufficientData) and str(r) == str(exc)
            continue
        assert repr(r) == repr(one)         # NaN bounds compare equal as text
    assert sum(isinstance(r, InsufficientData) for *_, r in got) >= len(metrics)
    parts = dict(tuple(table.groupby("subsystem", sort=False)))      # as compare has them
    assert repr(list(its.level_changes(table, metrics, AT, subs, parts=parts))) == repr(got)


def test_design_is_kept_per_grid_and_each_caller_gets_a_copy(monkeypatch):
    """Inside kept_results the design is computed once per period grid and date (two
    subsystems with the same grid share it) and each caller gets a copy; outside,
    nothing is kept."""
    from procmetrics.analyse.change import itsfit
    from procmetrics.analyse.memo import kept_results

    table = _table(1, 0.4, 0.7)
    net, fs = (table[(table.metric == "review_coverage") & (table.subsystem == sub)]
               for sub in ("net", "fs"))
    calls = []
    real = itsfit.period_midpoints

    def counted(s):
        calls.append(len(s))
        return real(s)

    monkeypatch.setattr(itsfit, "period_midpoints", counted)    # one call per computation
    with kept_results():
        X, t, post = itsfit.design(net, AT)
        X[:] = 0.0
        t[:] = 0.0
        X2, t2, post2 = itsfit.design(fs, AT)       # same grid: kept, a fresh copy
        assert len(calls) == 1
        assert X2[:, 0].tolist() == [1.0] * len(fs) and np.abs(t2).sum() > 0
        assert np.array_equal(post, post2) and np.array_equal(X2[:, 2], post2)
        later = itsfit.design(net, AT + pd.Timedelta(days=90))[2]  # another key
        assert len(calls) == 2 and later.sum() < post2.sum()
    itsfit.design(net, AT)
    itsfit.design(net, AT)
    assert len(calls) == 4                  # outside a block: the plain function
