"""Reliability-growth figures: observed cumulative fixes with fitted curves, u-plot.

Figures are built on :class:`matplotlib.figure.Figure` (no pyplot, no global
backend state); save them with ``ax.figure.savefig(path)``.
"""
from __future__ import annotations

from typing import Any

from matplotlib.figure import Figure
import numpy as np
from matplotlib.axes import Axes

from procmetrics.plot import style as st

#: model and test names as a reader knows them
NAMES = {"goel_okumoto": "Goel–Okumoto", "power_law": "power law (Crow–AMSAA)",
         "laplace": "Laplace test", "mil_hdbk_189": "MIL-HDBK-189 test"}


def _name(key: str) -> str:
    return NAMES.get(key, key.replace("_", " "))


def plot_growth(result: Any, *, ax: Axes | None = None) -> Axes:
    """Observed cumulative fixes (steps) and each fitted model with its band.

    The part of a fitted curve beyond the end of the history is dashed
    (extrapolation). Refused models are named in the title.
    ``result`` is a :class:`procmetrics.analyse.growth.analysis.GrowthResult`.
    """
    ax = ax if ax is not None else Figure(figsize=(6.4, 4.0)).subplots()
    c = result.curve
    obs = c[c["model"] == "observed"]
    ax.step(obs["time"], obs["observed"], where="post", color="black",
            label=f"observed fixing commits (n = {result.n:,})")
    for i, (name, tab) in enumerate(c[c["model"] != "observed"].groupby("model", sort=True)):
        inside, beyond = tab[~tab["extrapolated"]], tab[tab["extrapolated"]]
        colour, dash, _ = st.GROUP_STYLES[i % len(st.GROUP_STYLES)]
        line = ax.plot(inside["time"], inside["fitted"], color=colour, ls=dash,
                       label=_name(name))[0]
        if len(beyond):
            ax.plot(np.r_[inside["time"].iloc[-1:], beyond["time"]],
                    np.r_[inside["fitted"].iloc[-1:], beyond["fitted"]],
                    color=line.get_color(), ls="--")
        ax.fill_between(tab["time"], tab["low"], tab["high"], color=line.get_color(),
                        alpha=0.15, lw=0)
    end = (result.end_date - result.origin).total_seconds() / 86400
    ax.axvline(end, color="gray", ls=":", lw=0.8, label="end of the history")
    refused = [_name(m.model) for m in result.models if not m.fitted]
    levels = [e.level for m in result.models if m.fit is not None for e in m.fit.params]
    how = (f"NHPP maximum likelihood\nshaded: {levels[0]:.0%} parametric-bootstrap band "
           "of the mean value" if levels else "no model fitted")
    ax.set_title(f"Cumulative fixing commits (n = {result.n:,}; {how})"
                 + (f"\nrefused: {', '.join(refused)}" if refused else ""), fontsize="medium")
    if result.trend is not None:
        lines = [f"{_name(t.name)}: {t.direction} (one-sided p for growth {t.p_growth:.2g})"
                 for t in (result.trend.laplace, result.trend.power_law)]
        ax.text(0.02, 0.86, "trend tests\n" + "\n".join(lines), transform=ax.transAxes,
                ha="left", va="top", fontsize="x-small", color="dimgray")
    ax.set_xlabel(f"time (days since {result.origin:%Y-%m-%d})", fontsize="small")
    ax.set_ylabel("fixing commits so far (count)", fontsize="small")
    st.legend_below(ax)
    return ax


def plot_u_plot(result: Any, *, ax: Axes | None = None) -> Axes:
    """Littlewood's u-plot: ECDF of prequential u-values against the diagonal."""
    ax = ax if ax is not None else Figure(figsize=(4.0, 4.0)).subplots()
    ax.plot([0, 1], [0, 1], color="gray", lw=0.8)
    for m in result.models:
        if not m.fitted or not m.u_values:
            continue
        u = np.sort(np.asarray(m.u_values))
        y = np.arange(1, len(u) + 1) / len(u)
        ax.step(np.r_[0, u, 1], np.r_[0, y, 1], where="post",
                label=f"{m.model.replace('_', '-')} (n={len(u)})")
    ax.set_xlabel("u")
    ax.set_ylabel("empirical distribution of u")
    ax.set_title("u-plot (prequential one-step predictions)")
    ax.legend(fontsize="small")
    return ax
