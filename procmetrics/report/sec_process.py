"""Section 3: process series per period, their trends and change points."""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.analyse.change.changepoints import STATED_FALSE_POSITIVE_RATE
from procmetrics.report import flags as fl
from procmetrics.report import plots
from procmetrics.report.context import BuildContext, date_text
from procmetrics.report.model import Figure, Table

#: the series every report shows, with the words used for them
SERIES: dict[str, str] = {
    "review_coverage": "Review coverage: share of commits with at least one review trailer "
                       "(Reviewed-by, Acked-by or Tested-by)",
    "independent_review": "Independent review: share of commits with a review trailer from "
                          "an address other than the author's",
    "applied_by_other": "Applied by someone else: share of commits whose committer is not "
                        "their author (e-mails after the .mailmap), the trace a "
                        "maintainer-driven project leaves even without review trailers",
    "fix_ratio": "Fix ratio: share of commits that fix an earlier commit (resolved "
                 "Fixes: link)",
}
KINDS = {"review_coverage": ("history", "review"), "independent_review": ("history", "review"),
         "applied_by_other": ("history",),
         "fix_ratio": ("history", "trailers", "fix_ratio")}


def compute_metrics(ctx: BuildContext) -> Any:
    from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics

    d = ctx.data
    cfg = MetricConfig(period=ctx.options.period, alpha=ctx.alpha,
                       subsystems=tuple(ctx.options.subsystems) or None)
    subs = d["commit_subsystems"] if ctx.options.subsystems else None
    return compute_period_metrics(d["commits"], d["trailers"], commit_subsystems=subs,
                                  tags=d["tags"], config=cfg, flags=ctx.commit_flags(cfg))


def _series_rows(ctx: BuildContext, metric: str, subsystem: str) -> pd.DataFrame:
    t = ctx.metrics.table
    return t[(t["metric"] == metric) & (t["subsystem"] == subsystem)].reset_index(drop=True)


def section_process(ctx: BuildContext) -> None:
    from procmetrics.analyse.change.changepoints import ChangePointConfig, changes_for_metric
    from procmetrics.analyse.measures.metrics import ALL
    from procmetrics.analyse.change.trend import fit_trend

    rep = ctx.report
    s = rep.add_section("process-series", "Process series and change points")
    if ctx.metrics is None:
        s.p("No process series could be computed from this store.")
        return
    s.p(f"Each series is a share of non-merge commits per {ctx.options.period}, with its "
        f"{ctx.options.level:.0%} Wilson interval. Change points are searched with PELT on "
        "variance-stabilised values (arcsine square root, weighted by the commits in each "
        "period) with a penalty proportional to the noise level times ln(n); each change "
        "carries an interval for its position from a residual bootstrap, the share of "
        "bootstrap replicates in which it reappears, and whether it survives halving or "
        "doubling the penalty. Trends are binomial regressions on time (quasi-binomial "
        "when overdispersed, Newey–West errors when autocorrelated).")
    groups = [ALL] + ctx.subsystems()
    n_series = len(SERIES) * len(groups)
    cp_rows: list[dict[str, Any]] = []
    tr_rows: list[dict[str, Any]] = []
    cp_flags: list = []
    for metric, words in SERIES.items():
        panels: list[tuple[str, Any, Any, Any]] = []
        for sub in groups:
            rows = _series_rows(ctx, metric, sub)
            if rows.empty or rows["denominator"].sum() == 0:
                continue
            label = "all subsystems" if sub == ALL else f"subsystem “{sub}”"
            cp = ctx.attempt(f"Change points of {metric} ({label})", s, lambda: changes_for_metric(
                ctx.metrics.table, metric, sub, config=ChangePointConfig(alpha=ctx.alpha)))
            tr = ctx.attempt(f"Trend of {metric} ({label})", s,
                             lambda: fit_trend(ctx.metrics.table, metric, sub, alpha=ctx.alpha))
            n = int(rows["denominator"].sum())
            if sub != ALL:       # subsystems: small multiples on a shared axis, below
                panels.append((sub, rows, cp, tr))
            key = f"series-{metric.replace('_', '-')}" + ("" if sub == ALL else
                                                           f"-{slug(sub)}")
            data = rows.copy()
            fig = Figure(
                key=key, title=words.split(":")[0] + f" ({label})",
                caption=f"{words}, per {ctx.options.period}, {label}, with the fitted "
                        "trend and its band"
                        + ("; vermillion dash-dot lines: detected change points, shaded: "
                           "their position intervals, vermillion steps: segment levels"
                           if cp is not None
                           and cp.changes else "; no change point detected"
                           if cp is not None else "")
                        + ("; dashed black line: the policy date"
                           if ctx.policy_date is not None else "")
                        + "; open markers: periods the history covers only in part; grey: "
                          "before the trailer was first used",
                n=n, method=("Wilson score interval per period; change points: PELT on "
                             "arcsine-square-root values" if cp is not None else
                             "Wilson score interval per period"),
                interval=f"{ctx.options.level:.0%} Wilson interval", data=data,
                kinds=KINDS[metric],
                values={"metric": metric, "subsystem": sub,
                        "change_points": None if cp is None else cp.to_dict(),
                        "trend": None if tr is None else _trend_dict(tr)},
                png=plots.series_png(ctx, rows, cp, tr, metric, label) if sub == ALL else None)
            if sub == ALL:
                ctx.add_figure(s, fig, result={"change points": cp, "trend model": tr},
                               min_n=ctx.options.min_n)
            if cp is not None:
                cp_flags += fl.from_result(cp, "change-points", prefix=f"{metric} ({label})")
                for c in cp.changes:
                    cp_rows.append({
                        "metric": metric, "subsystem": sub, "period": c.period,
                        "date_low": date_text(c.date_low), "date_high": date_text(c.date_high),
                        "level_before": c.level_before.value, "level_after": c.level_after.value,
                        "support": c.support, "tuning_sensitive": c.tuning_sensitive})
            if tr is not None:
                r = tr.ratio_per_year
                tr_rows.append({"metric": metric, "subsystem": sub, "periods": tr.n_periods,
                                "n": tr.n, "model": tr.model,
                                "ratio": None if r is None else r.value,
                                "low": None if r is None else r.low,
                                "high": None if r is None else r.high})
        if panels:
            _facets(ctx, s, metric, words, panels)
    cp_tab = Table("change-points", "Change points found in the process series.",
                   [("metric", "Series"), ("subsystem", "Subsystem"),
                    ("period", "First period after the change"),
                    ("date_low", "Position interval from"), ("date_high", "to"),
                    ("level_before", "Share before (%)"), ("level_after", "Share after (%)"),
                    ("support", "Bootstrap support"), ("tuning_sensitive", "Moves with penalty")],
                   pd.DataFrame(cp_rows, columns=["metric", "subsystem", "period", "date_low",
                                                  "date_high", "level_before", "level_after",
                                                  "support", "tuning_sensitive"]),
                   note=(f"{n_series} series were searched. The penalty is tuned so that "
                         "a series of at least 24 periods without a real change shows a false "
                         f"change in at most about {STATED_FALSE_POSITIVE_RATE:.0%} of cases "
                         "(shorter series are flagged), so among "
                         f"{n_series} series about {STATED_FALSE_POSITIVE_RATE * n_series:.1f} "
                         "false changes are to be expected; no further correction is applied. "
                         if n_series > 1 else "") + "Shares in percent (the CSV and JSON hold "
                   "fractions, 0 to 1).", percent_columns=("level_before", "level_after"))
    cp_tab.flags = fl.dedupe(fl.retarget(cp_flags, "change-points")
                             + fl.rule_flags("change-points", n=None, min_n=None,
                                             n_tests=n_series, corrected=False))
    if not cp_rows:
        s.p("No change point was detected in any series. This is no evidence that the "
            "process did not change: a change smaller than the period-to-period noise, or "
            "one spread over several periods, can go undetected.")
    rep.add_table(s, cp_tab)
    if tr_rows:
        rep.add_table(s, Table(
            "trends", "Trends of the process series: odds ratio per year.",
            [("metric", "Series"), ("subsystem", "Subsystem"), ("periods", "Periods"),
             ("n", "Commits"), ("model", "Model"), ("ratio", "Odds ratio per year"),
             ("low", f"{ctx.options.level:.0%} interval from"), ("high", "to")],
            pd.DataFrame(tr_rows),
            note="An odds ratio per year above 1 means the share rises over time. A trend "
                 "describes the observed window only; it is not extrapolated."))


