"""Figures a person reads: labels with units, shares in percent, bands and bars with
intervals, partial periods and pre-adoption time marked, legends outside the axes,
numerical warnings captured rather than printed."""
from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from procmetrics.plot import style as st
from procmetrics.plot.distributions import dkw_epsilon, plot_count_shares, plot_ecdf
from procmetrics.plot.series import plot_series
from procmetrics.report.plots import count_shares


def _rows(n_periods: int = 8) -> pd.DataFrame:
    starts = pd.date_range("2020-01-01", periods=n_periods, freq="QS", tz="UTC")
    ends = starts + pd.offsets.QuarterBegin(startingMonth=1)
    x = np.arange(n_periods) % 5 + 1
    n = np.full(n_periods, 20)
    lo, hi = x / n * 0.5, np.minimum(1, x / n * 1.8)
    return pd.DataFrame({"period": [f"p{i}" for i in range(n_periods)], "period_start": starts,
                         "period_end": ends, "subsystem": "(all)", "metric": "review_coverage",
                         "numerator": x, "denominator": n, "value": x / n, "ci_low": lo,
                         "ci_high": hi, "ci_method": "Wilson score", "n": n})


def test_dkw_band_matches_statsmodels():
    from statsmodels.distributions.empirical_distribution import _conf_set  # oracle

    for n in (5, 50, 3880):
        F = np.arange(1, n + 1) / n
        lower, _ = _conf_set(F, alpha=0.05)
        eps = dkw_epsilon(n, 0.95)
        assert np.allclose(np.clip(F - eps, 0, 1), lower, rtol=0, atol=1e-12)


def test_series_in_percent_with_units_partial_periods_and_pre_use_shading():
    rows = _rows()
    span = (pd.Timestamp("2020-02-15", tz="UTC"), pd.Timestamp("2021-11-20", tz="UTC"))
    ax = plot_series(rows, span=span, first_use=pd.Timestamp("2020-05-01", tz="UTC"),
                     first_use_what="review trailer")
    assert ax.get_ylabel() == "Review coverage (% of commits)"
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any(lab.startswith("partial period") for lab in labels)
    assert any("before the first review trailer (2020-05-01)" in lab for lab in labels)
    # the legend sits below the axes (outside the data)
    leg = ax.get_legend()
    assert leg.get_bbox_to_anchor().transformed(ax.transAxes.inverted()).y1 < 0
    # every interval bar lies inside the axis: percent scale, not clipped
    bottom, top = ax.get_ylim()
    assert bottom <= 100 * rows["ci_low"].min() and top >= 100 * rows["ci_high"].max()
    assert top <= 102


def test_reviewer_bars_have_wilson_intervals():
    from statsmodels.stats.proportion import proportion_confint  # oracle

    samples = {"before": np.array([0, 0, 1, 2, 0, 1, 7]), "after": np.array([1, 2, 2, 3])}
    t = count_shares(samples, level=0.95)
    row = t[(t["group"] == "before") & (t["value"] == "0")].iloc[0]
    lo, hi = proportion_confint(3, 7, alpha=0.05, method="wilson")
    assert row["share"] == pytest.approx(3 / 7) and row["ci_low"] == pytest.approx(lo)
    assert row["ci_high"] == pytest.approx(hi)
    assert "5+" in set(t.loc[t["group"] == "before", "value"])      # top-coded
    ax = plot_count_shares(t, quantity="reviewers per commit")
    assert ax.get_ylabel() == "% of commits"
    assert len(ax.patches) == len(t)


def test_ecdf_groups_differ_by_dash_not_only_colour():
    ax = plot_ecdf({"before": np.arange(10.0), "after": np.arange(5.0)}, quantity="lines")
    styles = {line.get_linestyle() for line in ax.get_lines()}
    assert len(styles) == 2
    assert st.OKABE_ITO["blue"].lower() in {line.get_color().lower() for line in ax.get_lines()}


def test_numerical_warnings_are_counted_not_printed():
    from procmetrics.report.build import numerical_warnings

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        with np.errstate(divide="warn"):      # whatever a library set globally
            np.log(np.zeros(3))
        warnings.warn("overflow encountered in exp", RuntimeWarning)
        warnings.warn("Maximum Likelihood optimization failed to converge", UserWarning)
        warnings.warn("old API", DeprecationWarning)
    t = numerical_warnings(caught)
    assert int(t["count"].sum()) == 3
    assert int(t.loc[t["convergence"], "count"].sum()) == 1
    assert "DeprecationWarning" not in set(t["category"])


def test_a_note_that_a_step_was_slow_is_not_a_numerical_warning():
    """matplotlib warns when placing a legend at loc="best" took over a second: whether
    that happens depends on the machine's load (one of two 1M reports of the same store
    had it), so it stays out of the table a rerun must reproduce; other matplotlib
    warnings stay in."""
    from procmetrics.report.build import numerical_warnings

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        warnings.warn('Creating legend with loc="best" can be slow with large amounts of '
                      'data.', UserWarning)
        warnings.warn("Attempting to set identical low and high xlims", UserWarning)
    t = numerical_warnings(caught)
    assert list(t["message"]) == ["Attempting to set identical low and high xlims"]


def test_subsystems_are_small_multiples_on_one_shared_axis():
    from procmetrics.plot.series import plot_series_facets

    a, b = _rows(), _rows()
    b = b.assign(subsystem="net", value=b["value"] / 2, ci_low=b["ci_low"] / 2,
                 ci_high=b["ci_high"] / 2)
    fig = plot_series_facets([("drivers", a, None), ("net", b, None)])
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert len(visible) == 2
    assert visible[0].get_ylim() == visible[1].get_ylim()          # one shared axis
    assert visible[0].get_title().startswith("drivers (n = ")
    assert "(% of commits)" in fig.get_supylabel()
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert "per period (n in each panel's title)" in labels
