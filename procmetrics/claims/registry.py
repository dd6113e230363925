"""The claim kinds: every family's specifications and evaluators, and the judging loop."""
from __future__ import annotations

from dataclasses import replace
from typing import Sequence

from procmetrics.claims import growth, handling, lifetimes, shares, unsupportable
from procmetrics.claims.handling import review_adoption_caveat
from procmetrics.claims.base import (
    NOT_SUPPORTABLE_KINDS, UNDECIDABLE, Claim, ClaimContext, ClaimVerdict, KindSpec,
    Undecidable, history_blockers, undecidable,
)

_FAMILIES = (shares, handling, lifetimes, growth, unsupportable)
SPECS: dict[str, KindSpec] = {k: v for f in _FAMILIES for k, v in f.SPECS.items()}
EVALUATORS = {k: v for f in _FAMILIES for k, v in f.EVALUATORS.items()}
SHARE_METRICS = shares.SHARE_METRICS


def evaluate_claim(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    """Judge one claim (see the module docstring for the verdicts)."""
    spec = SPECS[claim.kind]
    if claim.kind in NOT_SUPPORTABLE_KINDS:
        return EVALUATORS[claim.kind](claim, ctx)
    blockers = history_blockers(ctx)
    if blockers:
        return ClaimVerdict(claim, UNDECIDABLE, tuple(blockers), spec.method)
    try:
        verdict = EVALUATORS[claim.kind](claim, ctx)
    except Undecidable as exc:
        return undecidable(claim, spec.method, str(exc))
    return with_review_adoption(verdict, ctx)


def with_review_adoption(verdict: ClaimVerdict, ctx: ClaimContext) -> ClaimVerdict:
    """Add a ``review_adoption_unsettled`` caution to a claim on a review metric whose
    window starts before review trailers settled into use (it does not change the verdict)."""
    cv = review_adoption_caveat(verdict.claim, ctx)
    if cv is None or verdict.verdict == UNDECIDABLE:
        return verdict
    return replace(verdict, reasons=(*verdict.reasons, f"caution: {cv.message}"),
                   caveats=(*verdict.caveats, cv))


def evaluate_claims(claims: Sequence[Claim], ctx: ClaimContext) -> list[ClaimVerdict]:
    return [evaluate_claim(c, ctx) for c in claims]
