"""The report's figures: each function calls one plot of :mod:`procmetrics.plot`
and returns PNG bytes (or ``None`` when there is nothing to draw)."""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.report.figures import render as _render


def render(ctx: Any, plot: Any, *args: Any, **kwargs: Any) -> bytes | None:
    """Draw; a figure that cannot be drawn is left without image (its caption and data
    stay, and the limitations section says so) rather than stopping the report."""
    try:
        return _render(plot, *args, **kwargs)
    except (ValueError, TypeError, KeyError, IndexError) as exc:
        ctx.skipped.append(f"a figure could not be drawn ({plot.__name__}: {exc})")
        return None


def _bounded(rows: pd.DataFrame) -> pd.DataFrame:
    """Interval ends that float rounding put a hair on the wrong side of the value."""
    r = rows.copy()
    v = r["value"]
    r["ci_low"] = r["ci_low"].where(r["ci_low"].isna() | (r["ci_low"] <= v), v)
    r["ci_high"] = r["ci_high"].where(r["ci_high"].isna() | (r["ci_high"] >= v), v)
    return r


def series_png(ctx: Any, rows: pd.DataFrame, cp: Any, tr: Any, metric: str,
               label: str) -> bytes | None:
    from procmetrics.plot.series import plot_series

    if rows["value"].notna().sum() == 0:
        return None
    return render(ctx, plot_series, _bounded(rows), trend=tr, changes=cp,
                  policy_date=ctx.policy_date,
                  title=f"{metric.replace('_', ' ')}: {label}")


def adoption_png(ctx: Any, rows: pd.DataFrame) -> bytes | None:
    from procmetrics.plot.series import plot_series

    if rows.empty or rows["value"].notna().sum() == 0:
        return None
    return render(ctx, plot_series, _bounded(rows), policy_date=ctx.policy_date,
                  title="share of commits with a Fixes: reference")


def its_png(ctx: Any, result: Any) -> bytes | None:
    from procmetrics.plot.series import plot_its

    return render(ctx, plot_its, result)


def ecdf_png(ctx: Any, data: pd.DataFrame, comparison: Any) -> bytes | None:
    from procmetrics.plot.distributions import plot_ecdf

    col = [c for c in data.columns if c not in ("hash", "side")][0]
    samples = {side: data.loc[data["side"] == side, col].to_numpy(float)
               for side in ("before", "after")}
    return render(ctx, plot_ecdf, samples, quantity=comparison.quantity,
                  log_x=comparison.quantity.startswith("lines"))


def survival_png(ctx: Any, la: Any, group: str) -> bytes | None:
    from procmetrics.plot.survival import plot_survival

    if la.curves[la.curves["group"] == group].empty:
        return None
    return render(ctx, plot_survival, la, group=group)


def survival_groups_png(ctx: Any, la: Any) -> bytes | None:
    from procmetrics.plot.survival import plot_survival_by_group

    return render(ctx, plot_survival_by_group, la, method="horizon")


def growth_png(ctx: Any, g: Any) -> bytes | None:
    from procmetrics.plot.growth import plot_growth

    return render(ctx, plot_growth, g)
