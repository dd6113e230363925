"""The report's figures: each function calls one plot of :mod:`procmetrics.plot`
and returns PNG bytes (or ``None`` when there is nothing to draw)."""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.report.figures import render


def series_png(ctx: Any, rows: pd.DataFrame, cp: Any, tr: Any, metric: str,
               label: str) -> bytes | None:
    return None


def adoption_png(ctx: Any, rows: pd.DataFrame) -> bytes | None:
    return None


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


def before_after_png(ctx: Any, sh: Any) -> bytes | None:
    return None
