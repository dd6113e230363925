"""Claims about a development process, checked against mined data.

A claim is a sentence an organisation wants to put before an assessor ("review
coverage rose after the policy change", "defects are fixed within 60 days").
Each claim kind maps to one method of the analysis layer and one decision
rule, and ends in one of four verdicts.

**One convention for every kind.** A claim states a direction (a share
*rose*, lifetimes are *shorter*, a share is *at least* a threshold). It is
tested one-sided in that direction at level alpha/2, where 1 - alpha is the
claim's ``level`` (default 0.95): the verdict is ``supported`` exactly when
the two-sided (1 - alpha) interval the report shows lies entirely on the
claimed side of the threshold. That is the same decision as rejecting "no
effect or an effect the other way" with a one-sided test at alpha/2 (2.5% at
the default level), so the interval printed beside a verdict always agrees
with it. :func:`decide` is the only place that turns an interval into a
verdict; every evaluator goes through it (:data:`ONE_SIDED_NOTE`).

``supported``
    the interval at the claim's level lies entirely on the claimed side of
    the threshold, and the method's preconditions hold;
``not_supported``
    the method applies, but the interval does not lie on the claimed side:
    either it points the other way, or it straddles the threshold (no
    evidence for the claim; which is not evidence against it);
``undecidable``
    this data cannot answer: too few observations, a failed diagnostic, a
    confounded measure (Fixes: adoption still rising), a shallow or
    rewritten history, too many unresolved fix references, a quantity the
    estimator cannot identify;
``not_supportable``
    no amount of commit data can support this kind of claim (for example
    "fewer than N defects remain": a history records defects that were found
    and fixed, never the ones still hidden).

The evaluation is pure: tidy DataFrames in, :class:`ClaimVerdict` out.

References
----------
Altman, D. G. & Bland, J. M. (1995). Absence of evidence is not evidence of
absence. BMJ 311:485 (the wording of ``not_supported``).
Littlewood, B. & Strigini, L. (1993). Validation of ultrahigh dependability for
software-based systems. CACM 36(11):69-80 (why residual-defect claims cannot be
supported by failure/fix histories).
"""
from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Sequence

import pandas as pd

from procmetrics.analyse.result import Caveat, Diagnostic, Estimate, to_plain
from procmetrics.errors import ConfigError

SUPPORTED = "supported"
NOT_SUPPORTED = "not_supported"
UNDECIDABLE = "undecidable"
NOT_SUPPORTABLE = "not_supportable"
VERDICTS: tuple[str, ...] = (SUPPORTED, NOT_SUPPORTED, UNDECIDABLE, NOT_SUPPORTABLE)
VERDICT_LABELS: dict[str, str] = {
    SUPPORTED: "supported",
    NOT_SUPPORTED: "not supported",
    UNDECIDABLE: "undecidable with this data",
    NOT_SUPPORTABLE: "not supportable by this kind of evidence",
}
#: the policy date given on the command line, usable as a date value
POLICY = "policy"
#: the testing convention, said once and shown with every verdict
ONE_SIDED_NOTE = ("one-sided test in the claimed direction at level alpha/2 = {half}: "
                  "supported only when the whole two-sided {level} interval lies on the "
                  "claimed side")


def wald_p_above(est: Estimate) -> float:
    """One-sided p-value of "the quantity exceeds 0" from a normal (Wald) interval
    symmetric about the estimate: z = value / (half-width / z_(level))."""
    from scipy import stats

    half = (est.high - est.low) / 2
    z = est.value / (half / float(stats.norm.ppf(0.5 + est.level / 2)))
    return float(stats.norm.sf(z))


def one_sided_level(level: float) -> float:
    """The one-sided test level alpha/2 that a two-sided ``level`` interval carries."""
    return round((1.0 - level) / 2.0, 10)


@dataclass(frozen=True)
class Param:
    """One parameter of a claim kind: its type and whether it is required."""

    type: str            # "date" | "share" | "days" | "years" | "count" | "text" | "number"
    required: bool = False
    help: str = ""


