"""Page one and the print furniture: the claims summary, the caution, the running header.

Verdict dicts are read defensively (``.get``): fields other parts of the tool add
later (a robustness panel, a pointer to the section that carries the evidence)
are shown when present and said to be absent otherwise.
"""
from __future__ import annotations

import math
from typing import Any

CAUTION = (
    "The figures in this document are statistical evidence about the development process "
    "as recorded in the repository's history. They support, and never replace, the "
    "requirements of the applicable safety standard and the judgement of the assessor. A "
    "history shows what was recorded: work that left no trace in commits and trailers is "
    "invisible to it, and nothing here shows that defects are absent.")

#: a text marker per verdict, so that no verdict is told by colour alone
VERDICT_MARKS = {"supported": "✓", "not_supported": "✗", "undecidable": "?",
                 "not_supportable": "⊘"}
#: table columns whose cells are commit hashes (links with --commit-url)
HASH_COLUMNS = frozenset({"hash", "fix", "fix_hash", "introducer_hash", "head_hash",
                          "base_hash", "commit", "target_hash", "tree_hash"})
#: verdict-dict keys another part of the tool may use to name where the evidence is shown
_SECTION_KEYS = ("report_section", "section", "shown_in", "report_ref", "evidence_ref")


def sig(x: float | None, digits: int = 3) -> str:
    """A number to ``digits`` significant digits, never in e-notation for ordinary sizes."""
    if x is None or (isinstance(x, float) and (math.isnan(x) or math.isinf(x))):
        return "–"
    x = float(x)
    if x == 0:
        return "0"
    mag = math.floor(math.log10(abs(x)))
    decimals = max(0, digits - 1 - mag)
    if decimals > 6:
        return f"{x:.{digits - 1}e}"
    return f"{x:,.{decimals}f}"


def estimate_text(est: dict[str, Any] | None) -> str:
    """``"odds ratio after/before 18.8 (95% interval 15.6 to 22.7)"``; shares as %.

    Digits come from :mod:`procmetrics.textfmt`, as in the CLI, tables and claims.
    """
    from procmetrics import textfmt

    if not est or est.get("value") is None:
        return "no estimate"
    name = str(est.get("name") or "estimate").replace("_", " ")
    unit = str(est.get("unit") or "")
    key = "share" if name.startswith("share") else unit

    def f(v: Any) -> str:
        return textfmt.number(v, key).replace("-", "−")

    suffix = "" if key == "share" or not unit or unit in name else f" {unit}"
    text = f"{name} {f(est['value'])}{suffix}"
    if est.get("low") is not None and est.get("high") is not None:
        text += f" ({float(est.get('level') or 0.95):.0%} interval {f(est['low'])} to " \
                f"{f(est['high'])}{suffix})"
    return text


def robustness_text(c: dict[str, Any]) -> str:
    """The robustness-panel outcome of a verdict in words, when the verdict carries one."""
    r = c.get("robustness")
    if not isinstance(r, dict):
        return "not assessed"
    flips = (r.get("flipped_by") or r.get("flipping") or r.get("flipping_choices")
             or r.get("flips") or [])
    if isinstance(flips, (list, tuple)):
        flips = ", ".join(str(x.get("choice", x)) if isinstance(x, dict) else str(x)
                          for x in flips)
    if r.get("fragile") is True:
        return "fragile: the verdict changes with " + (str(flips) or "an analysis choice")
    if r.get("fragile") is False:
        return "robust: the verdict holds under every alternative choice tried"
    return str(r.get("summary") or "not assessed")


def robustness_short(c: dict[str, Any]) -> str:
    """The panel outcome in a few words for the page-one table."""
    r = c.get("robustness")
    if not isinstance(r, dict) or r.get("fragile") is None:
        return "not assessed"
    if r.get("fragile"):
        flips = r.get("flipped_by") or r.get("flipping") or []
        return "fragile: flips under " + "; ".join(str(x) for x in flips) if flips \
            else "fragile"
    return "robust"


def warned_diagnostics(c: dict[str, Any]) -> list[str]:
    """Diagnostics and caveats of a verdict that warned or failed, in plain words."""
    ev = c.get("evidence") or {}
    out = []
    for d in ev.get("diagnostics") or []:
        if d.get("verdict") in ("warn", "fail"):
            v = d.get("value")
            val = "" if v is None else f" {sig(v)}"
            note = f"; {d['note']}" if d.get("note") else ""
            out.append(f"{d.get('name', 'diagnostic').replace('_', ' ')}{val} "
                       f"({d.get('verdict')}: {d.get('method', '')}, threshold "
                       f"{d.get('threshold', '')}{note})")
    for cv in ev.get("caveats") or []:
        if cv.get("severity") in ("warn", "fail"):
            out.append(str(cv.get("message", cv.get("code", ""))))
    return out


def summary_rows(claims: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """One row per claim for the page-one table."""
    rows = []
    for i, c in enumerate(claims, 1):
        ev = c.get("evidence") or {}
        pack = c.get("evidence_pack") or {}
        section = next((str(c[k]) for k in _SECTION_KEYS if isinstance(c.get(k), str)), "")
        refs = c.get("evidence_refs")
        if not section and isinstance(refs, list):
            section = ", ".join(f"{r.get('kind', '')} {r.get('key', '')}".strip()
                                for r in refs if isinstance(r, dict))
        rows.append({
            "number": i, "id": c.get("id", ""), "text": c.get("text", ""),
            "verdict": c.get("verdict", ""), "label": c.get("verdict_label", ""),
            "mark": VERDICT_MARKS.get(c.get("verdict", ""), ""),
            "estimate": estimate_text(ev.get("estimate")),
            "n": ev.get("n"), "robustness": robustness_short(c),
            "evidence": (pack.get("files") or [{}])[0].get("path"),
            "section": section,
        })
    return rows


def _css_string(text: str) -> str:
    """A CSS string literal that cannot end early: every character outside a safe set is
    written as a six-digit hex escape (repository names are untrusted)."""
    safe = set("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789 .,:;_-()/")
    return '"' + "".join(ch if ch in safe else f"\\{ord(ch):06x} " for ch in text) + '"'


def running_texts(report: Any, prepared: str) -> tuple[tuple[str, str], str]:
    """((header left, header right), footer left) of every page; the page number is added
    by the renderer ("page n of N")."""
    meta = report.meta
    scope = report.scope or {}
    title = report.title if len(report.title) <= 90 else report.title[:89] + "…"
    head = str(scope.get("head_hash") or "")[:12]
    repo = f"{scope.get('repo', '')}" + (f" at {head}" if head else "")
    ident = meta.identity() if meta is not None else ""
    date = (meta.date if meta is not None and meta.date else "") or prepared
    org = meta.organisation if meta is not None else ""
    return (title, repo), " · ".join(x for x in (ident, date, org) if x)


def page_css(report: Any, meta: Any, prepared: str) -> str:
    """The running header and footer of every printed page (CSS paged media)."""
    (title, repo), foot = running_texts(report, prepared)
    box = "font-family: serif; font-size: 7.5pt; color: #5a5a55;"
    return ("@page { "
            f"@top-left {{ content: {_css_string(title)}; {box} }} "
            f"@top-right {{ content: {_css_string(repo)}; {box} }} "
            f"@bottom-left {{ content: {_css_string(foot)}; {box} }} "
            "@bottom-right { content: \"page \" counter(page) \" of \" counter(pages); "
            f"{box} }} }}")
