"""Claims checked against a store, as plain text for a terminal or a CI log."""
from __future__ import annotations

import textwrap
from pathlib import Path
from typing import Sequence

from procmetrics.claims.base import ClaimVerdict
from procmetrics.claims.carryover import carryover_for
from procmetrics.claims.registry import SPECS, evaluate_claims
from procmetrics.errors import ProcmetricsError
from procmetrics.analyse.measures import quality as ql
from procmetrics.claims.reader import load_claims
from procmetrics.store.repodata import choose_repo, load_store_data
from procmetrics.claims.render import evidence_line


def check_claims(claims_path: str, *, store: str | None, repo: str | None = None,
                 policy: str | None = None, period: str = "quarter") -> list[ClaimVerdict]:
    """Parse the claims file, read the store and judge every claim."""
    from procmetrics.analyse.measures.periods import resolve_policy
    from procmetrics.claims.base import ClaimContext
    from procmetrics.store import open_store

    claims = load_claims(claims_path)
    engine = open_store(store, create=False, readonly=True)
    try:
        name = choose_repo(engine, repo)
        data = load_store_data(engine, name)
        carry = carryover_for(engine, name)
    finally:
        engine.dispose()
    hist = ql.history_state(data)
    ctx = ClaimContext(commits=data["commits"], trailers=data["trailers"],
                       fix_links=data["fix_links"], commit_subsystems=data["commit_subsystems"],
                       tags=data["tags"], policy_date=resolve_policy(data, policy),
                       is_shallow=hist["is_shallow"], rewritten=bool(hist["rewritten"]),
                       period=period if period != "release" else "quarter", carryover=carry)
    return evaluate_claims(claims.claims, ctx)


def render_verdicts(verdicts: Sequence[ClaimVerdict]) -> str:
    out = []
    for v in verdicts:
        out.append(f"[{v.label.upper()}] {v.claim.id}: {v.claim.text}")
        for r in v.reasons:
            out.append(textwrap.fill(r, 92, initial_indent="    - ",
                                     subsequent_indent="      "))
        out.append(textwrap.fill("evidence: " + evidence_line(v.to_dict()), 92,
                                 initial_indent="    ", subsequent_indent="      "))
    counts: dict[str, int] = {}
    for v in verdicts:
        counts[v.label] = counts.get(v.label, 0) + 1
    out.append("")
    out.append(f"{len(verdicts)} claim(s): " + ", ".join(f"{n} {k}" for k, n in counts.items()))
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
        raise ProcmetricsError(f"cannot write {path}: {exc.strerror or exc}") from exc
