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


#: which trailer a metric rests on: (key of quality["first_use"], words)
_TRAILER_OF = {"review_coverage": ("first_review", "review trailer"),
               "independent_review": ("first_review", "review trailer"),
               "unreviewed_self_commits": ("first_review", "review trailer"),
               "fix_ratio": ("first_fixes", "Fixes: reference"),
               "stable_request_share": ("first_fixes", "Fixes: reference")}


def _span(ctx: Any) -> tuple[Any, Any] | None:
    fu = ctx.quality.get("first_use") or {}
    if not fu.get("first_commit") or not fu.get("last_commit"):
        return None
    return fu["first_commit"], fu["last_commit"]


def _first_use(ctx: Any, metric: str) -> tuple[Any, str]:
    key, words = _TRAILER_OF.get(metric, (None, ""))
    fu = ctx.quality.get("first_use") or {}
    return (fu.get(key) if key else None), words


def series_png(ctx: Any, rows: pd.DataFrame, cp: Any, tr: Any, metric: str,
               label: str) -> bytes | None:
    from procmetrics.plot.series import plot_series
    from procmetrics.plot.style import quantity

    if rows["value"].notna().sum() == 0:
        return None
    first, words = _first_use(ctx, metric)
    return render(ctx, plot_series, _bounded(rows), trend=tr, changes=cp,
                  policy_date=ctx.policy_date, span=_span(ctx), first_use=first,
                  first_use_what=words, title=f"{quantity(metric)[0]}: {label}")


def facets_png(ctx: Any, metric: str, panels: list[tuple[str, pd.DataFrame, Any]]
               ) -> bytes | None:
    from procmetrics.plot.series import plot_series_facets

    panels = [(label, _bounded(rows), tr) for label, rows, tr in panels
              if rows["value"].notna().any()]
    if not panels:
        return None
    first, words = _first_use(ctx, metric)
    return render(ctx, plot_series_facets, panels, policy_date=ctx.policy_date,
                  span=_span(ctx), first_use=first, first_use_what=words,
                  level=ctx.options.level)


def adoption_png(ctx: Any, rows: pd.DataFrame) -> bytes | None:
    from procmetrics.plot.series import plot_series

    if rows.empty or rows["value"].notna().sum() == 0:
        return None
    return render(ctx, plot_series, _bounded(rows), policy_date=ctx.policy_date,
                  span=_span(ctx), title="Use of the Fixes: trailer")


def its_png(ctx: Any, result: Any) -> bytes | None:
    from procmetrics.plot.series import plot_its

    return render(ctx, plot_its, result)


def ecdf_png(ctx: Any, data: pd.DataFrame, comparison: Any) -> bytes | None:
    """Lines changed: ECDFs with DKW bands; reviewers per commit (a small count): bars of
    the share of commits with 0, 1, 2, ... reviewers, with Wilson intervals."""
    from procmetrics.plot.distributions import plot_count_shares, plot_ecdf

    col = [c for c in data.columns if c not in ("hash", "side")][0]
    samples = {side: data.loc[data["side"] == side, col].to_numpy(float)
               for side in ("before", "after")}
    if comparison.quantity.startswith("reviewers"):
        return render(ctx, plot_count_shares, count_shares(samples, level=ctx.options.level),
                      quantity="reviewers per commit", level=ctx.options.level)
    return render(ctx, plot_ecdf, samples, quantity=comparison.quantity,
                  log_x=comparison.quantity.startswith("lines"), level=ctx.options.level)


def count_shares(samples: dict[str, Any], *, level: float = 0.95, top: int = 5
                 ) -> pd.DataFrame:
    """Share of values equal to 0, 1, ..., and ``top`` or more, per sample, with Wilson
    intervals: columns ``group``, ``value`` (label), ``count``, ``n``, ``share``,
    ``ci_low``, ``ci_high``."""
    import numpy as np

    from procmetrics.analyse.measures.intervals import wilson

    rows = []
    for group, vals in samples.items():
        v = np.asarray(vals, dtype=float)
        v = v[np.isfinite(v)]
        hi = int(min(top, v.max())) if len(v) else 0
        for k in range(hi + 1):
            hit = (v >= k) if k == top else (v == k)
            rows.append({"group": group, "value": f"{k}+" if k == top else str(k),
                         "count": int(hit.sum()), "n": int(len(v))})
    out = pd.DataFrame(rows)
    if out.empty:
        return out
    lo, hi_ = wilson(out["count"].to_numpy(), out["n"].to_numpy(), alpha=round(1 - level, 10))
    return out.assign(share=out["count"] / out["n"], ci_low=lo, ci_high=hi_)


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
