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

from procmetrics.plot import style as st


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


def _partial(r: pd.DataFrame, span: Any) -> np.ndarray:
    """Periods the data cover only in part (the history starts or ends inside them)."""
    if span is None:
        return np.zeros(len(r), dtype=bool)
    first, last = (pd.Timestamp(t) for t in span)
    first = first.tz_localize("UTC") if first.tzinfo is None else first
    last = last.tz_localize("UTC") if last.tzinfo is None else last
    start = pd.to_datetime(r["period_start"], utc=True)
    end = pd.to_datetime(r["period_end"], utc=True)
    return ((start < first) | (end > last + pd.Timedelta(seconds=1))).to_numpy(bool)


def plot_series(rows: pd.DataFrame, *, trend: Any = None, changes: Any = None,
                policy_date: Any = None, title: str | None = None,
                span: Any = None, first_use: Any = None, first_use_what: str = "",
                ax: Axes | None = None) -> Axes:
    """One metric of one subsystem: values with interval bars per period.

    Parameters
    ----------
    rows : rows of the tidy metric table for one metric and subsystem.
    trend : optional :class:`~procmetrics.analyse.change.trend.TrendResult` (line + band).
    changes : optional :class:`~procmetrics.analyse.change.changepoints.ChangePointResult`
        (vertical line at each change, shaded position interval, segment levels).
    policy_date : optional date drawn as a dashed black line.
    span : optional (first, last) commit dates: periods the history covers only in part
        are drawn with open markers and say so in the legend.
    first_use : optional date the trailer behind the metric was first used; the time
        before it is shaded (values there say nothing about the process).

    Shares are drawn in percent (see :mod:`procmetrics.plot.style`); the y axis is
    fitted to the interval bars so none is clipped.
    """
    ax = ax if ax is not None else Figure(figsize=(7.0, 4.2)).subplots()
    r = rows.sort_values("period_start")
    r = r[r["value"].notna()]
    if r.empty:
        ax.set_title(title or "no data")
        return ax
    metric, sub = str(r["metric"].iloc[0]), str(r["subsystem"].iloc[0])
    k = st.scale(metric)
    x = _naive(_mid(r))
    y = r["value"].to_numpy(float) * k
    lo, hi = r["ci_low"].to_numpy(float) * k, r["ci_high"].to_numpy(float) * k
    has_ci = np.isfinite(lo).any()
    n_total = int(r["n"].sum())
    part = _partial(r, span)
    full = ~part
    for mask, face, label in ((full, "black", f"per period (n = {n_total:,}, {len(r)} periods)"),
                              (part, "white", "partial period (history starts or ends "
                                              "inside it)")):
        if not mask.any():
            continue
        yerr = np.vstack([y[mask] - lo[mask], hi[mask] - y[mask]]) if has_ci else None
        ax.errorbar(np.asarray(x)[mask], y[mask], yerr=yerr, fmt="o", ms=3.5, lw=0.8,
                    color="black", mfc=face, capsize=0, label=label, zorder=3)
    lows, highs = [lo, y], [hi, y]
    if trend is not None:
        f = trend.fitted
        fx = _naive(_mid(f))
        ax.plot(fx, f["fitted"] * k, color=st.TREND,
                label=f"trend: {trend.model.split(';')[0]}")
        ax.fill_between(fx, f["fit_low"] * k, f["fit_high"] * k, color=st.TREND,
                        alpha=0.15, lw=0, label="trend band")
        lows.append(f["fit_low"].to_numpy(float) * k)
        highs.append(f["fit_high"].to_numpy(float) * k)
    if changes is not None:
        for seg in changes.segments.itertuples():
            if seg.period_start is not None and seg.period_end is not None:
                ax.hlines(seg.level * k, _naive(seg.period_start), _naive(seg.period_end),
                          colors=st.CHANGE, lw=1.4, alpha=0.8)
        for i, c in enumerate(changes.changes):
            if c.date is None:
                continue
            ax.axvline(_naive(c.date), color=st.CHANGE, lw=1.0, ls="-.",
                       label="change point, segment levels and position interval"
                       if i == 0 else None)
            if c.date_low is not None and c.date_high is not None:
                ax.axvspan(_naive(c.date_low), _naive(c.date_high), color=st.CHANGE,
                           alpha=0.12, lw=0)
    if first_use is not None:
        fu = _naive(pd.Timestamp(first_use))
        left = min(_naive(r["period_start"]).min(), fu)
        if fu > left:
            ax.axvspan(left, fu, color=st.BEFORE_USE, alpha=0.6, lw=0, zorder=0,
                       label=f"before the first {first_use_what or 'trailer'} "
                             f"({pd.Timestamp(first_use):%Y-%m-%d}): not comparable")
    if policy_date is not None:
        ax.axvline(_naive(pd.Timestamp(policy_date)), color="black", ls="--", lw=1.0,
                   label=f"policy date {pd.Timestamp(policy_date):%Y-%m-%d}")
    pct = k == 100.0
    st.fit_axis_to_intervals(ax, np.concatenate([np.ravel(v) for v in lows]),
                             np.concatenate([np.ravel(v) for v in highs]),
                             floor=-2.0 if pct else None, ceiling=102.0 if pct else None)
    method = str(r["ci_method"].iloc[0])
    level = getattr(getattr(trend, "slope", None), "level", 0.95)
    label = st.quantity(metric)[0]
    ax.set_title((title or f"{label}: {sub}")
                 + f"\nn = {n_total:,}; bars: {level:.0%} {method} interval", fontsize="medium")
    ax.set_xlabel("period (midpoint, UTC)", fontsize="small")
    ax.set_ylabel(st.axis_label(metric), fontsize="small")
    st.legend_below(ax)
    return ax


