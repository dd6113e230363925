"""Calibration of ``carryover_faster_after`` by seeded simulation with a known truth.

Simulation (invented): upstream fixes land uniformly over 720 days; the tree is
judged 60 days after the last possible landing (day 780); the claim's date is
day 360. Latency is exponential (proportional hazards hold by construction)
with median 60 days before the date and ``factor`` x 60 days from it; a fix not
carried by the tip is censored at its gap (right-censoring, as in a real tree).
The claim is judged by ``judge_faster`` (the code ``procmetrics check`` runs) on
the frame ``survival_frame`` would build; the store path is exercised on the
generated pair below.

Nominal level: one-sided alpha/2 = 0.025 (95% intervals). A rate that must not
exceed nominal is asserted against ``binom.ppf(0.99, R, 0.025)`` (the
Monte-Carlo allowance of R replicates); power against ``binom.ppf(0.01, R,
0.95)``. Each test prints its rate with a Clopper-Pearson MC interval, its
replicate count and which model decided (one Cox fit with its Schoenfeld test
costs about 50 ms, so replicate counts are a few hundred at most).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from procmetrics.claims.base import SUPPORTED, UNDECIDABLE, Claim, ClaimContext, Undecidable
from procmetrics.claims.carryover_faster import NO_ATTRIBUTION, TREND_NOTE, judge_faster
from procmetrics.claims.registry import evaluate_claim
from tests.claims.sim import rate_line

NOMINAL = 0.025
T0 = pd.Timestamp("2020-01-01", tz="UTC")
SPAN, TIP, N = 720.0, 780.0, 200
DATE = T0 + pd.Timedelta(days=SPAN / 2)
END = T0 + pd.Timedelta(days=TIP)
CLAIM = Claim("f", "upstream fixes are carried over faster after the date",
              "carryover_faster_after", {"date": f"{DATE:%Y-%m-%d}"})


def _frame(rng, n=N, factor=1.0, trend=None):
    land = rng.uniform(0, SPAN, n)
    med = np.where(land >= SPAN / 2, 60.0 * factor, 60.0)
    if trend is not None:       # log-median linear in the landing day, no step at the date
        a, b = trend
        med = np.exp(np.log(a) + (np.log(b) - np.log(a)) * land / SPAN)
    lat = rng.exponential(med / np.log(2))
    gap = TIP - land
    carried = lat <= gap
    return pd.DataFrame({"fix_date": T0 + pd.to_timedelta(land, unit="D"),
                         "latency": np.where(carried, lat, gap), "carried": carried})


def _run(seed, reps, **kw):
    rng = np.random.default_rng(seed)
    k, used, texts = 0, {}, []
    for _ in range(reps):
        try:
            v = judge_faster(CLAIM, _frame(rng, **kw), DATE, END)
        except Undecidable:
            used["undecidable"] = used.get("undecidable", 0) + 1
            continue
        m = v.method.rsplit("used: ", 1)[-1]
        used[m] = used.get(m, 0) + 1
        if v.verdict == SUPPORTED:
            k += 1
            texts.append((m, " ".join(v.reasons)))
    return k, used, texts


def _max_false(reps):
    return int(stats.binom.ppf(0.99, reps, NOMINAL))


@pytest.mark.slow
def test_no_change_false_support_at_most_nominal():
    reps = 200
    k, used, _ = _run(301, reps)
    print(rate_line(f"no change, n={N}: supported", k, reps), used)
    assert k <= _max_false(reps)


@pytest.mark.slow
def test_latencies_15_percent_longer_after_rarely_supported():
    reps = 120
    k, used, _ = _run(302, reps, factor=1.15)
    print(rate_line(f"15% longer after, n={N}: supported", k, reps), used)
    assert k <= _max_false(reps)


def test_large_speed_up_is_found():
    reps = 60
    k, used, _ = _run(303, reps, factor=0.25)
    print(rate_line(f"median 60 -> 15 days, n={N}: supported (power)", k, reps), used)
    assert k >= stats.binom.ppf(0.01, reps, 0.95)


@pytest.mark.slow
def test_steady_trend_without_a_step_is_not_attributed_to_the_date():
    """Carry-over getting faster all along (median 120 -> 30 days over the span), no
    step: the trend-aware Cox model supports a step at most at the nominal rate; a
    cohort comparison (restricted mean, when proportional hazards fail) may support
    the cohort difference, which is true, and then says it attributes nothing."""
    reps = 120
    k, used, texts = _run(304, reps, trend=(120.0, 30.0))
    k_cox = sum(m == "trend-aware Cox" for m, _ in texts)
    print(rate_line(f"steady trend, no step, n={N}: step supported by the trend-aware Cox",
                    k_cox, reps), used, f"cohort-supported: {k - k_cox}")
    assert k_cox <= _max_false(reps)
    assert all(NO_ATTRIBUTION in t for m, t in texts if m != "trend-aware Cox")


def test_verdict_texts_say_what_they_attribute():
    v = judge_faster(CLAIM, _frame(np.random.default_rng(305), factor=0.25), DATE, END)
    assert v.verdict == SUPPORTED and "trend-aware Cox" in v.method
    assert TREND_NOTE in v.reasons
    assert v.test["p_value"] < 0.025 and v.estimate.low > 1


def test_without_upstream_or_with_too_few_fixes_undecidable():
    ctx = ClaimContext(commits=None, trailers=None, fix_links=None)
    assert evaluate_claim(CLAIM, ctx).verdict == UNDECIDABLE
    f = _frame(np.random.default_rng(306), n=30)
    with pytest.raises(Undecidable, match="at least 20 each"):
        judge_faster(CLAIM, f, DATE, END)
