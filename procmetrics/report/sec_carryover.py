"""Section on carrying upstream fixes over into the tree (a tree mined with ``--upstream``).

The figures come from the one carry-over computation the ``carryover`` command and
the claims use (:func:`procmetrics.claims.carryover_source.carryover_from_engine`,
called once by :func:`procmetrics.report.build.make_report`), so the missing list,
the counts and the latency figures here are the command's.
"""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.report import plots
from procmetrics.report.context import BuildContext, date_text
from procmetrics.report.model import Figure, Table

MISSING_KEY = "carryover-missing"
LATENCY_KEY = "carryover-latency"
FIGURE_KEY = "carryover-curves"
STATUSES = ("missing", "excluded", "carried", "shared", "not-relevant", "not-due",
            "not-mirrored")
EVIDENCE_FILE = "evidence/carryover/upstream_fixes.csv"
LIMITS = (
    "Upstream fixes without a “Fixes:” line are invisible here: the list holds only the "
    "known fixes, not every fix the tree may lack.",
    "A fix that does not apply to the tree's version may rightly be absent; such fixes are "
    "named in the exclusions file with a reason, and are listed in the table with that "
    "reason (never dropped silently).",
    "A backport whose content was changed is found only by a backport line in its message "
    "(“cherry picked from commit …”, “commit … upstream.”, “Upstream commit …”); without "
    "one it counts as missing.",
    "A fix is due when it landed upstream (committer date) by the date the tree is judged "
    "at; its gap is counted from that date, not from when it was published elsewhere.",
)


def missing_table(table: pd.DataFrame) -> pd.DataFrame:
    """The missing and the excluded upstream fixes, oldest gap first (the command's order)."""
    from procmetrics.analyse.carryover.missing import missing_fixes

    lst = missing_fixes(table)
    return pd.DataFrame({
        "fix_hash": lst["fix_hash"], "fix_date": [date_text(d) for d in lst["fix_date"]],
        "gap_days": lst["gap_days"].round(1), "subsystem": lst["subsystem"].fillna(""),
        "subject": lst["subject"].fillna(""), "target_hash": lst["target_hash"],
        "target_method": lst["target_method"].fillna(""), "status": lst["status"],
        "exclusion_reason": lst["exclusion_reason"].fillna("")})


def latency_table(lat: Any) -> pd.DataFrame:
    rows = [{"figure": lat.median.name, "value": lat.median.value, "low": lat.median.low,
             "high": lat.median.high, "unit": "days", "n": lat.n}]
    for e in lat.carried_within:
        rows.append({"figure": e.name + (" (beyond the longest follow-up)" if e.extrapolated
                                         else ""), "value": e.value, "low": e.low,
                     "high": e.high, "unit": "share", "n": lat.n})
    return pd.DataFrame(rows, columns=["figure", "value", "low", "high", "unit", "n"])


def section_carryover(ctx: BuildContext) -> None:
    co = ctx.carryover
    if co is None:
        return
    rep = ctx.report
    s = rep.add_section("carryover", "Upstream fixes carried over")
    table = co["table"]
    counts = table["status"].value_counts()
    carried = table.loc[table["status"] == "carried", "method"].value_counts()
    s.p(f"{co['tree']} is compared with its upstream reference {co['upstream']}, judged at "
        f"{co['as_of']:%Y-%m-%d} (tree tip {co['tip_date']:%Y-%m-%d}). An upstream fix is an "
        "upstream commit with a resolved “Fixes:” line; it concerns the tree when the tree "
        "carries the code it repairs. Upstream fixes by status: "
        + ", ".join(f"{k} {int(counts.get(k, 0))}" for k in STATUSES) + ". Carried by: "
        + (", ".join(f"{k} {v}" for k, v in carried.items()) or "none")
        + f"; ambiguous patch-id matches {int(table['ambiguous'].sum())} (counted apart).")
    s.p("Paths: " + co["path_map_text"] + ".")
    excl = co.get("exclusions") or []
    s.p(f"Exclusions file: {len(excl)} entr{'y' if len(excl) == 1 else 'ies'}; "
        f"{int(counts.get('excluded', 0))} of the absent fixes are excluded by it."
        if ctx.options.exclusions_path else
        "No exclusions file was given: every absent fix that concerns the tree counts as "
        "missing.")
    lst = missing_table(table)
    n_missing = int((lst["status"] == "missing").sum())
    rep.add_table(s, Table(
        MISSING_KEY, f"Upstream fixes the tree lacks ({n_missing} missing, "
        f"{int((lst['status'] == 'excluded').sum())} excluded), oldest gap first",
        [("fix_hash", "upstream fix"), ("fix_date", "landed upstream"),
         ("gap_days", "gap (days)"), ("subsystem", "subsystem"), ("subject", "subject"),
         ("target_hash", "fixes"), ("target_method", "target matched by"),
         ("status", "status"), ("exclusion_reason", "exclusion reason")], lst,
        note=f"gap = days from the upstream fix to {co['as_of']:%Y-%m-%d}; every upstream "
             f"fix with its status is in {EVIDENCE_FILE}"))
    rep.evidence[EVIDENCE_FILE] = table
    _latency(ctx, s, co)
    s.p("Limits of this section:")
    s.bullets(list(LIMITS))


