"""The scope part of section 1: what ``--scope``/``--since``/``--until`` and the scopes
claims name selected, and the key shares in scope beside the whole tree's.

The side-by-side figures are pooled shares over the non-merge commits (review
coverage, fix ratio, applied by someone other than the author), each with its
Wilson score interval at the report's level, from the same commit flags the series
use (:func:`procmetrics.analyse.measures.metrics.commit_flags`).
"""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np
import pandas as pd

from procmetrics.report.context import BuildContext
from procmetrics.report.model import Table


def _pct(x: Any) -> str:
    return "–" if x is None else f"{100 * x:.1f}%"


def scope_tables(ctx: BuildContext, s: Any) -> None:
    """Paragraphs and tables for the command's scope and every scope claims name."""
    d = ctx.data
    whole = d.whole_tree if getattr(d, "whole_tree", None) is not None else d.tables
    if getattr(d, "scope", None) is not None:
        sel = d.scope.to_dict()
        _selection(ctx, s, sel, "scope-selection", "The scope and window of this report.",
                   lead="Every figure below is about")
        if sel["scope"] is not None:
            _side_by_side(ctx, s, "scope-vs-whole", sel["scope"]["name"], d.tables,
                          _in_window(whole, d.scope))
    for name, (tables, summary) in sorted((getattr(d, "named_scopes", None) or {}).items()):
        key = "scope-" + "".join(ch if ch.isalnum() else "-" for ch in name.lower())
        _selection(ctx, s, summary.to_dict(), f"{key}-selection",
                   f"The scope “{name}” that claims name.",
                   lead="Claims that name it (scope = “" + name + "”) are judged on")
        _side_by_side(ctx, s, f"{key}-vs-whole", name, tables, _in_window(whole, summary))


def _in_window(whole: Mapping[str, pd.DataFrame], summary: Any) -> Mapping[str, pd.DataFrame]:
    """The whole tree in the same committer-date window (the other column's denominator)."""
    if summary.since is None and summary.until is None:
        return whole
    from procmetrics.scope.apply import apply_scope

    return apply_scope(whole, None, summary.since, summary.until)[0]


def _selection(ctx: BuildContext, s: Any, sel: dict[str, Any], key: str, title: str, *,
               lead: str) -> None:
    sc = sel.get("scope")
    when = ("from " + (sel["since"][:10] if sel.get("since") else "the first commit") + " to "
            + (sel["until"][:10] if sel.get("until") else "the tip"))
    if sc is not None:
        s.p(f"{lead} the scope “{sc['name']}” (a {sc['kind'].replace('_', ' ')} file, "
            f"SHA-256 {sc['file_sha256'][:16]}…) and the committer-date window {when}: "
            f"{sel['n_commits']:,} of the {sel['n_commits_window']:,} non-merge commits of the "
            f"window ({_pct(sel['commit_share'])}) and {sel['n_defects']:,} of its "
            f"{sel['n_defects_window']:,} defects. Rules: {sel['rule']}; {sel['defect_rule']}.")
    else:
        s.p(f"{lead} the committer-date window {when}: {sel['n_commits']:,} of the "
            f"{sel['n_commits_history']:,} non-merge commits.")
    if sel.get("window_rule"):
        s.p("Window: " + sel["window_rule"] + ".")
    rows = []
    if sc is not None:
        rows += [("Scope", sc["name"]), ("Kind", sc["kind"].replace("_", " ")),
                 ("Scope file SHA-256", sc["file_sha256"]),
                 ("Include patterns", str(len(sc["include"]))),
                 ("Exclude patterns", str(len(sc["exclude"]))),
                 ("Paths selected", f"{sel['n_paths']:,} of {sel['n_stored_paths']:,} "
                                    "paths the history touched")]
    rows += [("Window", when),
             ("Commits selected", f"{sel['n_commits']:,} of {sel['n_commits_window']:,} "
                                  f"non-merge commits ({_pct(sel['commit_share'])}; "
                                  f"{sel['n_commits_history']:,} in the whole history)"),
             ("Defects selected", f"{sel['n_defects']:,} of {sel['n_defects_window']:,}")]
    if sel.get("line_share") is not None:
        rows.append(("In-scope share of the selected commits' changed lines",
                     _pct(sel["line_share"])))
    for kind in ("include", "exclude"):
        pats = sel.get(f"unmatched_{kind}") or []
        if pats:
            rows.append((f"{kind.title()} patterns matching no path of the history",
                         ", ".join(pats[:20]) + (f" … ({len(pats)} in all)"
                                                 if len(pats) > 20 else "")))
    for n in sel.get("notes") or []:
        rows.append(("Note", n))
    ctx.report.add_table(s, Table(key, title, [("item", "Item"), ("value", "Value")],
                                  pd.DataFrame(rows, columns=["item", "value"])))


def _shares(ctx: BuildContext, tables: Mapping[str, pd.DataFrame]) -> dict[str, tuple]:
    from procmetrics.analyse.measures.intervals import wilson
    from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags

    f = commit_flags(tables["commits"], tables["trailers"],
                     MetricConfig(period=ctx.options.period if ctx.options.period != "release"
                                  else "quarter"))
    alpha = 1 - ctx.options.level
    out: dict[str, tuple] = {}
    parts = [("review coverage", f, "reviewed"), ("fix ratio", f, "fix"),
             ("applied by someone other than the author", f, "applied_other")]
    if ctx.policy_date is not None:
        after = f[f["date"] >= ctx.policy_date]
        parts.insert(1, (f"review coverage from {ctx.policy_date:%Y-%m-%d}", after, "reviewed"))
    for label, frame, col in parts:
        n = len(frame)
        k = int(frame[col].sum()) if n else 0
        if n:
            lo, hi = wilson(np.array([k]), np.array([n]), alpha)
            out[label] = (k / n, float(lo[0]), float(hi[0]), n)
        else:
            out[label] = (None, None, None, 0)
    fl = tables["fix_links"]
    out["defects (resolved Fixes: links)"] = (None, None, None,
                                              int((fl["status"].astype(str) == "resolved").sum()))
    return out


def _side_by_side(ctx: BuildContext, s: Any, key: str, name: str,
                  scoped: Mapping[str, pd.DataFrame], whole: Mapping[str, pd.DataFrame]) -> None:
    a, b = _shares(ctx, scoped), _shares(ctx, whole)
    rows = []
    for label in a:
        va, vb = a[label], b[label]
        rows.append({"quantity": label, "scope": va[0], "scope_low": va[1],
                     "scope_high": va[2], "scope_n": va[3], "whole": vb[0], "whole_low": vb[1],
                     "whole_high": vb[2], "whole_n": vb[3]})
    level = f"{ctx.options.level:.0%}"
    ctx.report.add_table(s, Table(
        key, f"In the scope “{name}” and in the whole tree, side by side.",
        [("quantity", "Quantity"), ("scope", f"In “{name}”"), ("scope_low", f"{level} low"),
         ("scope_high", f"{level} high"), ("scope_n", "n"), ("whole", "Whole tree"),
         ("whole_low", f"{level} low"), ("whole_high", f"{level} high"), ("whole_n", "n")],
        pd.DataFrame(rows), percent_columns=("scope", "scope_low", "scope_high", "whole",
                                             "whole_low", "whole_high"),
        note="Pooled over the non-merge commits of the window, in both columns (merges "
             "excluded as in the series), Wilson score intervals; n = commits (defects for the "
             "last row). Both columns come from the same flags as the series and the claims."))