def plot_its(result: Any, *, ax: Axes | None = None) -> Axes:
    """Interrupted time series: observed, fitted segments, counterfactual, the date.

    ``result`` is an :class:`~procmetrics.analyse.change.its.ITSResult`. The
    counterfactual (pre-date trend continued) is dashed: it is an extrapolation.
    """
    ax = ax if ax is not None else Figure(figsize=(7.0, 4.2)).subplots()
    f = result.fitted
    k = st.scale(result.metric)
    x = _naive(f["period_start"])
    ax.plot(x, f["observed"] * k, "o", ms=3.5, color="black",
            label=f"observed ({result.n_before} + {result.n_after} periods, "
                  f"n = {result.n:,})")
    for post, part in f.groupby("post"):
        px = _naive(part["period_start"])
        ax.plot(px, part["fitted"] * k, color=st.TREND,
                label=None if post else "segmented fit and band")
        ax.fill_between(px, part["fit_low"] * k, part["fit_high"] * k, color=st.TREND,
                        alpha=0.15, lw=0)
    post = f[f["post"]]
    if len(post):
        ax.plot(_naive(post["period_start"]), post["counterfactual"] * k, ls=(0, (4, 2)),
                color=st.EXTRAPOLATION, label="pre-date trend continued (extrapolated)")
    ax.axvline(_naive(result.at), color="black", ls="--", lw=1.0,
               label=f"policy date {result.at:%Y-%m-%d}")
    lv = result.level_change
    label = st.quantity(result.metric)[0]
    ax.set_title(f"{label}: {result.subsystem}; level change at the date {lv.value:+.2f} "
                 f"[{lv.low:+.2f}, {lv.high:+.2f}] {lv.unit}", fontsize="medium")
    ax.set_xlabel(f"period start (UTC); {result.model.split(';')[0]}; {result.cov_type} "
                  f"errors; {lv.level:.0%} band", fontsize="small")
    ax.set_ylabel(st.axis_label(result.metric), fontsize="small")
    st.legend_below(ax)
    return ax


def plot_series_facets(panels: list[tuple[str, pd.DataFrame, Any]], *,
                       policy_date: Any = None, span: Any = None, first_use: Any = None,
                       first_use_what: str = "", ncol: int = 3,
                       level: float = 0.95) -> Figure:
    """Small multiples: one panel per subsystem, one shared y axis.

    ``panels`` holds (label, rows, trend or None) per subsystem, rows of one metric.
    Reading across panels compares levels directly, where separate figures would
    each fit their own axis.
    """
    panels = [p for p in panels if p[1]["value"].notna().any()]
    ncol = max(1, min(ncol, len(panels)))
    nrow = max(1, int(np.ceil(len(panels) / ncol)))
    fig = Figure(figsize=(3.2 * ncol + 0.6, 2.5 * nrow + 0.9))
    axes = np.atleast_1d(fig.subplots(nrow, ncol, squeeze=False, sharex=True,
                                      sharey=True)).ravel()
    metric = str(panels[0][1]["metric"].iloc[0]) if panels else ""
    legend: dict[str, Any] = {}
    for ax, (label, rows, trend) in zip(axes, panels):
        plot_series(rows, trend=trend, policy_date=policy_date, span=span,
                    first_use=first_use, first_use_what=first_use_what, ax=ax)
        n = int(rows["n"].sum())
        ax.set_title(f"{label} (n = {n:,})", fontsize="small")
        ax.set_xlabel("")
        ax.set_ylabel("")
        ax.tick_params(labelsize="x-small", labelbottom=True)
        handles, labels = ax.get_legend_handles_labels()
        for h, lab in zip(handles, labels):
            lab = ("per period (n in each panel's title)" if lab.startswith("per period")
                   else "fitted trend (per subsystem)" if lab.startswith("trend:") else lab)
            legend.setdefault(lab, h)
        if ax.get_legend() is not None:
            ax.get_legend().remove()
    for ax in axes[len(panels):]:
        ax.set_visible(False)
    if panels:
        k = st.scale(metric)
        lows = np.concatenate([p[1]["ci_low"].to_numpy(float) * k for p in panels])
        highs = np.concatenate([p[1]["ci_high"].to_numpy(float) * k for p in panels])
        st.fit_axis_to_intervals(axes[0], lows, highs, floor=-2.0 if k == 100 else None,
                                 ceiling=102.0 if k == 100 else None)
        fig.supylabel(st.axis_label(metric), fontsize="small")
        fig.supxlabel("period (midpoint, UTC)", fontsize="small", y=0.075)
        fig.suptitle(f"{st.quantity(metric)[0]} by subsystem (shared axis); bars: {level:.0%} "
                     f"{panels[0][1]['ci_method'].iloc[0]} interval", fontsize="medium")
        fig.tight_layout(rect=(0, 0.1, 1, 1))
        fig.legend(list(legend.values()), list(legend), loc="lower center", ncol=3,
                   fontsize="x-small",
                   frameon=False, bbox_to_anchor=(0.5, -0.03))
    return fig
