"""Does the verdict survive? Each claim re-judged under other reasonable analysis choices.

A verdict rests on choices an analyst makes before looking: the period of the
per-period models, the clock (committer or author dates), the follow-up horizon
of a lifetime comparison, where the fix-linking era starts. This module judges
every claim again under each alternative in :data:`PANEL` (one choice changed at
a time, everything else as in the main verdict) with the same evaluator
(:func:`procmetrics.claims.registry.evaluate_claim`) and reports the verdicts
side by side. A claim whose verdict is not the same under every alternative is
**fragile**: the report marks it, the JSON carries the choices that flip it, and
``check`` sets bit 16 of its exit code.

An alternative a kind does not use leaves its evidence unchanged; the panel shows
it as "not used by this kind" rather than as a confirmation.

References
----------
Steegen, S., Tuerlinckx, F., Gelman, A. & Vanpaemel, W. (2016). Increasing
transparency through a multiverse analysis. Perspectives on Psychological
Science 11(5):702-712 (one verdict per reasonable set of choices, side by side).
Simonsohn, U., Simmons, J. P. & Nelson, L. D. (2020). Specification curve
analysis. Nature Human Behaviour 4:1208-1214.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

import pandas as pd

from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict

#: later start of the link era: this long after the first linked fix
LATER_LINK_ERA_DAYS = 365
#: multipliers of the lifetime comparison's follow-up horizon
HORIZON_FACTORS = (0.5, 2.0)
#: with --since/--until: the window started this much later, ended this much earlier
WINDOW_SHIFT_DAYS = 365

#: the panel's choices and ranges, as listed in the report and the README
PANEL: tuple[tuple[str, str], ...] = (
    ("period", "month and quarter (per-period models of shares, trends, before/after)"),
    ("date basis", "committer dates and author dates (windows, periods, fix times)"),
    ("lifetime horizon", "the claim's follow-up horizon ×0.5 and ×2 (lifetime and carry-over "
                         "comparisons)"),
    ("link era start", f"the first linked fix, and {LATER_LINK_ERA_DAYS} days after it "
                       "(fix-event and defect selections; the growth and median claims "
                       "start by default where linking has settled, and the median never "
                       "starts earlier than that)"),
    ("change-point penalty", "not used by any claim kind of this version (change points "
                             "inform the report's before/after section only)"),
    ("window", f"only with --since/--until: the window started {WINDOW_SHIFT_DAYS} days later "
               f"and ended {WINDOW_SHIFT_DAYS} days earlier (same scope rules)"),
)


@dataclass(frozen=True)
class Variant:
    """One alternative choice: a name, and how it changes a claim and its context."""

    axis: str
    label: str
    apply: Callable[[Claim, ClaimContext], tuple[Claim, ClaimContext] | None]


@dataclass(frozen=True)
class PanelRow:
    axis: str
    label: str
    verdict: str
    evidence: str
    used: bool

    def to_dict(self) -> dict[str, Any]:
        return {"axis": self.axis, "choice": self.label, "verdict": self.verdict,
                "evidence": self.evidence, "used": self.used}


@dataclass(frozen=True)
class Robustness:
    """The panel of one claim: its main verdict and the verdict under each alternative."""

    claim_id: str
    verdict: str
    rows: tuple[PanelRow, ...]

    @property
    def flipped_by(self) -> tuple[str, ...]:
        return tuple(f"{r.axis}: {r.label} → {cl.VERDICT_LABELS[r.verdict]}"
                     for r in self.rows if r.verdict != self.verdict)

    @property
    def fragile(self) -> bool:
        return bool(self.flipped_by)

    def to_dict(self) -> dict[str, Any]:
        return {"fragile": self.fragile, "flipped_by": list(self.flipped_by),
                "variants": [r.to_dict() for r in self.rows]}


def _first_link(ctx: ClaimContext) -> pd.Timestamp | None:
    fl = ctx.fix_links
    ok = fl[fl["status"].astype(str) == "resolved"]["fix_hash"]
    d = ctx.history.loc[ctx.history["hash"].isin(set(ok)), "committer_date"]
    return None if d.empty else pd.Timestamp(d.min())


def _horizon(claim: Claim, ctx: ClaimContext, factor: float) -> tuple[Claim, ClaimContext] | None:
    if "horizon_days" not in _spec_params(claim.kind) or "date" not in claim.params:
        return None
    h = claim.params.get("horizon_days")
    if not h:
        # the evaluator's default: half the span after the date, at most a year
        try:
            date = cl.resolve_date(claim.params["date"], ctx, "date")
        except cl.Undecidable:
            return None
        end = ctx.history[f"{ctx.date_basis}_date"].max()
        if pd.isna(end) or date >= end:
            return None
        h = min(365.0, (end - date).days / 2)
    return replace(claim, params={**claim.params, "horizon_days": float(h) * factor}), ctx


def _spec_params(kind: str) -> Sequence[str]:
    from procmetrics.claims.registry import SPECS

    return tuple(SPECS[kind].params)


def variants(ctx: ClaimContext) -> list[Variant]:
    """The alternatives of :data:`PANEL` for this context (the main choice left out)."""
    out: list[Variant] = []
    for p in ("month", "quarter"):
        if p != ctx.period:
            out.append(Variant("period", p, lambda c, x, p=p: (c, replace(x, period=p))))
    for b in ("committer", "author"):
        if b != ctx.date_basis:
            out.append(Variant("date basis", f"{b} dates",
                               lambda c, x, b=b: (c, replace(x, date_basis=b))))
    for f in HORIZON_FACTORS:
        out.append(Variant("lifetime horizon", f"×{f:g}",
                           lambda c, x, f=f: _horizon(c, x, f)))
    first = _first_link(ctx)
    if first is not None:
        out.append(Variant("link era start", f"{first:%Y-%m-%d} (the first linked fix)",
                           lambda c, x, t=first: (c, replace(x, links_from=t))))
        later = first + pd.Timedelta(days=LATER_LINK_ERA_DAYS)
        out.append(Variant("link era start", f"{later:%Y-%m-%d} ({LATER_LINK_ERA_DAYS} days "
                           "after the first linked fix)",
                           lambda c, x, t=later: (c, replace(x, links_from=t))))
    sc = ctx.scope
    shift = pd.Timedelta(days=WINDOW_SHIFT_DAYS)
    if sc is not None and sc.since is not None:
        out.append(Variant("window", f"from {sc.since + shift:%Y-%m-%d} ({WINDOW_SHIFT_DAYS} "
                           "days later)", lambda c, x, t=sc.since + shift: _window(c, x, t, None)))
    if sc is not None and sc.until is not None:
        out.append(Variant("window", f"to {sc.until - shift:%Y-%m-%d} ({WINDOW_SHIFT_DAYS} "
                           "days earlier)", lambda c, x, t=sc.until - shift: _window(c, x, None, t)))
    return out


def _window(claim: Claim, ctx: ClaimContext, since: pd.Timestamp | None,
            until: pd.Timestamp | None) -> tuple[Claim, ClaimContext] | None:
    """The context cut to a narrower window by the rules of procmetrics.scope.apply."""
    c, fl, h = ctx.commits, ctx.fix_links, ctx.history
    resolved = fl["status"].astype(str) == "resolved"
    if since is not None:
        c = c[c["committer_date"] >= since]
        born = (fl["intro_committer_date"] >= since).fillna(False).astype(bool)
        fl = fl[(resolved & born) | (~resolved & (fl["fix_committer_date"] >= since))]
    if until is not None:
        c = c[c["committer_date"] <= until]
        fl = fl[fl["fix_committer_date"] <= until]
        h = h[h["committer_date"] <= until]
    if not len(c):
        return None
    return claim, replace(ctx, commits=c.reset_index(drop=True),
                          fix_links=fl.reset_index(drop=True),
                          defect_commits=h.reset_index(drop=True))


def _evidence(v: ClaimVerdict) -> str:
    from procmetrics import textfmt

    e = v.estimate
    if e is None or e.value is None:
        return "no estimate"
    unit = e.unit or ""
    text = (textfmt.interval(e.value, e.low, e.high, unit) if e.low is not None
            and e.high is not None else textfmt.number(e.value, unit))
    return f"{e.name} {text}" + (f" {unit}" if unit in textfmt.WHOLE_UNITS else "") \
        + ("" if v.n is None else f", n = {v.n:,}")


def panel(claim: Claim, verdict: ClaimVerdict, ctx: ClaimContext) -> Robustness:
    """Judge ``claim`` under every alternative of :func:`variants`."""
    from procmetrics.claims.registry import evaluate_claim

    rows: list[PanelRow] = []
    if claim.kind not in cl.NOT_SUPPORTABLE_KINDS:
        base = (verdict.verdict, _evidence(verdict), verdict.reasons)
        for var in variants(ctx):
            changed = var.apply(claim, ctx)
            if changed is None:
                continue
            alt = evaluate_claim(*changed)
            used = (alt.verdict, _evidence(alt), alt.reasons) != base
            rows.append(PanelRow(var.axis, var.label, alt.verdict, _evidence(alt), used))
    return Robustness(claim.id, verdict.verdict, tuple(rows))


def judge_with_panel(claims: Sequence[Claim], ctx: ClaimContext
                     ) -> list[tuple[ClaimVerdict, Robustness]]:
    """Every claim's verdict with its robustness panel."""
    from procmetrics.claims.registry import evaluate_claim

    from procmetrics import progress
    from procmetrics.analyse.memo import kept_results

    out = []
    for c in claims:                      # a scope the claims name must exist: exit 2 first
        ctx.for_claim(c)
    with kept_results():                  # the panels' variants share unchanged steps
        for i, c in enumerate(claims, 1):
            progress.detail(f"claim {i} of {len(claims)}: {c.id} and its robustness panel")
            cctx = ctx.for_claim(c)       # the claim's scope: its panel varies that context
            v = evaluate_claim(c, cctx)
            out.append((v, panel(c, v, cctx)))
    return out


def any_fragile(panels: Sequence[Robustness]) -> bool:
    return any(p.fragile for p in panels)


__all__ = ["PANEL", "Robustness", "PanelRow", "Variant", "variants", "panel",
           "judge_with_panel", "any_fragile"]
