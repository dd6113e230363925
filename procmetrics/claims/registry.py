"""The claim kinds: every family's specifications and evaluators, and the judging loop."""
from __future__ import annotations

from dataclasses import replace
from typing import Any, Sequence

from procmetrics.claims import (
    at_date, carryover, carryover_faster, growth, handling, lifetime_step, lifetimes, shares,
    unsupportable,
)
from procmetrics.claims.handling import review_adoption_caveat
from procmetrics.claims.base import (
    NOT_SUPPORTABLE_KINDS, POLICY, UNDECIDABLE, Claim, ClaimContext, ClaimVerdict, KindSpec,
    Undecidable, history_blockers, undecidable,
)
from procmetrics.errors import ConfigError

_FAMILIES = (at_date, shares, handling, lifetimes, lifetime_step, growth, unsupportable,
             carryover, carryover_faster)
SPECS: dict[str, KindSpec] = {k: v for f in _FAMILIES for k, v in f.SPECS.items()}
EVALUATORS = {k: v for f in _FAMILIES for k, v in f.EVALUATORS.items()}
SHARE_METRICS = shares.SHARE_METRICS
#: claim parameters that name a subsystem of the store
SUBSYSTEM_PARAMS = ("subsystem", "control")


def check_usable(claims: Sequence[Claim], ctx: ClaimContext) -> None:
    """Raise :class:`ConfigError` for a claim the user wrote wrongly for this store.

    A claim that says ``"policy"`` when no policy date was given, or names a
    subsystem the store does not have, is a usage mistake (exit 2), not a
    property of the data (undecidable). Checked for every claim before any is
    judged, so ``check`` and ``report`` stop at once with one line.
    """
    known: set[str] | None = None
    cs = ctx.commit_subsystems
    if cs is not None and len(cs):
        known = set(cs["subsystem"].dropna().astype(str))
    for c in claims:
        where = f"claim {c.id!r}" + (f" (line {c.line})" if c.line else "")
        spec = SPECS[c.kind]
        for name, prm in spec.params.items():
            if prm.type == "date" and c.params.get(name) == POLICY and ctx.policy_date is None:
                raise ConfigError(f"{where}: '{name} = \"policy\"' needs a policy date: give "
                                  "--policy-date")
        for name in SUBSYSTEM_PARAMS:
            sub = c.params.get(name)
            if sub is None or (known is not None and sub in known):
                continue
            have = ("the store maps no subsystems" if not known else
                    "known: " + ", ".join(sorted(known)[:12])
                    + (", ..." if len(known) > 12 else ""))
            raise ConfigError(f"{where}: {name} {sub!r} does not exist in the store ({have})")


def evaluate_claim(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    """Judge one claim (see :mod:`procmetrics.claims.base` for the verdicts).

    The verdict carries the report places of its evidence (``see``). Raises
    :class:`ConfigError` for a usage mistake (:func:`check_usable`).
    """
    from procmetrics.analyse.memo import kept_results

    with kept_results():          # the verdict and its caveats share flags and metrics
        return _evaluate_claim(claim, ctx)


def _evaluate_claim(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    ctx = ctx.for_claim(claim)
    check_usable([claim], ctx)
    spec = SPECS[claim.kind]
    if claim.kind in NOT_SUPPORTABLE_KINDS:
        v = EVALUATORS[claim.kind](claim, ctx)
    elif blockers := history_blockers(ctx):
        v = ClaimVerdict(claim, UNDECIDABLE, tuple(blockers), spec.method)
    else:
        try:
            v = EVALUATORS[claim.kind](claim, ctx)
        except Undecidable as exc:
            v = undecidable(claim, spec.method, str(exc))
    v = v if v.see else replace(v, see=spec.see)
    if ctx.scope is not None:
        v = replace(v, reasons=(*v.reasons, scope_reason(ctx.scope)))
    return with_review_adoption(v, ctx)


def scope_reason(summary: Any) -> str:
    """What the claim's data were cut to (procmetrics.scope), as one reason line."""
    d = summary.to_dict()
    parts = []
    if d["scope"] is not None:
        parts.append(f"judged on the scope {d['scope']['name']!r} (file SHA-256 "
                     f"{d['scope']['file_sha256'][:16]}...): {d['n_commits']:,} of "
                     f"{d['n_commits_window']:,} non-merge commits"
                     + (f" ({d['commit_share']:.1%})" if d["commit_share"] is not None else "")
                     + f", {d['n_defects']:,} of {d['n_defects_window']:,} defects")
    if d["since"] or d["until"]:
        parts.append("committer-date window " + (d["since"] or "start")[:10] + " to "
                     + (d["until"] or "tip")[:10])
    return "; ".join(parts)


def with_review_adoption(verdict: ClaimVerdict, ctx: ClaimContext) -> ClaimVerdict:
    """Add a ``review_adoption_unsettled`` caution to a claim on a review metric whose
    window starts before review trailers settled into use (it does not change the verdict)."""
    cv = review_adoption_caveat(verdict.claim, ctx)
    if cv is None or verdict.verdict == UNDECIDABLE:
        return verdict
    return replace(verdict, reasons=(*verdict.reasons, f"caution: {cv.message}"),
                   caveats=(*verdict.caveats, cv))


def evaluate_claims(claims: Sequence[Claim], ctx: ClaimContext) -> list[ClaimVerdict]:
    """Check that the claims fit the store (:func:`check_usable`), then judge each."""
    from procmetrics.analyse.memo import kept_results

    check_usable(claims, ctx)
    for c in claims:                      # a scope the claims name must exist: exit 2 first
        ctx.for_claim(c)
    with kept_results():                  # claims share their tables' flags and metrics
        return [evaluate_claim(c, ctx) for c in claims]
