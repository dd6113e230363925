"""Section: before and after the declared process change (``compare_policy``)."""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.report import flags as fl
from procmetrics.report import plots
from procmetrics.report.context import BuildContext, date_text
from procmetrics.report.evidence import before_after
from procmetrics.report.model import Figure, Table
from procmetrics.report.sec_process import KINDS, SERIES


def _words(metric: str) -> str:
    return SERIES.get(metric, metric).split(":")[0]


def _ci(e: Any, fmt: str = "") -> str:
    """An estimate with its interval, in the digits every command prints (textfmt)."""
    from procmetrics import textfmt

    if e is None or e.value is None:
        return "–"
    if e.low is None or e.high is None:
        return textfmt.number(e.value, e.unit)
    return textfmt.interval(e.value, e.low, e.high, e.unit)


def run_compare(ctx: BuildContext) -> Any:
    from procmetrics.analyse.measures.metrics import MetricConfig
    from procmetrics.analyse.change.policy import compare_policy
    from procmetrics.resampling import N_BOOT, N_PERMUTATIONS

    d = ctx.data
    period = ctx.options.period
    return compare_policy(d["commits"], d["trailers"], at=ctx.policy_date,
                          commit_subsystems=d["commit_subsystems"], tags=d["tags"],
                          config=MetricConfig(
                              period=period, alpha=ctx.alpha,
                              subsystems=tuple(ctx.options.subsystems) or None,
                              subsystem_limit=ctx.options.subsystem_limit,
                              subsystem_min_commits=ctx.options.subsystem_min_commits),
                          alpha=ctx.alpha, n_boot=N_BOOT, n_resamples=N_PERMUTATIONS)


def section_compare(ctx: BuildContext) -> None:
    rep = ctx.report
    s = rep.add_section("before-after", "Before and after the process change")
    if ctx.policy_date is None:
        s.p("No policy date was given (--policy-date), so no before/after comparison is "
            "made.")
        return
    date = ctx.policy_date
    s.p(f"The history is split at {date:%Y-%m-%d}. Three kinds of evidence are given. "
        "(1) An interrupted time series per measure: a segmented regression of the "
        f"per-{ctx.options.period} shares with a level change and a slope change at the date "
        "(a period that straddles the date is left out), with Newey–West errors and placebo "
        "dates as a check. (2) The shares of all commits before and after, with the "
        "difference and its Newcombe interval. (3) Per-commit distributions (lines changed, "
        "reviewers) compared as distributions: empirical distribution functions, the "
        "Hodges–Lehmann shift and Cliff's delta with intervals.")
    s.note("A change at the date does not show by itself that the policy caused it: other "
           "changes at the same time, or a trend already under way, can produce one. The "
           "dashed “pre-date trend continued” line is an extrapolation.")
    pc = ctx.attempt("Before/after comparison", s, lambda: run_compare(ctx))
    if pc is None:
        return
    for msg in pc.skipped:
        s.note(f"Not computed: {msg}.")
    for r in pc.its:
        lv, ratio = r.level_change, r.level_ratio
        p = float(r.fit.params.set_index("term").loc["post", "p_value"])
        key = f"its-{r.metric.replace('_', '-')}"
        fig = Figure(
            key, f"{_words(r.metric)}: interrupted time series at {date:%Y-%m-%d}",
            f"{_words(r.metric)} per {ctx.options.period} with the segmented fit and the "
            f"pre-date trend continued (dashed, extrapolated); level change at the date "
            f"{_ci(lv)} {lv.unit}"
            + (f", i.e. odds ratio {_ci(ratio)}" if ratio is not None else "")
            + f"; slope change {_ci(r.slope_change)} {r.slope_change.unit}"
            + (f"; placebo-date p = {r.placebo_p_level:.2f}" if r.placebo_p_level is not None
               else "; no placebo dates could be fitted")
            + f"; {r.n_before} periods before, {r.n_after} after"
            + (f", {r.n_transition} straddling the date left out" if r.n_transition else ""),
            n=int(r.n), method=f"segmented regression: {r.model}; {r.cov_type}",
            interval=f"{lv.level:.0%} interval and band", data=r.fitted, kinds=KINDS.get(
                r.metric, ("history",)),
            values={"its": r.to_dict(), "p_level": p}, png=plots.its_png(ctx, r))
        ctx.add_figure(s, fig, result=r, min_n=ctx.options.min_n, p_value=p)
    _proportions(ctx, s, pc)
    _distributions(ctx, s, pc)
    _subsystems(ctx, s, pc)
    _change_points(ctx, s, pc)


