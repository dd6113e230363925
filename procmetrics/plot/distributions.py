"""Distributions: ECDFs overlaid by period (faceted by subsystem) and histograms.

Every legend entry states its n; histograms state the bin width in the axis
label; titles name the quantity and what is shown.
"""
from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from procmetrics.plot import style as st


def _ecdf(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    x = np.sort(values[np.isfinite(values)])
    y = np.arange(1, len(x) + 1) / max(len(x), 1)
    return x, y


def dkw_epsilon(n: int, level: float = 0.95) -> float:
    """Half-width of the Dvoretzky–Kiefer–Wolfowitz band: sqrt(ln(2/alpha) / (2n)).

    The band ECDF ± epsilon holds the whole true distribution function with
    probability at least ``level`` (Massart 1990 tight constant).
    """
    if n <= 0:
        return float("nan")
    return float(np.sqrt(np.log(2.0 / (1.0 - level)) / (2.0 * n)))


def plot_ecdf(samples: Mapping[str, Sequence[float]], *, quantity: str = "value",
              log_x: bool = False, title: str | None = None, level: float | None = 0.95,
              ax: Axes | None = None) -> Axes:
    """Overlay the empirical distribution functions of several samples.

    ``samples`` maps a label (e.g. "before", "after", or a period) to values;
    the legend gives each sample's n. With ``level`` each curve carries its
    simultaneous DKW confidence band (Dvoretzky, Kiefer & Wolfowitz 1956;
    Massart 1990); ``level=None`` draws the bare curves. Each sample has its own
    colour and dash (Okabe–Ito), so the curves are told apart without colour.
    """
    ax = ax if ax is not None else Figure(figsize=(6.0, 4.2)).subplots()
    total = 0
    for i, (label, vals) in enumerate(samples.items()):
        colour, dash, _ = st.GROUP_STYLES[i % len(st.GROUP_STYLES)]
        v = np.asarray(vals, dtype=float)
        x, y = _ecdf(v)
        total += len(x)
        if not len(x):
            continue
        xs, ys = np.r_[x[0], x], np.r_[0.0, y]
        ax.step(xs, 100 * ys, where="post", color=colour, ls=dash,
                label=f"{label} (n = {len(x):,})")
        if level is not None:
            eps = dkw_epsilon(len(x), level)
            ax.fill_between(xs, 100 * np.clip(ys - eps, 0, 1), 100 * np.clip(ys + eps, 0, 1),
                            step="post", color=colour, alpha=0.15, lw=0)
    if log_x:
        ax.set_xscale("symlog", linthresh=1.0)
    ax.set_xlabel(quantity + (", symmetric log scale" if log_x else ""), fontsize="small")
    ax.set_ylabel("% of commits with at most x", fontsize="small")
    ax.set_ylim(0, 101)
    band = (f"shaded: {level:.0%} DKW confidence band" if level is not None
            else "no interval: raw data")
    ax.set_title(title or f"{quantity}: empirical distribution functions\n(n = {total:,}; "
                 f"{band})", fontsize="medium")
    st.legend_below(ax)
    return ax


def plot_count_shares(table: pd.DataFrame, *, quantity: str = "value", level: float = 0.95,
                      ax: Axes | None = None) -> Axes:
    """Grouped bars: the share of observations with each small count, with interval bars.

    ``table`` has columns ``group``, ``value`` (category label, in order), ``n``,
    ``share``, ``ci_low``, ``ci_high`` (shares 0–1; drawn in percent).
    """
    ax = ax if ax is not None else Figure(figsize=(6.0, 4.2)).subplots()
    cats = list(dict.fromkeys(table["value"]))
    groups = list(dict.fromkeys(table["group"]))
    width = 0.8 / max(len(groups), 1)
    pos = {c: i for i, c in enumerate(cats)}
    hatches = ("", "//", "..", "xx")
    for j, g in enumerate(groups):
        part = table[table["group"] == g]
        colour = st.GROUP_STYLES[j % len(st.GROUP_STYLES)][0]
        xs = np.array([pos[c] for c in part["value"]]) + (j - (len(groups) - 1) / 2) * width
        y = 100 * part["share"].to_numpy(float)
        err = np.vstack([y - 100 * part["ci_low"].to_numpy(float),
                         100 * part["ci_high"].to_numpy(float) - y])
        n = int(part["n"].iloc[0]) if len(part) else 0
        ax.bar(xs, y, width=width, color=colour, alpha=0.85, hatch=hatches[j % 4],
               edgecolor="white", label=f"{g} (n = {n:,})")
        ax.errorbar(xs, y, yerr=err, fmt="none", ecolor="black", lw=0.9, capsize=2)
    ax.set_xticks(range(len(cats)))
    ax.set_xticklabels(cats)
    ax.set_xlabel(quantity, fontsize="small")
    ax.set_ylabel("% of commits", fontsize="small")
    top = float(np.nanmax(100 * table["ci_high"].to_numpy(float))) if len(table) else 100
    ax.set_ylim(0, min(100, top * 1.08) if top > 0 else 1)
    ax.set_title(f"{quantity}: share of commits per count, bars: {level:.0%} Wilson interval",
                 fontsize="medium")
    st.legend_below(ax)
    return ax


def plot_ecdf_facets(frame: pd.DataFrame, *, value: str, group: str, facet: str,
                     quantity: str | None = None, max_facets: int = 12,
                     log_x: bool = False) -> Figure:
    """One ECDF panel per ``facet`` value (e.g. subsystem), ``group`` overlaid (e.g. period).

    Returns the Figure (several Axes). Facets beyond ``max_facets`` (by size) are
    left out and the number left out is stated in the title.
    """
    sizes = frame.groupby(facet)[value].count().sort_values(ascending=False)
    keep = list(sizes.index[:max_facets])
    ncol = min(3, max(1, len(keep)))
    nrow = int(np.ceil(len(keep) / ncol)) or 1
    fig = Figure(figsize=(4.0 * ncol, 3.0 * nrow))
    axes = np.atleast_1d(fig.subplots(nrow, ncol, squeeze=False)).ravel()
    for ax, key in zip(axes, keep):
        part = frame[frame[facet] == key]
        samples = {str(g): part.loc[part[group] == g, value].to_numpy(float)
                   for g in sorted(part[group].dropna().unique(), key=str)}
        plot_ecdf(samples, quantity=quantity or value, log_x=log_x, ax=ax,
                  title=f"{key} (n = {int(part[value].notna().sum()):,})")
    for ax in axes[len(keep):]:
        ax.set_visible(False)
    left = len(sizes) - len(keep)
    fig.suptitle(f"{quantity or value}: ECDF by {group}, one panel per {facet} "
                 f"(n={int(frame[value].notna().sum())})"
                 + (f"; {left} smaller {facet}s not shown" if left else ""))
    fig.tight_layout()
    return fig


def plot_histogram(values: Sequence[float], *, bin_width: float, quantity: str = "value",
                   sqrt_counts: bool = False, label: str | None = None,
                   ax: Axes | None = None) -> Axes:
    """Histogram with a stated bin width; optional square-root count axis.

    The square-root scale (a rootogram-like view) keeps small counts visible
    next to large ones; the axis label says so.
    """
    if not bin_width > 0:
        raise ValueError("bin_width must be > 0")
    ax = ax if ax is not None else Figure(figsize=(5.5, 3.8)).subplots()
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    n = len(v)
    if n:
        start = np.floor(v.min() / bin_width) * bin_width
        edges = np.arange(start, v.max() + bin_width, bin_width)
        if len(edges) < 2:
            edges = np.array([start, start + bin_width])
        counts, edges = np.histogram(v, bins=edges)
        heights = np.sqrt(counts) if sqrt_counts else counts
        ax.bar(edges[:-1], heights, width=bin_width, align="edge", color="tab:blue",
               edgecolor="white", lw=0.5, label=f"{label or quantity} (n={n})")
        if sqrt_counts:
            ticks = ax.get_yticks()
            ax.set_yticks(ticks)
            ax.set_yticklabels([f"{t * t:g}" for t in ticks])
    ax.set_xlabel(f"{quantity} (bin width {bin_width:g})")
    ax.set_ylabel("count (square-root scale)" if sqrt_counts else "count")
    ax.set_title(f"{label or quantity}: histogram, bin width {bin_width:g} (n={n})",
                 fontsize="medium")
    if n:
        ax.legend(fontsize="x-small")
    return ax