@dataclass(frozen=True)
class KindSpec:
    """A claim kind: what it claims, its parameters, its method and direction.

    ``direction`` says which side of the threshold the claim asserts (in
    words, for ``--list-kinds`` and the README); ``see`` names the report
    places (``section:``, ``figure:``, ``table:`` keys) that carry the
    evidence for claims of this kind.
    """

    summary: str
    params: Mapping[str, Param]
    method: str
    direction: str = ""
    see: tuple[str, ...] = ()


@dataclass(frozen=True)
class Claim:
    """One claim as read from a claims file (``params`` already type-checked)."""

    id: str
    text: str
    kind: str
    params: Mapping[str, Any] = field(default_factory=dict)
    level: float = 0.95
    line: int | None = None
    #: the named scope (of the ``--scope-file``) the claim is about; None: the whole tree
    #: (or the command's ``--scope``)
    scope: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {"id": self.id, "text": self.text, "kind": self.kind,
                "params": {k: _param_plain(v) for k, v in sorted(self.params.items())},
                "level": self.level, **({"scope": self.scope} if self.scope else {})}


def _param_plain(v: Any) -> Any:
    if isinstance(v, (_dt.date, _dt.datetime, pd.Timestamp)):
        return pd.Timestamp(v).strftime("%Y-%m-%d")
    return v


@dataclass(frozen=True)
class ClaimContext:
    """The data and the settings a claim is judged with."""

    commits: pd.DataFrame
    trailers: pd.DataFrame
    fix_links: pd.DataFrame
    commit_subsystems: pd.DataFrame | None = None
    tags: pd.DataFrame | None = None
    policy_date: pd.Timestamp | None = None
    is_shallow: bool = False
    rewritten: bool = False
    unresolved_limit: float = 0.10
    min_n: int = 20
    period: str = "quarter"
    seed: int = 20240601
    #: placebo dates (+-k periods) fitted beside a change-at-date claim; evidence
    #: only, they never change a verdict (simulations set 0 to run faster)
    placebo_shifts: int = 8
    #: analysis choices the robustness panel varies (claims/robustness.py); the
    #: defaults are the report's: committer dates; "first_link" lets each kind use its
    #: own default era (growth and the median: settled; before/after comparisons: the
    #: first linked fix); a date replaces it (the growth claim) or moves it later
    date_basis: str = "committer"
    links_from: Any = "first_link"
    #: per-upstream-fix carry-over table of a tree mined with an upstream reference
    #: (:func:`procmetrics.analyse.carryover.carryover_table`); None without one
    carryover: pd.DataFrame | None = None
    #: every commit up to the window's end, for defect analyses under a scope
    #: (procmetrics.scope.apply); None: ``commits``
    defect_commits: pd.DataFrame | None = None
    #: what a scope or window selected (procmetrics.scope.apply.ScopeSummary), or None
    scope: Any = None
    #: the scope these tables are cut to (None: whole tree), and the contexts of the named
    #: scopes claims may ask for (``scope = "NAME"``), each cut from the whole tree
    scope_name: str | None = None
    scopes: Mapping[str, "ClaimContext"] = field(default_factory=dict)

    def for_claim(self, claim: "Claim") -> "ClaimContext":
        """The context a claim is judged in: its named scope's, else this one."""
        name = claim.scope
        if name is None or name == self.scope_name:
            return self
        if name not in self.scopes:
            from procmetrics.errors import ConfigError

            where = f"claim {claim.id!r}" + (f" (line {claim.line})" if claim.line else "")
            have = ", ".join(sorted(self.scopes))
            raise ConfigError(f"{where} names the scope {name!r}: give the scope file with "
                              "--scope-file" + (f" (it has: {have})" if have else ""),
                              key="scope")
        return self.scopes[name]

    def with_named_scopes(self, named: Mapping[str, tuple[Mapping[str, pd.DataFrame], Any]]
                          ) -> "ClaimContext":
        """This context with one context per named scope (tables cut from the whole tree
        by :class:`procmetrics.scope.apply.ScopeRequest`, with their summaries)."""
        from dataclasses import replace

        scopes = {name: replace(self, commits=t["commits"], trailers=t["trailers"],
                                fix_links=t["fix_links"],
                                commit_subsystems=t.get("commit_subsystems"),
                                defect_commits=t.get("defect_commits"), scope=summary,
                                scope_name=name, scopes={})
                  for name, (t, summary) in named.items()}
        return replace(self, scopes=scopes)

    @property
    def history(self) -> pd.DataFrame:
        """The commits defect analyses read (end of observation, introducer look-ups)."""
        return self.commits if self.defect_commits is None else self.defect_commits
    #: the date the carry-over table judges the tree at (its tip unless ``--as-of``)
    carryover_as_of: pd.Timestamp | None = None


