"""Claims checked against a store, as plain text for a terminal or a CI log."""
from __future__ import annotations

import textwrap
from pathlib import Path
from typing import Any, Sequence

from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict
from procmetrics.claims.robustness import Robustness, judge_with_panel
from procmetrics.claims.carryover_source import carryover_for, read_exclusions
from procmetrics.claims.registry import SPECS, evaluate_claims
from procmetrics.errors import ConfigError, OutputPathError
from procmetrics.analyse.measures import quality as ql
from procmetrics.analyse.measures.periods import DEFAULT_PERIOD
from procmetrics.claims.reader import load_claims
from procmetrics.store.repodata import choose_repo, load_store_data
from procmetrics.claims.render import evidence_line
from procmetrics.claims.base import VERDICT_LABELS as cl_labels


def check_claims(claims_path: str, *, store: str | None, repo: str | None = None,
                 policy: str | None = None, period: str = DEFAULT_PERIOD,
                 scope: Any = None, scope_file: str | None = None,
                 exclusions: str | None = None) -> list[ClaimVerdict]:
    """Parse the claims file, read the store and judge every claim."""
    claims, ctx = claims_and_context(claims_path, store=store, repo=repo, policy=policy,
                                     period=period, scope=scope, scope_file=scope_file,
                                     exclusions=exclusions)
    return evaluate_claims(claims, ctx)


def check_claims_robust(claims_path: str, *, store: str | None, repo: str | None = None,
                        policy: str | None = None, period: str = DEFAULT_PERIOD,
                        scope: Any = None, scope_file: str | None = None,
                        exclusions: str | None = None
                        ) -> tuple[list[ClaimVerdict], list[Robustness]]:
    """As :func:`check_claims`, with every claim's robustness panel."""
    claims, ctx = claims_and_context(claims_path, store=store, repo=repo, policy=policy,
                                     period=period, scope=scope, scope_file=scope_file,
                                     exclusions=exclusions)
    pairs = judge_with_panel(claims, ctx)
    return [v for v, _ in pairs], [p for _, p in pairs]


def claims_and_context(claims_path: str, *, store: str | None, repo: str | None,
                       policy: str | None, period: str, scope: Any = None,
                       scope_file: str | None = None, exclusions: str | None = None
                       ) -> tuple[list[Claim], ClaimContext]:
    """The claims of a file and the context they are judged in; ``scope`` (a
    :class:`procmetrics.scope.apply.ScopeRequest`) cuts the tables first, and its summary
    is ``ctx.scope``; claims naming a scope (``scope = "NAME"``) get theirs from
    ``scope_file``, cut from the whole tree (``ctx.scopes``); ``exclusions``: the
    carry-over exclusions file, read as the ``carryover`` command reads it."""
    from procmetrics.analyse.measures.periods import resolve_policy
    from procmetrics.analyse.measures.vocabulary import REPORT_TRAILER_KEYS
    from procmetrics.store import open_store

    claims = load_claims(claims_path)
    request = claim_scope_request(claims.claims, scope, scope_file)
    excl = read_exclusions(exclusions)
    engine = open_store(store, create=False, readonly=True)
    try:
        name = choose_repo(engine, repo)
        data = load_store_data(engine, name, within=request, trailer_keys=REPORT_TRAILER_KEYS)
        carry = carryover_for(engine, name, excl)
        if carry is None and exclusions is not None:
            raise ConfigError(f"--exclusions: {name} has no single upstream reference (mine "
                              "it with --upstream) for the exclusions to apply to")
    finally:
        engine.dispose()
    hist = ql.history_state(data)
    ctx = ClaimContext(commits=data["commits"], trailers=data["trailers"],
                       fix_links=data["fix_links"], commit_subsystems=data["commit_subsystems"],
                       tags=data["tags"],
                       # a date given as a commit may lie outside the scope: resolve it whole
                       policy_date=resolve_policy(data.whole_tree or data, policy),
                       is_shallow=hist["is_shallow"], rewritten=bool(hist["rewritten"]),
                       period=period if period != "release" else "quarter",
                       carryover=None if carry is None else carry["table"],
                       carryover_as_of=None if carry is None else carry["as_of"],
                       defect_commits=data.get("defect_commits"), scope=data.scope,
                       scope_name=scope_name(data.scope))
    return list(claims.claims), ctx.with_named_scopes(data.named_scopes or {})


