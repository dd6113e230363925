"""Carry-over latency curves: share of upstream fixes not yet carried over into the tree.

Each curve is a Kaplan–Meier step with its pointwise band; a fix not yet carried
at the tree's tip is censored, and each time with censorings is marked with a
short vertical tick on the curve ("|", the common survival-plot mark).
"""
from __future__ import annotations

from typing import Mapping

import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from procmetrics.plot.style import GROUP_STYLES


def plot_carryover(curves: Mapping[str, pd.DataFrame], *, ax: Axes | None = None,
                   level: float = 0.95) -> Axes:
    """Draw ``{label: curve}`` where a curve has the columns of
    :data:`procmetrics.analyse.carryover.latency.CURVE_COLUMNS`."""
    ax = ax if ax is not None else Figure(figsize=(6.4, 4.0)).subplots()
    for i, (label, cur) in enumerate(curves.items()):
        color, ls, _ = GROUP_STYLES[i % len(GROUP_STYLES)]
        ax.step(cur["time_days"], cur["survival"], where="post", color=color, ls=ls,
                label=label)
        ax.fill_between(cur["time_days"], cur["low"], cur["high"], step="post", color=color,
                        alpha=0.15, lw=0)
        cens = cur[cur["n_censored"] > 0]
        if len(cens):
            ax.plot(cens["time_days"], cens["survival"], ls="none", marker="|", ms=8,
                    color=color)
    ax.plot([], [], ls="none", marker="|", ms=8, color="black",
            label="fixes not yet carried (censored at the tip)")
    ax.set_xlabel("days since the fix landed upstream (committer date)")
    ax.set_ylabel("share of upstream fixes not yet carried over")
    ax.set_ylim(0, 1.02)
    ax.set_xlim(left=0)
    ax.set_title("Carry-over latency (Kaplan–Meier)\nshaded: "
                 f"{level:.0%} pointwise bands (Greenwood, log(-log))", fontsize="medium")
    ax.legend(fontsize="small")
    return ax