def _facets(ctx: BuildContext, s: Any, metric: str, words: str,
            panels: list[tuple[str, Any, Any, Any]]) -> None:
    """One figure of small multiples for the subsystems shown on their own."""
    data = pd.concat([p[1] for p in panels], ignore_index=True)
    n = int(data["denominator"].sum())
    key = f"series-{metric.replace('_', '-')}-by-subsystem"
    fig = Figure(
        key=key, title=words.split(":")[0] + " by subsystem",
        caption=f"{words}, per {ctx.options.period}, one panel per subsystem on a shared "
                "axis, each with its fitted trend and band; open markers: periods the "
                "history covers only in part; grey: before the trailer was first used"
                + ("; dashed black line: the policy date" if ctx.policy_date is not None
                   else "") + ". Change points per subsystem are in the change-point table",
        n=n, method="Wilson score interval per period; trend per subsystem",
        interval=f"{ctx.options.level:.0%} Wilson interval", data=data, kinds=KINDS[metric],
        values={"metric": metric, "subsystems": [p[0] for p in panels],
                "trends": {p[0]: None if p[3] is None else _trend_dict(p[3]) for p in panels}},
        png=plots.facets_png(ctx, metric, [(p[0], p[1], p[3]) for p in panels]))
    ctx.add_figure(s, fig, result={f"{p[0]}: trend model": p[3] for p in panels},
                   min_n=ctx.options.min_n)


def _trend_dict(tr: Any) -> dict[str, Any]:
    return {"model": tr.model, "slope": tr.slope.to_dict(),
            "ratio_per_year": None if tr.ratio_per_year is None else tr.ratio_per_year.to_dict(),
            "n_periods": tr.n_periods, "n": tr.n,
            "diagnostics": [d.to_dict() for d in tr.diagnostics],
            "caveats": [c.to_dict() for c in tr.caveats]}


def slug(text: str) -> str:
    """A safe key fragment from untrusted text (subsystem names): [a-z0-9-] only."""
    import hashlib
    import re

    s = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")[:40]
    tail = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()[:6]
    return f"{s}-{tail}" if s else tail