def claim_scope_request(claims: Sequence[Claim], scope: Any, scope_file: str | None) -> Any:
    """The scope request of a command (``--scope``/``--since``/``--until``), with the scopes
    the claims name taken from ``scope_file``."""
    from dataclasses import replace

    from procmetrics.scope.apply import ScopeRequest

    req = scope if scope is not None else ScopeRequest()
    names = tuple(sorted({c.scope for c in claims if c.scope}))
    return replace(req, claim_file=scope_file, claim_names=names) if names else req


def scope_name(summary: Any) -> str | None:
    """The name of the scope a summary describes (None: whole tree, or a window only)."""
    if summary is None or summary.scope is None:
        return None
    return str(summary.scope["name"])


def render_verdicts(verdicts: Sequence[ClaimVerdict],
                    panels: Sequence[Robustness] | None = None) -> str:
    out = []
    by_id = {p.claim_id: p for p in panels or ()}
    for v in verdicts:
        rob = by_id.get(v.claim.id)
        tag = " [FRAGILE]" if rob is not None and rob.fragile else ""
        out.append(f"[{v.label.upper()}]{tag} {v.claim.id}: {v.claim.text}")
        for r in v.reasons:
            out.append(textwrap.fill(r, 92, initial_indent="    - ",
                                     subsequent_indent="      "))
        out.append(textwrap.fill("evidence: " + evidence_line(v.to_dict()), 92,
                                 initial_indent="    ", subsequent_indent="      "))
        if rob is not None and rob.rows:
            head = ("fragile: the verdict flips under " + "; ".join(rob.flipped_by)
                    if rob.fragile else "robust: the same verdict under every alternative "
                    "that changes its evidence" if any(r.used for r in rob.rows)
                    else "no alternative of the robustness panel changes its evidence")
            out.append(textwrap.fill(head, 92, initial_indent="    ",
                                     subsequent_indent="      "))
            for r in rob.rows:
                if r.used:
                    out.append(textwrap.fill(f"{r.axis} = {r.label}: "
                                             f"{cl_labels[r.verdict]} ({r.evidence})", 92,
                                             initial_indent="      · ",
                                             subsequent_indent="        "))
    counts: dict[str, int] = {}
    for v in verdicts:
        counts[v.label] = counts.get(v.label, 0) + 1
    out.append("")
    out.append(f"{len(verdicts)} claim(s): " + ", ".join(f"{n} {k}" for k, n in counts.items())
               + ("" if panels is None else
                  f"; {sum(p.fragile for p in panels)} fragile (robustness panel)"))
    return "\n".join(out)


def list_kinds() -> str:
    out = []
    for name, spec in sorted(SPECS.items()):
        params = ", ".join(f"{k}{'' if p.required else '?'} ({p.type})"
                           for k, p in spec.params.items()) or "none"
        out.append(f"{name}\n    {spec.summary}\n    parameters: {params}\n"
                   f"    direction: {spec.direction}\n    method: {spec.method}\n"
                   f"    evidence in the report: {', '.join(spec.see) or 'none'}")
    out.append("\nEvery claim is tested one-sided in its direction at level alpha/2: supported "
               "only when the whole two-sided (1 - alpha) interval (default 95%) lies on the "
               "claimed side.")
    return "\n".join(out)


def write_text(path: str, text: str) -> None:
    try:
        Path(path).write_text(text, encoding="utf-8")
    except OSError as exc:
        raise OutputPathError(f"cannot write {path}: {exc.strerror or exc}") from exc