def _proportions(ctx: BuildContext, s: Any, pc: Any) -> None:
    rows, flags = [], []
    for c in pc.proportions:
        p = min(t.p_value for t in c.tests)
        rows.append({"quantity": c.quantity.replace("_", " "), "n_before": c.p_a.n,
                     "share_before": c.p_a.value, "n_after": c.p_b.n,
                     "share_after": c.p_b.value, "difference": c.difference.value,
                     "low": c.difference.low, "high": c.difference.high, "p_value": p})
        flags += fl.from_result(c, "before-after-shares", prefix=c.quantity)
        flags += fl.rule_flags("before-after-shares", n=c.p_a.n + c.p_b.n,
                               min_n=ctx.options.min_n, p_value=p, alpha=ctx.alpha,
                               effect_negligible=abs(c.difference.high or 1) < 0.02
                               and abs(c.difference.low or 1) < 0.02)
    if not rows:
        return
    flags += fl.rule_flags("before-after-shares", n=None, min_n=None, n_tests=len(rows),
                           corrected=False)
    ctx.report.add_table(s, Table(
        "before-after-shares", f"Shares of commits before and from "
        f"{ctx.policy_date:%Y-%m-%d}.",
        [("quantity", "Measure"), ("n_before", "Commits before"),
         ("share_before", "Share before (%)"), ("n_after", "Commits after"),
         ("share_after", "Share after (%)"), ("difference", "Difference (points)"),
         ("low", f"{ctx.options.level:.0%} interval from"), ("high", "to"),
         ("p_value", "p (smallest of Fisher, χ²)")], pd.DataFrame(rows),
        note="Difference = share after minus share before, in percentage points, with the "
             "Newcombe hybrid score interval (the CSV and JSON hold fractions: 0.10 = 10 "
             "points). Commits are treated as independent here; the time series above allows "
             "for variation between periods. A difference whose interval lies within ±2 "
             "percentage points is treated as negligible.",
        flags=fl.dedupe(flags),
        percent_columns=("share_before", "share_after", "difference", "low", "high")))


def _distributions(ctx: BuildContext, s: Any, pc: Any) -> None:
    from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags

    if not pc.distributions:
        return
    f = ctx.commit_flags(MetricConfig(period=ctx.options.period))
    side = pd.Series(before_after(f["date"], ctx.policy_date), index=f.index, dtype=object)
    cols = {"lines changed per commit": "churn", "reviewers per commit": "n_reviewers"}
    for c in pc.distributions:
        col = cols.get(c.quantity)
        if col is None:
            continue
        data = pd.DataFrame({"hash": f["hash"], "side": side, c.quantity.replace(" ", "_"):
                             f[col]}).dropna()
        hl, cd = c.hodges_lehmann, c.cliffs_delta
        p = min(t.p_value for t in c.tests)
        key = "ecdf-" + ("lines" if col == "churn" else "reviewers")
        shown = (f"Empirical distribution functions of {c.quantity}, before and from "
                 f"{ctx.policy_date:%Y-%m-%d} (ECDF: no binning; shaded: "
                 f"{ctx.options.level:.0%} Dvoretzky–Kiefer–Wolfowitz band)"
                 if col == "churn" else
                 f"Share of commits with 0, 1, 2, … {c.quantity.replace(' per commit', '')}, "
                 f"before and from {ctx.policy_date:%Y-%m-%d}, with {ctx.options.level:.0%} "
                 "Wilson intervals (a small count reads better as bars than as an ECDF)")
        fig = Figure(
            key, f"{c.quantity.capitalize()} before and after",
            f"{shown}. Medians {_ci(c.median_a, '.1f')} "
            f"before and {_ci(c.median_b, '.1f')} after; Hodges–Lehmann shift "
            f"{_ci(hl, '.2f')}; Cliff's delta {_ci(cd, '.2f')} ({c.magnitude}); smallest "
            f"test p = {p:.3g} ({', '.join(t.name.replace('_', '-') for t in c.tests)})",
            n=int(c.n_a + c.n_b), method="ECDF; Mann–Whitney, Kolmogorov–Smirnov and "
                                         "Anderson–Darling (permutation) tests",
            interval=f"{hl.level:.0%} Moses interval (shift), bootstrap (Cliff's delta)",
            data=data, kinds=("history",), values={"comparison": c.to_dict()},
            png=plots.ecdf_png(ctx, data, c))
        ctx.add_figure(s, fig, result=c, min_n=ctx.options.min_n, p_value=p,
                       effect_negligible=c.magnitude == "negligible")


