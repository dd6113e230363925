"""Automatic flags: every figure the data cannot carry is marked, without being asked.

Three sources:

* the result itself: its caveats (codes from ``CAVEAT_CODES``), failed
  diagnostics and extrapolated estimates (:func:`from_result`);
* checks of the mined data that apply to whole families of figures: shallow
  or rewritten history, unresolved fix references above a stated share,
  rising trailer adoption, clock skew (:func:`store_flags`);
* rules of the report: too few observations for the method, many tests
  without a correction, a significant but negligible effect, and a
  non-significant comparison that must not be read as "no change"
  (:func:`rule_flags`).
"""
from __future__ import annotations

from dataclasses import fields, is_dataclass
from typing import Any, Iterable, Iterator, Sequence

from procmetrics.analyse.result import CAVEAT_CODES, Caveat, Diagnostic, Estimate
from procmetrics.report.model import Flag

#: figures built on fix links (defects); store-level defect flags attach to these
DEFECT_KINDS = ("defects", "lifetimes", "growth", "fix_ratio")
#: figures built on trailers; adoption flags attach to these
TRAILER_KINDS = ("review", "fix_ratio", "defects", "lifetimes", "growth")
#: share of commits with inconsistent dates above which dated figures are flagged
CLOCK_SKEW_LIMIT = 0.01


def _walk(obj: Any, depth: int = 0) -> Iterator[Any]:
    """Yield every Caveat, Diagnostic and Estimate inside a result (dataclasses, lists, dicts)."""
    if depth > 6 or obj is None or isinstance(obj, (str, bytes, int, float)):
        return
    if isinstance(obj, (Caveat, Diagnostic, Estimate)):
        yield obj
        return
    if is_dataclass(obj) and not isinstance(obj, type):
        for f in fields(obj):
            yield from _walk(getattr(obj, f.name, None), depth + 1)
    elif isinstance(obj, dict):
        for v in obj.values():
            yield from _walk(v, depth + 1)
    elif isinstance(obj, (list, tuple)):
        for v in obj:
            yield from _walk(v, depth + 1)


def from_result(result: Any, target: str, prefix: str = "") -> list[Flag]:
    """Flags recorded on an analysis result (caveats, failed diagnostics, extrapolation).

    ``prefix`` names the analysis in each message (e.g. ``"trend model"``).
    """
    out: list[Flag] = []
    lead = f"{prefix}: " if prefix else ""
    for item in _walk(result):
        if isinstance(item, Caveat):
            out.append(Flag(item.code, item.severity, target, lead + item.message, "result"))
        elif isinstance(item, Diagnostic) and item.verdict == "fail":
            # reported for the record; whether it was remedied is in the result's caveats
            value = "n/a" if item.value is None else f"{item.value:.4g}"
            out.append(Flag("diagnostic_failed", "info", target,
                            f"{lead}check {item.name} failed ({item.method}: value {value}, "
                            f"threshold {item.threshold}){'; ' + item.note if item.note else ''}"
                            "; see the model's caveats for whether it was remedied",
                            "result"))
        elif isinstance(item, Estimate) and item.extrapolated:
            out.append(Flag("extrapolation", "warn", target,
                            f"{lead}{item.name} is extrapolated beyond the observed data", "result"))
    return dedupe(out)


def dedupe(flags: Iterable[Flag]) -> list[Flag]:
    """Drop repeated flags, and info flags whose code the same target already has at
    warn or fail (the stronger one says it)."""
    flags = list(flags)
    strong = {(f.code, f.target) for f in flags if f.severity != "info"}
    seen: set[tuple[str, str, str]] = set()
    out = []
    for f in flags:
        k = (f.code, f.target, f.message)
        if k in seen or (f.severity == "info" and (f.code, f.target) in strong):
            continue
        seen.add(k)
        out.append(f)
    return out


def review_adoption_flags(ctx: Any) -> list[Flag]:
    """``review_adoption_unsettled`` for figures of review metrics (kind ``"review"``),
    whose series start with the history, when review trailers settled into use later
    (:mod:`procmetrics.analyse.measures.adoption`)."""
    from procmetrics.analyse.measures.adoption import review_adoption

    if ctx.metrics is None:
        return []
    ra = review_adoption(ctx.metrics.table, alpha=ctx.alpha)
    cv = ra.caveat_for(None)
    return [] if cv is None else [Flag(cv.code, "warn", "review", cv.message, "store")]


