"""The report's figures: each function calls one plot of :mod:`procmetrics.plot`
and returns PNG bytes (or ``None`` when there is nothing to draw)."""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.report.figures import render


def series_png(ctx: Any, rows: pd.DataFrame, cp: Any, tr: Any, metric: str,
               label: str) -> bytes | None:
    from procmetrics.plot.series import plot_series

    if rows["value"].notna().sum() == 0:
        return None
    return render(plot_series, rows, trend=tr, changes=cp, policy_date=ctx.policy_date,
                  title=f"{metric.replace('_', ' ')}: {label}")


def adoption_png(ctx: Any, rows: pd.DataFrame) -> bytes | None:
    from procmetrics.plot.series import plot_series

    if rows.empty or rows["value"].notna().sum() == 0:
        return None
    return render(plot_series, rows, policy_date=ctx.policy_date,
                  title="share of commits with a Fixes: reference")


def its_png(ctx: Any, result: Any) -> bytes | None:
    from procmetrics.plot.series import plot_its

    return render(plot_its, result)


def ecdf_png(ctx: Any, data: pd.DataFrame, comparison: Any) -> bytes | None:
    from procmetrics.plot.distributions import plot_ecdf

    col = [c for c in data.columns if c not in ("hash", "side")][0]
    samples = {side: data.loc[data["side"] == side, col].to_numpy(float)
               for side in ("before", "after")}
    return render(plot_ecdf, samples, quantity=comparison.quantity,
                  log_x=comparison.quantity.startswith("lines"))


def survival_png(ctx: Any, la: Any, group: str) -> bytes | None:
    from procmetrics.plot.survival import plot_survival

    if la.curves[la.curves["group"] == group].empty:
        return None
    return render(plot_survival, la, group=group)


def survival_groups_png(ctx: Any, la: Any) -> bytes | None:
    from procmetrics.plot.survival import plot_survival_by_group

    return render(plot_survival_by_group, la, method="horizon")


def growth_png(ctx: Any, g: Any) -> bytes | None:
    from procmetrics.plot.growth import plot_growth

    return render(plot_growth, g)
