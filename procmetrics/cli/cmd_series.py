"""``procmetrics series``: process metrics per period, with intervals and trends."""
from __future__ import annotations

import argparse

from procmetrics.cli import _series_common as common

DEFAULT = ("review_coverage", "independent_review", "applied_by_other", "fix_ratio",
           "fixes_tag_adoption", "commits")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("series", help="process metrics per period (table, CSV, figures)",
                       description="Review coverage, fix ratio, reverts, churn, authors ... per "
                       "period and subsystem, each with its interval, and a GLM trend per "
                       "series with its diagnostics.")
    common.add_series_arguments(p)
    p.add_argument("--no-trend", action="store_true", help="skip the trend fits")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from procmetrics.analyse.change.trend import fit_trend
    from procmetrics.errors import InsufficientData

    tables, name = common.load(args)
    pm = common.compute(args, tables)
    metrics = args.metric or [m for m in DEFAULT if m in set(pm.table["metric"])]
    out = common.out_dir(args)
    print(f"{name}: {pm.n_commits} commits ({pm.n_merges_excluded} merges excluded), "
          f"per {args.period}")
    common.print_data_quality(tables, metrics)
    trends = []
    for (sub, metric), rows in pm.table.groupby(["subsystem", "metric"], sort=False):
        if metric not in metrics:
            continue
        print(f"\n{metric} [{sub}]  ({rows['ci_method'].iloc[0]}, 95% interval)")
        for r in rows.itertuples():
            print(f"  {r.period:<14} {common.fmt(r.value):>8}  [{common.fmt(r.ci_low)}, "
                  f"{common.fmt(r.ci_high)}]  n={r.n}")
        if not args.no_trend:
            try:
                tr = fit_trend(pm.table, metric, sub)
            except InsufficientData as exc:
                print(f"  trend: not fitted ({exc})")
                continue
            trends.append(tr)
            e = tr.ratio_per_year or tr.slope
            print(f"  trend: {e.name} {common.fmt(e.value)} [{common.fmt(e.low)}, "
                  f"{common.fmt(e.high)}]; {tr.model}; {tr.fit.cov_type}")
            common.print_caveats(tr.caveats, "    ")
    common.print_caveats(pm.caveats, "")
    if out is not None:
        _write(out, pm, trends, metrics)
    return 0


def _write(out, pm, trends, metrics) -> None:
    import json

    from procmetrics.plot.diagnostics import plot_diagnostics
    from procmetrics.plot.series import plot_series, save_figure

    pm.table.to_csv(out / "metrics.csv", index=False, date_format="%Y-%m-%dT%H:%M:%SZ")
    (out / "trends.json").write_text(json.dumps([t.to_dict() for t in trends], indent=1,
                                                default=str) + "\n")
    by_key = {(t.metric, t.subsystem): t for t in trends}
    for (sub, metric), rows in pm.table.groupby(["subsystem", "metric"], sort=False):
        if metric in metrics:
            tr = by_key.get((metric, sub))
            stem = f"series_{metric}_{_safe(sub)}"
            save_figure(plot_series(rows, trend=tr), out / stem)
            if tr is not None:
                save_figure(plot_diagnostics(tr), out / f"diagnostics_{metric}_{_safe(sub)}")


def _safe(text: str) -> str:
    import re

    return re.sub(r"[^A-Za-z0-9_-]+", "-", text).strip("-") or "all"
