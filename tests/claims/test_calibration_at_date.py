"""Calibration of the change-at-a-date claims (rose_after / fell_after) by simulation.

Known truth (invented series, :mod:`tests.claims.sim`): 48 months of review
coverage, about 120 commits a month, logit coverage rising linearly by 0.6 per
year, the claimed date after month 24. The claims are judged by the same code
as ``procmetrics check`` from the per-period table on (``its_on_table`` then
``judge_change_at_date``); the table is drawn directly as binomial counts so
that hundreds of replicates run in seconds (the commit-level path is exercised
in ``test_claims_at_date.py``).

Nominal level: a one-sided test at alpha/2 = 0.025 (claims at the default 95%
level). A false-support rate is asserted not to exceed what a true rate of
0.025 gives in 99% of runs (``binom.ppf(0.99, R, 0.025)``): that allows the
Monte-Carlo error of R replicates, stated as a Clopper-Pearson interval in the
printed line.

Measured while building this (other seeds, for the record): trend, no step,
1,000 replicates: 25 supported (0.025, MC interval 0.016-0.037). Beta-binomial
months, dispersion about 3.4 (rho = 0.02): 20 of 600 (0.033, 0.020-0.051) with
the fit's own interval, 19 of 1,000 (0.019, 0.011-0.030) with the guarded interval
that the section and the verdict now share (:mod:`procmetrics.analyse.change.its`: the
widest of the fit's own and a model-based quasi-binomial refit, t quantile).
Dispersion about 1.4 (rho = 0.003, below the fit's switch to quasi-binomial
at 1.5): 20 of 400 (0.050, 0.031-0.076) with the fit's own binomial interval,
14 of 400 (0.035, 0.019-0.058) with the quasi-binomial refit alone.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from procmetrics.claims.at_date import its_on_table, judge_change_at_date
from procmetrics.claims.base import SUPPORTED, Claim, Undecidable
from tests.claims.sim import rate_line, share_table

NOMINAL = 0.025
ROSE = Claim("r", "coverage rose at the date", "rose_after",
             {"metric": "review_coverage", "date": "policy"})
FELL = Claim("f", "coverage fell at the date", "fell_after",
             {"metric": "review_coverage", "date": "policy"})


def _rate(seed: int, reps: int, claim: Claim, **kw) -> int:
    rng = np.random.default_rng(seed)
    k = 0
    for _ in range(reps):
        table, at = share_table(rng, **kw)
        r, s = its_on_table(table, "review_coverage", at, placebo_shifts=0)
        try:
            v = judge_change_at_date(claim, r, s, up=claim.kind == "rose_after",
                                     period="month")
        except Undecidable:
            continue
        k += v.verdict == SUPPORTED
    return k


def _max_false(reps: int) -> int:
    return int(stats.binom.ppf(0.99, reps, NOMINAL))


@pytest.mark.slow
def test_rising_trend_without_step_is_not_called_a_rise_at_the_date():
    reps = 250
    k = _rate(101, reps, ROSE, slope_per_year=0.6)
    print(rate_line("trend 0.6/yr, no step: rose_after supported", k, reps))
    assert k <= _max_false(reps)


@pytest.mark.slow
def test_overdispersed_trend_without_step_is_not_called_a_rise():
    # beta-binomial months (rho = 0.02: Pearson dispersion about 3.4 at 120 commits):
    # the section's model switches to quasi-binomial
    reps = 250
    k = _rate(102, reps, ROSE, slope_per_year=0.6, rho=0.02)
    print(rate_line("beta-binomial rho 0.02, trend, no step: rose_after supported", k, reps))
    assert k <= _max_false(reps)


@pytest.mark.slow
def test_mildly_overdispersed_trend_without_step_is_not_called_a_rise():
    # rho = 0.003: dispersion about 1.4, below the section's switch to quasi-binomial
    # (1.5); with the section's binomial interval alone this gave 20 of 400 (0.050)
    reps = 250
    k = _rate(106, reps, ROSE, slope_per_year=0.6, rho=0.003)
    print(rate_line("beta-binomial rho 0.003, trend, no step: rose_after supported", k, reps))
    assert k <= _max_false(reps)


@pytest.mark.slow
def test_falling_claim_on_a_falling_trend_without_step():
    reps = 100
    k = _rate(103, reps, FELL, slope_per_year=-0.6)
    print(rate_line("trend -0.6/yr, no step: fell_after supported", k, reps))
    assert k <= _max_false(reps)


@pytest.mark.slow
def test_power_for_a_real_step_on_top_of_the_trend():
    # a step of 0.5 log-odds (odds ratio 1.65) at the date, on top of the same trend
    reps = 80
    k = _rate(104, reps, ROSE, slope_per_year=0.6, step=0.5)
    lo = stats.beta.ppf(0.025, k, reps - k + 1)
    print(rate_line("trend + step 0.5: rose_after supported (power)", k, reps))
    assert k / reps >= 0.8, f"power {k}/{reps} (MC lower bound {lo:.3f})"
    # and the step the other way is never a rise
    k_down = _rate(105, 30, ROSE, slope_per_year=0.6, step=-0.5)
    print(rate_line("trend + step -0.5: rose_after supported", k_down, 30))
    assert k_down == 0