def _subsystems(ctx: BuildContext, s: Any, pc: Any) -> None:
    t = pc.subsystems
    sel = pc.selection
    if sel is not None and sel.n_left_out:
        s.p(f"Subsystems tested on their own: {sel.reason}. {sel.n_left_out} of "
            f"{sel.n_available} subsystems with commits were left out (they remain in the "
            "whole-project series); the false-discovery correction below counts only the "
            "tests actually run.")
    if t is None or t.empty:
        return
    m = pc.multiplicity
    tab = Table(
        "its-subsystems", "Level change at the date per subsystem (interrupted time series), "
        "with p-values adjusted for the number of comparisons.",
        [("subsystem", "Subsystem"), ("metric", "Measure"), ("level_change", "Level change "
          "(log-odds)"), ("ci_low", f"{ctx.options.level:.0%} interval from"),
         ("ci_high", "to"), ("p_value", "p"), ("p_bh", "p (BH)"), ("p_by", "p (BY)"),
         ("n_before", "Periods before"), ("n_after", "Periods after")],
        t.sort_values(["metric", "subsystem"]).reset_index(drop=True),
        note=(f"{m.family_size} comparisons; Benjamini–Hochberg and Benjamini–Yekutieli "
              "adjusted p-values (false discovery rate). Read the adjusted columns."
              if m is not None else ""))
    tab.flags = fl.dedupe(fl.from_result(m, tab.key) + fl.rule_flags(
        tab.key, n=None, min_n=None, n_tests=len(t), corrected=m is not None))
    ctx.report.add_table(s, tab)


def _change_points(ctx: BuildContext, s: Any, pc: Any) -> None:
    rows = []
    cpt = ctx.report.tables.get("change-points")
    known = {} if cpt is None or cpt.data.empty else {
        (r["metric"], r["period"]): r["tuning_sensitive"]
        for r in cpt.data[cpt.data["subsystem"] == "(all)"].to_dict("records")}
    for metric, rel in pc.change_points:
        rows.append({"metric": _words(metric), "status": rel.status,
                     "nearest": rel.nearest_period or "–",
                     "distance": rel.distance_periods,
                     "tolerance": rel.tolerance_periods,
                     "tuning_sensitive": known.get((metric, rel.nearest_period))})
    if not rows:
        return
    ctx.report.add_table(s, Table(
        "changes-vs-date", "Where the detected change points lie relative to the date.",
        [("metric", "Measure"), ("status", "Change point"), ("nearest", "Nearest change "
          "(first period)"), ("distance", f"Distance ({ctx.options.period}s)"),
         ("tolerance", f"Tolerance ({ctx.options.period}s)"),
         ("tuning_sensitive", "Moves with penalty")], pd.DataFrame(rows),
        note=f"“at declared date”: a change within the tolerance of the first "
             f"{ctx.options.period} from {date_text(ctx.policy_date)}; “elsewhere”: changes, "
             "none that close; “none”: no change detected (not evidence of no change). "
             "“Moves with penalty” repeats the change-point table's judgement for the "
             "nearest change (– when there is none)."))
