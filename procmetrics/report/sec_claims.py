"""Closing sections: claims and verdicts, limitations, and the use of this evidence."""
from __future__ import annotations

from collections import Counter

import re
from typing import Any

import pandas as pd

from procmetrics.claims.base import VERDICT_LABELS, ClaimContext
from procmetrics.claims.check import scope_name
from procmetrics.claims.robustness import PANEL, judge_with_panel, variants
from procmetrics.analyse.result import CAVEAT_CODES
from procmetrics.report.context import BuildContext
from procmetrics.report.flags import describe
from procmetrics.report.evidence import EVIDENCE_DIR, claim_pack
from procmetrics.report.model import Block, Flag, Report, Table
from procmetrics.report.summary import CAUTION  # noqa: F401 - re-exported

#: figures and tables that show the quantity each claim kind judges (keys; absent ones skipped)
_RELATED = {
    "review_coverage": ("series-review-coverage", "its-review-coverage", "before-after-shares"),
    "independent_review": ("series-independent-review", "its-independent-review",
                           "before-after-shares"),
    "fix_ratio": ("series-fix-ratio", "its-fix-ratio", "trends", "trailer-adoption"),
    "fixes_tag_adoption": ("trailer-adoption",),
    "lifetimes": ("lifetime-curves", "lifetime-before-after", "lifetime-quantiles",
                  "fix-references"),
    "growth": ("growth-curve", "growth-trend-tests", "growth-models", "fix-references"),
    "carryover": ("carryover-curves", "carryover-latency", "carryover-missing"),
}


def related_items(rep: Report, claim: object) -> list[dict[str, str]]:
    """The report's figures and tables that show what a claim judges, in plain words."""
    kind, p = getattr(claim, "kind", ""), dict(getattr(claim, "params", {}) or {})
    if "lifetime" in kind:
        group = "lifetimes"
    elif kind in ("no_missing_upstream_fix_older_than", "half_carried_within",
                  "carryover_faster_after"):
        group = "carryover"
    elif kind == "fix_rate_declining":
        group = "growth"
    elif kind == "fix_ratio_declining":
        group = "fix_ratio"
    elif kind == "review_coverage_rose":
        group = "review_coverage"
    else:
        group = str(p.get("metric", ""))
    out = []
    for key in _RELATED.get(group, ()):
        if key in rep.figures:
            f = rep.figures[key]
            out.append({"ref": key, "label": f"Figure {f.number}", "title": f.title})
        elif key in rep.tables:
            t = rep.tables[key]
            out.append({"ref": key, "label": f"Table {t.number}",
                        "title": t.title.rstrip(". ")})
    return out

CAUTION_SHORT = (
    "Read this document as statistical evidence about the recorded history: it supports, and "
    "never replaces, the applicable safety standard and the assessor's judgement (section "
    "“Use of this evidence”).")


def claim_context(ctx: BuildContext) -> ClaimContext:
    d, q = ctx.data, ctx.quality
    return ClaimContext(
        commits=d["commits"], trailers=d["trailers"], fix_links=d["fix_links"],
        commit_subsystems=d["commit_subsystems"], tags=d["tags"],
        policy_date=ctx.policy_date, is_shallow=q["history"]["is_shallow"],
        rewritten=bool(q["history"]["rewritten"]),
        unresolved_limit=ctx.options.unresolved_share_limit, min_n=ctx.options.min_n,
        period=ctx.options.period if ctx.options.period != "release" else "quarter",
        seed=ctx.seed, defect_commits=d.get("defect_commits"), scope=d.scope,
        scope_name=scope_name(d.scope),
        carryover=None if ctx.carryover is None else ctx.carryover["table"],
        carryover_as_of=None if ctx.carryover is None else ctx.carryover["as_of"]
    ).with_named_scopes(d.named_scopes or {})


def section_claims(ctx: BuildContext) -> None:
    rep = ctx.report
    s = rep.add_section("claims", "Claims and verdicts")
    if ctx.claims is None:
        s.p("No claims file was given. Claims are checked with “procmetrics check” or by "
            "passing --claims to “procmetrics report”.")
        return
    cctx = claim_context(ctx)
    pairs = judge_with_panel(ctx.claims.claims, cctx)
    verdicts = [v for v, _ in pairs]
    rep.claims = [{**v.to_dict(), "robustness": p.to_dict()} for v, p in pairs]
    for claim, c in zip(ctx.claims.claims, rep.claims, strict=True):
        pack = claim_pack(claim, cctx.for_claim(claim), c)
        for name, rows in pack.files.items():
            rep.evidence[f"{EVIDENCE_DIR}/{claim.id}/{name}"] = rows
        c["evidence_pack"] = pack.to_dict()
        c["see"] = related_items(rep, claim)
    counts = Counter(v.verdict for v in verdicts)
    s.p(f"{len(verdicts)} claims were checked against the data (claims file SHA-256 "
        f"{ctx.claims.sha256[:16]}…). Each claim is judged by one method, named with its "
        "evidence. A claim is supported when the whole two-sided interval (level 1 − α) lies "
        "on the claimed side, which is a one-sided test in the claimed direction at level "
        "α/2 (2.5% for 95% intervals); "
        "not supported when it does not (which is not proof of the opposite); undecidable "
        "when this data cannot answer; and not supportable when no commit data could.")
    s.bullets([f"{VERDICT_LABELS[k]}: {counts[k]}" for k in VERDICT_LABELS if counts[k]])
    s.blocks.append(Block("verdicts"))
    _robustness(ctx, s, pairs, cctx)


