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


def _ecdf(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    x = np.sort(values[np.isfinite(values)])
    y = np.arange(1, len(x) + 1) / max(len(x), 1)
    return x, y


def plot_ecdf(samples: Mapping[str, Sequence[float]], *, quantity: str = "value",
              log_x: bool = False, title: str | None = None, ax: Axes | None = None) -> Axes:
    """Overlay the empirical distribution functions of several samples.

    ``samples`` maps a label (e.g. "before", "after", or a period) to values;
    the legend gives each sample's n.
    """
    ax = ax if ax is not None else Figure(figsize=(5.5, 3.8)).subplots()
    total = 0
    for label, vals in samples.items():
        v = np.asarray(vals, dtype=float)
        x, y = _ecdf(v)
        total += len(x)
        if len(x):
            ax.step(np.r_[x[0], x], np.r_[0.0, y], where="post", label=f"{label} (n={len(x)})")
    if log_x:
        ax.set_xscale("symlog", linthresh=1.0)
    ax.set_xlabel(quantity)
    ax.set_ylabel("share of values <= x (ECDF)")
    ax.set_ylim(0, 1.02)
    ax.set_title(title or f"{quantity}: empirical distribution functions (n={total}; "
                 "no interval: raw data)", fontsize="medium")
    ax.legend(fontsize="x-small", loc="lower right")
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
                  title=f"{key} (n={int(part[value].notna().sum())})")
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