@dataclass(frozen=True)
class ClaimVerdict:
    """The verdict on one claim with the evidence behind it."""

    claim: Claim
    verdict: str
    reasons: tuple[str, ...]
    method: str
    n: int | None = None
    estimate: Estimate | None = None
    test: Mapping[str, Any] | None = None
    diagnostics: tuple[Diagnostic, ...] = ()
    caveats: tuple[Caveat, ...] = ()
    #: the report places carrying the evidence ("section:key", "figure:key", "table:key")
    see: tuple[str, ...] = ()

    @property
    def label(self) -> str:
        return VERDICT_LABELS[self.verdict]

    def to_dict(self) -> dict[str, Any]:
        c = self.claim.to_dict()
        return {
            "id": c["id"], "text": c["text"], "kind": c["kind"], "params": c["params"],
            "verdict": self.verdict, "verdict_label": self.label,
            "reasons": list(self.reasons),
            "evidence": {
                "n": self.n, "method": self.method,
                "estimate": None if self.estimate is None else self.estimate.to_dict(),
                "test": None if self.test is None else to_plain(dict(self.test)),
                "diagnostics": [d.to_dict() for d in self.diagnostics],
                "caveats": [cv.to_dict() for cv in self.caveats],
                "decision": ONE_SIDED_NOTE.format(
                    level=f"{self.claim.level:.0%}",
                    half=f"{one_sided_level(self.claim.level):.4g}"),
            },
            "evidence_refs": [{"kind": r.split(":", 1)[0], "key": r.split(":", 1)[1]}
                              for r in self.see],
        }


class Undecidable(Exception):
    """Raised inside an evaluator when a precondition fails (carries the reason)."""


Evaluator = Callable[[Claim, ClaimContext], ClaimVerdict]

#: caveat codes that make a claim undecidable (at severity warn or fail)
BLOCKING = {"model_refused", "not_identifiable", "too_few_observations",
            "shallow_history", "rewritten_history", "tag_adoption_rising"}


def blocking_caveats(caveats: Sequence[Caveat]) -> list[Caveat]:
    """Caveats that stop a verdict: :data:`BLOCKING` codes at warn or fail, and
    diagnostics that failed without a remedy (``diagnostic_failed`` at fail)."""
    return [c for c in caveats if (c.code in BLOCKING and c.severity != "info")
            or (c.code == "diagnostic_failed" and c.severity == "fail")]


def decide(claim: Claim, est: Estimate, *, side: str, threshold: float, what: str,
           method: str, n: int | None, test: Mapping[str, Any] | None = None,
           diagnostics: Sequence[Diagnostic] = (), caveats: Sequence[Caveat] = (),
           fmt: Callable[[float], str] = lambda x: f"{x:.3g}",
           extra: Sequence[str] = ()) -> ClaimVerdict:
    """Apply the interval rule: supported when the whole interval is on ``side`` of ``threshold``.

    This is the one decision rule of every claim kind: ``est`` carries a
    two-sided interval at ``est.level`` = 1 - alpha, and "the whole interval
    on the claimed side" is a one-sided test of the claimed direction at level
    alpha/2 (see the module docstring). ``side`` is ``"above"`` or ``"below"``
    (the claimed side); ``what`` names the quantity in words.
    Blocking caveats (:func:`blocking_caveats`) make the verdict ``undecidable``;
    other warnings are added to the reasons. ``diagnostics`` are reported as
    evidence only: a model that remedied a failed check (robust errors, a
    quasi-likelihood scale) says so in its caveats.
    """
    level = f"{est.level:.0%}"
    blocking = blocking_caveats(caveats)
    cautions = [f"caution: {c.message}" for c in caveats
                if c.severity == "warn" and c not in blocking]
    extra = list(extra) + cautions
    common = dict(method=method, n=n, estimate=est, test=test,
                  diagnostics=tuple(diagnostics), caveats=tuple(caveats))
    if blocking:
        reasons = [c.message for c in blocking]
        return ClaimVerdict(claim, UNDECIDABLE, tuple(reasons + extra), **common)
    if est.value is None or est.low is None or est.high is None:
        return ClaimVerdict(claim, UNDECIDABLE, (
            f"the {what} or its interval cannot be estimated from this data",
            *extra), **common)
    interval = f"{fmt(est.low)} to {fmt(est.high)}"
    if side == "above":
        ok, against = est.low > threshold, est.high <= threshold
        rel, opp = "above", "at or below"
    else:
        ok, against = est.high < threshold, est.low >= threshold
        rel, opp = "below", "at or above"
    if ok:
        reason = (f"the {what} is {fmt(est.value)} with a {level} interval of {interval}, "
                  f"entirely {rel} {fmt(threshold)}")
        return ClaimVerdict(claim, SUPPORTED, (reason, *extra), **common)
    if against:
        reason = (f"the data point the other way: the {what} is {fmt(est.value)} with a "
                  f"{level} interval of {interval}, entirely {opp} {fmt(threshold)}")
    else:
        reason = (f"the {what} is {fmt(est.value)} but its {level} interval ({interval}) "
                  f"includes {fmt(threshold)}: the data give no evidence for the claim; "
                  "this is not evidence against it, and more data may decide it")
    return ClaimVerdict(claim, NOT_SUPPORTED, (reason, *extra), **common)