def store_flags(quality: dict[str, Any], *, unresolved_limit: float,
                adoption_rising: bool | None = None) -> dict[str, list[Flag]]:
    """Store-level flags, keyed by the figure kinds they apply to (``"all"`` = every figure).

    Returns ``{kind: [Flag, ...]}`` with ``target`` left as the kind; the caller
    re-targets them to each figure of that kind with :func:`retarget`.
    """
    out: dict[str, list[Flag]] = {"all": [], "defects": [], "trailers": []}
    hist = quality["history"]
    if hist["is_shallow"]:
        out["all"].append(Flag(
            "shallow_history", "fail", "all",
            "the clone is shallow: commits before the cut are missing, so early periods, "
            "fix targets and lifetimes are incomplete", "store"))
    if hist.get("is_partial_clone"):
        out["all"].append(Flag(
            "partial_clone", "warn", "all",
            "mined from a partial clone without file contents: line counts (churn) and "
            "content-based rename detection were unavailable; a renamed file counts as a "
            "rename only where its content stayed identical, and an absent .mailmap or "
            "MAINTAINERS file was skipped (see the mining runs)", "store"))
    for text in hist.get("line_counts_missing", ()):
        out["all"].append(Flag(
            "line_counts_missing", "warn", "all",
            f"some commits were mined without line counts because the clone lacks their "
            f"file contents ({text}); churn figures leave them out", "store"))
    for text in hist["rewritten"]:
        out["all"].append(Flag(
            "rewritten_history", "fail", "all",
            f"the history was rewritten between mining runs ({text}); figures may mix "
            "commits that no longer exist with their replacements", "store"))
    fx = quality["fix_references"]
    share = fx["share_not_resolved"]
    if share is not None and share > unresolved_limit:
        out["defects"].append(Flag(
            "unresolved_fix_references", "warn", "defects",
            f"{share:.0%} of fix references ({fx['n_unresolved']} unresolved, "
            f"{fx['n_ambiguous']} ambiguous of {fx['n_references']}) name no single commit "
            f"of this history, above the {unresolved_limit:.0%} limit; defect figures rest "
            "on the resolved rest", "store"))
    if adoption_rising:
        out["trailers"].append(Flag(
            "tag_adoption_rising", "warn", "trailers",
            "use of the Fixes: trailer is still rising in the window, so a change in "
            "fix counts or shares mixes a change of practice with a change of quality",
            "store"))
    clock = quality["clock"]
    n = clock["n_commits"]
    bad = (clock["n_author_after_committer"] + clock["n_fix_before_introducer"]
           + clock.get("n_before_1990", 0) + clock.get("n_after_mining", 0))
    if n and bad / n > CLOCK_SKEW_LIMIT:
        out["all"].append(Flag(
            "clock_skew", "warn", "all",
            f"{bad} commits or fix links have inconsistent dates (author after committer, "
            f"fix before its introducer, before 1990 or in the future), more than "
            f"{CLOCK_SKEW_LIMIT:.0%} of {n}", "store"))
    return out


def retarget(flags: Sequence[Flag], target: str) -> list[Flag]:
    return [Flag(f.code, f.severity, target, f.message, f.source) for f in flags]


def rule_flags(target: str, *, n: int | None, min_n: int | None, method: str = "",
               p_value: float | None = None, alpha: float = 0.05,
               effect_negligible: bool | None = None, n_tests: int = 1,
               corrected: bool = False, lifetime: bool = False,
               truncation_checked: bool = False) -> list[Flag]:
    """The report's own rules for one figure.

    ``effect_negligible`` is the analysis' own judgement (its interval lies
    within the negligible band); ``corrected`` says whether a multiplicity
    correction was applied to ``n_tests`` tests of one family.
    """
    out: list[Flag] = []
    if n is not None and min_n is not None and n < min_n:
        out.append(Flag("too_few_observations", "warn", target,
                        f"n = {n} is below {min_n}, the minimum this report uses for "
                        f"{method or 'this method'}", "report"))
    if n_tests > 1 and not corrected:
        out.append(Flag("multiple_comparisons", "warn", target,
                        f"{n_tests} tests in this family and no correction for "
                        "multiplicity; some small p-values are expected by chance", "report"))
    if p_value is not None:
        if p_value < alpha and effect_negligible:
            out.append(Flag("negligible_effect", "warn", target,
                            f"p = {p_value:.3g} < {alpha} but the effect is negligible in size; "
                            "significance here says little about practical importance",
                            "report"))
        if p_value >= alpha:
            out.append(Flag("absence_of_evidence", "info", target,
                            f"p = {p_value:.3g} ≥ {alpha}: no evidence of a change was found; "
                            "this is not evidence that nothing changed (read the interval)",
                            "report"))
    if lifetime and not truncation_checked:
        out.append(Flag("truncation_bias", "warn", target,
                        "only defects already fixed are seen, and long-lived ones introduced "
                        "late cannot have been fixed yet: naive lifetime summaries (taken at "
                        "face value) are biased short; quote the truncation-aware ones",
                        "report"))
    return out


def describe(code: str) -> str:
    """The plain-words meaning of a flag code."""
    return CAVEAT_CODES.get(code, code)
