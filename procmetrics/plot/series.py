"""Per-period series with intervals, fitted trend, change points and the policy date.

Figures are built on :class:`matplotlib.figure.Figure` (no pyplot, no global
backend state, Agg rendering). Every title states n, the interval method and
level. Save with :func:`save_figure` (PNG and SVG).
"""
from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure


def save_figure(fig_or_ax: Any, stem: str | Path, *, dpi: int = 150) -> list[Path]:
    """Write ``stem.png`` and ``stem.svg`` (no timestamps in the metadata)."""
    fig = fig_or_ax.figure if hasattr(fig_or_ax, "figure") and not isinstance(
        fig_or_ax, Figure) else fig_or_ax
    stem = Path(stem)
    out = []
    for ext, meta in (("png", {"Software": None}), ("svg", {"Date": None})):
        path = stem.with_suffix("." + ext)
        fig.savefig(path, format=ext, dpi=dpi, metadata=meta, bbox_inches="tight",
                    facecolor="white")
        out.append(path)
    return out


def _mid(rows: pd.DataFrame) -> pd.Series:
    return rows["period_start"] + (rows["period_end"] - rows["period_start"]) / 2


def _naive(ts: Any) -> Any:
    """matplotlib wants naive UTC datetimes."""
    t = pd.to_datetime(ts, utc=True)
    if isinstance(t, pd.Timestamp):
        return t.tz_localize(None).to_pydatetime()
    return t.dt.tz_localize(None)


def plot_series(rows: pd.DataFrame, *, trend: Any = None, changes: Any = None,
                policy_date: Any = None, title: str | None = None,
                ax: Axes | None = None) -> Axes:
    """One metric of one subsystem: values with interval bars per period.

    Parameters
    ----------
    rows : rows of the tidy metric table for one metric and subsystem.
    trend : optional :class:`~procmetrics.analyse.change.trend.TrendResult` (line + band).
    changes : optional :class:`~procmetrics.analyse.change.changepoints.ChangePointResult`
        (vertical line at each change, shaded position interval, segment levels).
    policy_date : optional date drawn as a dashed black line.
    """
    ax = ax if ax is not None else Figure(figsize=(7.0, 3.8)).subplots()
    r = rows.sort_values("period_start")
    r = r[r["value"].notna()]
    if r.empty:
        ax.set_title(title or "no data")
        return ax
    metric, sub = str(r["metric"].iloc[0]), str(r["subsystem"].iloc[0])
    x = _naive(_mid(r))
    y = r["value"].to_numpy(float)
    lo, hi = r["ci_low"].to_numpy(float), r["ci_high"].to_numpy(float)
    has_ci = np.isfinite(lo).any()
    yerr = np.vstack([y - lo, hi - y]) if has_ci else None
    n_total = int(r["n"].sum())
    ax.errorbar(x, y, yerr=yerr, fmt="o", ms=3, lw=0.8, color="black", capsize=0,
                label=f"per period (n={n_total}, {len(r)} periods)")
    if trend is not None:
        f = trend.fitted
        fx = _naive(_mid(f))
        line = ax.plot(fx, f["fitted"], color="tab:blue",
                       label=f"trend: {trend.model.split(';')[0]}")[0]
        ax.fill_between(fx, f["fit_low"], f["fit_high"], color=line.get_color(), alpha=0.15,
                        lw=0)
    if changes is not None:
        for seg in changes.segments.itertuples():
            if seg.period_start is not None and seg.period_end is not None:
                ax.hlines(seg.level, _naive(seg.period_start), _naive(seg.period_end),
                          colors="tab:red", lw=1.2, alpha=0.7)
        for i, c in enumerate(changes.changes):
            if c.date is None:
                continue
            ax.axvline(_naive(c.date), color="tab:red", lw=1.0,
                       label="change point (bootstrap interval)" if i == 0 else None)
            if c.date_low is not None and c.date_high is not None:
                ax.axvspan(_naive(c.date_low), _naive(c.date_high), color="tab:red",
                           alpha=0.12, lw=0)
    if policy_date is not None:
        ax.axvline(_naive(pd.Timestamp(policy_date)), color="black", ls="--", lw=1.0,
                   label=f"policy date {pd.Timestamp(policy_date):%Y-%m-%d}")
    method = str(r["ci_method"].iloc[0])
    level = getattr(getattr(trend, "slope", None), "level", 0.95)
    ax.set_title((title or f"{metric} — {sub}")
                 + f"\nn={n_total}; bars: {level:.0%} {method}", fontsize="medium")
    ax.set_xlabel("period midpoint (UTC)", fontsize="small")
    ax.set_ylabel(metric)
    ax.legend(fontsize="x-small", loc="best")
    return ax


def plot_its(result: Any, *, ax: Axes | None = None) -> Axes:
    """Interrupted time series: observed, fitted segments, counterfactual, the date.

    ``result`` is an :class:`~procmetrics.analyse.change.its.ITSResult`. The
    counterfactual (pre-date trend continued) is dashed: it is an extrapolation.
    """
    ax = ax if ax is not None else Figure(figsize=(7.0, 3.8)).subplots()
    f = result.fitted
    x = _naive(f["period_start"])
    ax.plot(x, f["observed"], "o", ms=3, color="black",
            label=f"observed ({result.n_before} + {result.n_after} periods, n={result.n})")
    for post, part in f.groupby("post"):
        px = _naive(part["period_start"])
        ax.plot(px, part["fitted"], color="tab:blue", label=None if post else "segmented fit")
        ax.fill_between(px, part["fit_low"], part["fit_high"], color="tab:blue", alpha=0.15,
                        lw=0)
    post = f[f["post"]]
    if len(post):
        ax.plot(_naive(post["period_start"]), post["counterfactual"], ls="--", color="gray",
                label="pre-date trend continued (extrapolated)")
    ax.axvline(_naive(result.at), color="black", ls="--", lw=1.0,
               label=f"policy date {result.at:%Y-%m-%d}")
    lv = result.level_change
    ax.set_title(f"{result.metric} — {result.subsystem}: level change {lv.value:+.2f} "
                 f"[{lv.low:+.2f}, {lv.high:+.2f}] {lv.unit}", fontsize="medium")
    ax.set_xlabel(f"{result.model.split(';')[0]}; {result.cov_type}; {lv.level:.0%} band",
                  fontsize="small")
    ax.set_ylabel(result.metric)
    ax.legend(fontsize="x-small", loc="best")
    return ax