def _robustness(ctx: BuildContext, s: Any, pairs: list, cctx: ClaimContext) -> None:
    """The robustness panel: every claim's verdict under each alternative, side by side."""
    fragile = [p for _, p in pairs if p.fragile]
    s.p("Does the verdict survive? Each claim is judged again with one analysis choice "
        "changed at a time, everything else as above; a verdict that differs under any "
        f"alternative is marked fragile ({len(fragile)} of {len(pairs)} claims here), and "
        "“procmetrics check” then adds 16 to its exit code. The choices and their ranges:")
    s.bullets([f"{axis}: {text}" for axis, text in PANEL])
    cols = [(f"{v.axis}: {v.label}") for v in variants(cctx)]
    rows = []
    for v, p in pairs:
        row = {"claim": v.claim.id, "verdict": VERDICT_LABELS[v.verdict],
               "fragile": "fragile: " + "; ".join(p.flipped_by) if p.fragile
               else ("robust" if any(r.used for r in p.rows) else "no alternative applies")}
        for r in p.rows:
            row[f"{r.axis}: {r.label}"] = (VERDICT_LABELS[r.verdict] if r.used
                                           else "same evidence")
        rows.append(row)
    keys = [re.sub(r"[^a-z0-9]+", "_", c.split(" (")[0].lower()).strip("_") for c in cols]
    data = pd.DataFrame([{**{k: r["claim"] if k == "claim" else r.get(k, "")
                             for k in ("claim", "verdict", "fragile")},
                          **{keys[i]: r.get(c, "–") for i, c in enumerate(cols)}}
                         for r in rows], columns=["claim", "verdict", *keys, "fragile"])
    ctx.report.add_table(s, Table(
        "claims-robustness", "Robustness panel: each claim's verdict under the other "
        "reasonable analysis choices.",
        [("claim", "Claim"), ("verdict", "Verdict"), *zip(keys, cols),
         ("fragile", "Survives?")], data,
        note="“same evidence”: the choice leaves this claim's evidence unchanged (the kind "
             "does not use it, or its estimate does not depend on it); "
             "“–”: the choice does not apply (no horizon, or no linked fix). The evidence "
             "under each alternative is in report.json (claims[].robustness)."))


def section_limitations(ctx: BuildContext) -> None:
    rep = ctx.report
    s = rep.add_section("limitations", "Limitations")
    s.p("The report flags, by itself, every figure that the data cannot fully carry. The "
        "flags raised in this report, by kind:")
    flags = rep.all_flags()
    by_code = Counter(f.code for f in flags if f.severity != "info")
    items = [f"{describe(code)} ({code.replace('_', ' ')}): {n} "
             f"{'place' if n == 1 else 'places'}" for code, n in sorted(by_code.items())]
    s.bullets(items or ["none"])
    s.p("Rules applied: a figure on fewer than "
        f"{ctx.options.min_n} observations is flagged; defect figures are flagged when more "
        f"than {ctx.options.unresolved_share_limit:.0%} of fix references are unresolved or "
        "ambiguous; a shallow or rewritten history flags every figure; a non-significant "
        "comparison is marked as “no evidence of a change”, never as “no change”; a "
        "significant but negligible effect is marked as such; results that move with a "
        "tuning choice (penalty, horizon) say so; many tests without a correction are "
        "flagged.")
    s.bullets([
        "Only what is recorded counts: review that left no trailer, and defects fixed "
        "without a Fixes: line, are invisible here.",
        "Commits are not independent: the same people, files and release cycles recur. "
        "Models on per-period counts allow for overdispersion and autocorrelation, but "
        "cannot remove every dependence.",
        "Dates are those recorded by git; rebased and late-applied patches shift them.",
        "The tidy tables behind every figure are in tables/ so any figure can be checked "
        "independently.",
    ])
    if ctx.skipped:
        s.p("Analyses that could not be run on this data:")
        s.bullets(ctx.skipped)
    _numerical(ctx, s)
    codes = sorted(CAVEAT_CODES)
    s.p("Flag kinds this report can raise: " + "; ".join(
        f"{c.replace('_', ' ')} ({CAVEAT_CODES[c]})" for c in codes) + ".")


def _numerical(ctx: BuildContext, s: object) -> None:
    """Numerical warnings captured while building: counted, and convergence failures apart."""
    w = ctx.numerical
    if w is None or not len(w):
        s.p("No numerical warning was raised by the statistical libraries while this "
            "report was built.")
        return
    total, conv = int(w["count"].sum()), int(w.loc[w["convergence"], "count"].sum())
    s.p(f"The statistical libraries raised {total:,} numerical warnings while this report "
        f"was built ({len(w)} kinds, listed below); {conv:,} of them say that a fit did not "
        "converge. Warnings from placebo and bootstrap fits concern those replicates only; "
        "a figure whose own fit failed carries a flag.")
    if conv:
        ctx.report.flags.append(Flag("diagnostic_failed", "warn", "report",
                                     f"{conv:,} model fits did not converge while this report "
                                     "was built (see the limitations section)", "report"))
    from procmetrics.report.model import Table

    ctx.report.add_table(s, Table(
        "numerical-warnings", "Numerical warnings raised while building this report.",
        [("category", "Kind"), ("where", "Raised in"), ("message", "Message"),
         ("count", "Count"), ("convergence", "Fit did not converge")], w.copy()))


def section_use(ctx: BuildContext) -> None:
    s = ctx.report.add_section("use", "Use of this evidence")
    s.blocks.append(Block("caution", text=CAUTION))
    s.p("Every figure states its sample size, method and interval; the numbers behind it "
        "are in report.json and tables/. The manifest records the repository, the HEAD "
        "commit, the mining options, the tool versions and checksums, so that the report "
        "can be regenerated with “procmetrics rerun manifest.json” and compared.")
