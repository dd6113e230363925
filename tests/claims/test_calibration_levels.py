"""Calibration of the share-level claims (``at_least`` and ``applied_by_other_at_least``,
which decides through the same evaluator) by simulation with a known truth.

Invented histories (:mod:`tests.claims.sim`): 20 months, about 100 commits a
month; each commit is reviewed / applied by someone other than its author with a
true probability ``p``. The claims are judged from the commit rows by the same
code as ``procmetrics check`` (``evaluate_claim``).

Nominal level: one-sided at alpha/2 = 0.025. The boundary case (true share equal
to the threshold) is the no-effect case with the highest false-support rate; the
rate is asserted not to exceed what a true rate of 0.025 gives in 99% of runs
(``binom.ppf(0.99, R, 0.025)``), printed with its Clopper-Pearson interval.
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from scipy import stats

from procmetrics.claims.base import SUPPORTED, Claim, Undecidable
from procmetrics.claims.registry import evaluate_claim
from tests.claims.sim import rate_line, share_history

NOMINAL = 0.025
THRESHOLD = 0.60
LOGIT = float(np.log(THRESHOLD / (1 - THRESHOLD)))
REVIEW = Claim("a", "at least 60% reviewed", "at_least",
               {"metric": "review_coverage", "threshold": THRESHOLD})
APPLIED = Claim("b", "at least 60% applied by someone else", "applied_by_other_at_least",
                {"threshold": THRESHOLD})


def _ctx(rng: np.random.Generator, p: float, claim: Claim, rho: float = 0.0):
    ctx, _ = share_history(rng, n_periods=20, per_period=100, change_at=10,
                           intercept=float(np.log(p / (1 - p))), rho=rho)
    if claim.kind == "applied_by_other_at_least":
        # the same draw, read as "applied by someone else": reviewed commits keep the
        # maintainer as committer, the others are committed by their author
        c = ctx.commits.copy()
        own = ~c["hash"].isin(ctx.trailers["hash"])
        c.loc[own, "committer_email"] = c.loc[own, "author_email"]
        c.loc[own, "committer_name"] = c.loc[own, "author_name"]
        ctx = dataclasses.replace(ctx, commits=c, trailers=ctx.trailers.iloc[0:0])
    return ctx


def _count(seed: int, reps: int, claim: Claim, p: float, rho: float = 0.0) -> int:
    rng = np.random.default_rng(seed)
    k = 0
    for _ in range(reps):
        try:
            k += evaluate_claim(claim, _ctx(rng, p, claim, rho)).verdict == SUPPORTED
        except Undecidable:
            pass
    return k


@pytest.mark.slow
@pytest.mark.parametrize("claim,rho", [(REVIEW, 0.0), (APPLIED, 0.0), (REVIEW, 0.02)],
                         ids=["review", "applied_by_other", "review-overdispersed"])
def test_share_at_the_threshold_is_not_supported_above_the_nominal_rate(claim, rho):
    reps = 80
    k = _count(7, reps, claim, THRESHOLD, rho)
    print(rate_line(f"{claim.kind}, true share = threshold, rho={rho}", k, reps))
    assert k <= int(stats.binom.ppf(0.99, reps, NOMINAL))


@pytest.mark.parametrize("claim", [REVIEW, APPLIED], ids=["review", "applied_by_other"])
def test_share_above_the_threshold_is_found_and_below_it_never(claim):
    reps = 12
    up = _count(11, reps, claim, THRESHOLD + 0.08)
    down = _count(12, reps, claim, THRESHOLD - 0.08)
    print(rate_line(f"{claim.kind}, true share threshold + 8 points (power)", up, reps))
    print(rate_line(f"{claim.kind}, true share threshold - 8 points (other way)", down, reps))
    assert up >= 11 and down == 0