def undecidable(claim: Claim, method: str, reason: str, *, n: int | None = None,
                caveats: Sequence[Caveat] = ()) -> ClaimVerdict:
    return ClaimVerdict(claim, UNDECIDABLE, (reason,), method, n=n, caveats=tuple(caveats))


def resolve_date(value: Any, ctx: ClaimContext, key: str) -> pd.Timestamp:
    """A claim date: ``"policy"`` (the --policy-date) or a date; UTC midnight.

    A claim that says ``"policy"`` when no policy date was given is a usage
    mistake, not a property of the data: :class:`~procmetrics.errors.ConfigError`.
    """
    if value == POLICY:
        if ctx.policy_date is None:
            raise ConfigError(f"'{key} = \"policy\"' needs a policy date: give --policy-date")
        return ctx.policy_date
    ts = pd.Timestamp(value)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def history_blockers(ctx: ClaimContext) -> list[str]:
    out = []
    if ctx.is_shallow:
        out.append("the clone is shallow: commits before the cut are missing, so periods, "
                   "fix targets and lifetimes near the cut are incomplete")
    if ctx.rewritten:
        out.append("the history was rewritten between mining runs; the store may mix "
                   "commits that no longer exist with their replacements")
    return out


def unresolved_share(fix_links: pd.DataFrame) -> float | None:
    st = fix_links["status"].astype(str)
    st = st[st != "self"]
    return None if st.empty else float((st != "resolved").mean())


def exit_code(verdicts: Sequence[ClaimVerdict], *, fragile: bool = False) -> int:
    """Exit status for a pipeline gate.

    0 when every claim is supported and no verdict is fragile; otherwise
    ``8 + bits`` with bit 1 for any ``not_supported``, bit 2 for any
    ``undecidable``, bit 4 for any ``not_supportable`` and bit 16 when any
    verdict is fragile (it flips under another reasonable analysis choice, see
    :mod:`procmetrics.claims.robustness`): 9 to 31, distinct from the error
    codes 1-7.
    """
    kinds = {v.verdict for v in verdicts}
    bits = (1 if NOT_SUPPORTED in kinds else 0) | (2 if UNDECIDABLE in kinds else 0) | \
        (4 if NOT_SUPPORTABLE in kinds else 0) | (16 if fragile else 0)
    return 0 if bits == 0 else 8 + bits


NOT_SUPPORTABLE_KINDS = ("residual_defects_below", "no_defects_remain")

__all__ = ["Claim", "ClaimContext", "ClaimVerdict", "KindSpec", "Param", "VERDICTS",
           "VERDICT_LABELS", "SUPPORTED", "NOT_SUPPORTED", "UNDECIDABLE", "NOT_SUPPORTABLE",
           "ONE_SIDED_NOTE", "exit_code", "decide", "one_sided_level"]