def _latency(ctx: BuildContext, s: Any, co: dict[str, Any]) -> None:
    from procmetrics.analyse.carryover.latency import KM, carryover_latency, compare_periods

    level = ctx.options.level
    lat = ctx.attempt("Carry-over latency", s,
                      lambda: carryover_latency(co["table"], level=level))
    if lat is None:
        return
    rep = ctx.report
    rep.add_table(s, Table(
        LATENCY_KEY, "Carry-over latency of the upstream fixes that concern the tree",
        [("figure", "figure"), ("value", "estimate"), ("low", f"{level:.0%} low"),
         ("high", f"{level:.0%} high"), ("unit", "unit"), ("n", "n")], latency_table(lat),
        note=f"{KM}; n = {lat.n} ({lat.n_carried} carried, {lat.n_censored} not yet carried, "
             f"censored at {co['as_of']:%Y-%m-%d}); an infinite bound means the curve's "
             "limit never reaches one half"))
    curves = {f"all (n={lat.n}, {lat.n_censored} censored)": lat.curve}
    values: dict[str, Any] = {"latency": lat.to_dict()}
    caption = (f"Share of the {lat.n} upstream fixes that concern the tree not yet carried "
               f"over t days after they landed upstream; {lat.n_censored} not carried by "
               f"{co['as_of']:%Y-%m-%d} are censored there (ticks)")
    if ctx.policy_date is not None:
        c = _periods(ctx, s, co, compare_periods)
        if c is not None:
            curves = {f"landed before {ctx.policy_date:%Y-%m-%d} (n={c.before.n}, "
                      f"{c.before.n_censored} censored)": c.before.curve,
                      f"landed from {ctx.policy_date:%Y-%m-%d} (n={c.after.n}, "
                      f"{c.after.n_censored} censored)": c.after.curve}
            values["periods"] = {"z": c.z, "p_faster_after": c.p_faster_after,
                                 "method": c.method}
            caption += (f"; fixes landed before and from the policy date apart (one-sided "
                        f"log-rank, faster after: z = {c.z:.2f}, p = {c.p_faster_after:.3g}; "
                        "a p-value is evidence, not a verdict: a claim needs the "
                        "carryover_faster_after kind)")
    data = pd.concat([cur.assign(curve=k) for k, cur in curves.items()], ignore_index=True)
    fig = Figure(FIGURE_KEY, "Carry-over latency: share of upstream fixes not yet carried",
                 caption, n=lat.n, method=KM, interval=f"{level:.0%} pointwise bands",
                 data=data, kinds=("history",), values=values,
                 png=plots.render(ctx, _plot, curves, level))
    ctx.add_figure(s, fig, result=lat, min_n=ctx.options.min_n)


def _plot(curves: dict[str, pd.DataFrame], level: float) -> Any:
    from procmetrics.plot.carryover import plot_carryover

    return plot_carryover(curves, level=level)


def _periods(ctx: BuildContext, s: Any, co: dict[str, Any], compare: Any) -> Any:
    from procmetrics.errors import InsufficientData

    try:
        return compare(co["table"], ctx.policy_date, level=ctx.options.level)
    except InsufficientData as exc:
        s.note(f"Carry-over before/after {ctx.policy_date:%Y-%m-%d}: not compared ({exc}).")
        return None
