"""Survival curves of defect lifetimes: naive vs truncation-aware, per group.

Curves stop at their cut point (fewer than ``min_at_risk`` at risk); the cut
is marked with a short vertical tick.

Figures are built on :class:`matplotlib.figure.Figure` (no pyplot, no global
backend state); save them with ``ax.figure.savefig(path)``.
"""
from __future__ import annotations

from typing import Any

from matplotlib import rcParams
from matplotlib.figure import Figure
from matplotlib.axes import Axes

_STYLE = {"naive": ("tab:gray", "--", "naive KM/ECDF"),
          "truncation_aware": ("tab:blue", "-", "truncation-aware (Lynden-Bell)"),
          "horizon": ("tab:green", "-", "common horizon")}


def _step(ax: Axes, tab: Any, color: str, ls: str, label: str) -> None:
    shown = tab[tab["shown"]]
    if shown.empty:
        return
    ax.step(shown["time"], shown["survival"], where="post", color=color, ls=ls, label=label)
    ax.fill_between(shown["time"], shown["low"], shown["high"], step="post", color=color,
                    alpha=0.15, lw=0)
    hidden = tab[~tab["shown"]]
    if not hidden.empty:
        cut = float(hidden["time"].iloc[0])
        ax.axvline(cut, color=color, ls=":", lw=0.8)


def plot_survival(analysis: Any, *, group: str = "(all)", ax: Axes | None = None) -> Axes:
    """Naive and truncation-aware survival curves with bands for one group.

    ``analysis`` is a :class:`procmetrics.analyse.lifetime_analysis.LifetimeAnalysis`.
    """
    ax = ax if ax is not None else Figure(figsize=(6.4, 4.0)).subplots()
    cur = analysis.curves[analysis.curves["group"] == group]
    for method, (color, ls, label) in _STYLE.items():
        tab = cur[cur["method"] == method]
        if len(tab):
            n = int(analysis.groups.query("group == @group and method == @method")["n"].iloc[0])
            _step(ax, tab, color, ls, f"{label} (n={n})")
    ax.set_xlabel(f"lifetime ({analysis.unit}, {analysis.basis} basis)")
    ax.set_ylabel("share of defects not yet fixed")
    ax.set_ylim(0, 1.02)
    ax.set_title(f"Defect lifetimes: {group}")
    ax.legend(fontsize="small")
    return ax


def plot_survival_by_group(analysis: Any, *, method: str = "truncation_aware",
                           ax: Axes | None = None) -> Axes:
    """One curve per group (subsystem or period), each cut where < min_at_risk remain."""
    ax = ax if ax is not None else Figure(figsize=(6.4, 4.0)).subplots()
    cur = analysis.curves[(analysis.curves["method"] == method)
                          & (analysis.curves["group"] != "(all)")]
    colors = rcParams["axes.prop_cycle"].by_key()["color"]
    for i, (g, tab) in enumerate(cur.groupby("group", sort=True)):
        n = int(analysis.groups.query("group == @g and method == @method")["n"].iloc[0])
        _step(ax, tab, colors[i % len(colors)], "-", f"{g} (n={n})")
    ax.set_xlabel(f"lifetime ({analysis.unit}, {analysis.basis} basis)")
    ax.set_ylabel("share of defects not yet fixed")
    ax.set_ylim(0, 1.02)
    ax.set_title(f"Defect lifetimes by {analysis.by or 'group'} ({method.replace('_', ' ')})")
    ax.legend(fontsize="small")
    return ax
