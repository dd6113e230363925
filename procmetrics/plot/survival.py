"""Survival curves of defect lifetimes: naive vs truncation-aware, per group.

Curves stop at their cut point (fewer than ``min_at_risk`` at risk): the last
shown step is drawn up to the cut, which is marked with a short vertical tick.
The headline horizon H (figures given lifetime <= H) is a dotted vertical line.
Per-group truncation-aware curves are each conditional on their own longest
observed lifetime, so the by-group figure says so and prefers the
common-horizon curves when they exist.

Figures are built on :class:`matplotlib.figure.Figure` (no pyplot, no global
backend state); save them with ``ax.figure.savefig(path)``.
"""
from __future__ import annotations

from typing import Any

import pandas as pd
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
    hidden = tab[~tab["shown"]]
    if not hidden.empty:
        # the last shown step holds until the cut: draw it that far, then mark the cut
        cut = float(hidden["time"].iloc[0])
        shown = pd.concat([shown, shown.iloc[[-1]].assign(time=cut)], ignore_index=True)
        ax.plot([cut, cut], [float(shown["survival"].iloc[-1]) - 0.04,
                             float(shown["survival"].iloc[-1]) + 0.04], color=color, lw=1.2)
    ax.step(shown["time"], shown["survival"], where="post", color=color, ls=ls, label=label)
    ax.fill_between(shown["time"], shown["low"], shown["high"], step="post", color=color,
                    alpha=0.15, lw=0)


def plot_survival(analysis: Any, *, group: str = "(all)", ax: Axes | None = None) -> Axes:
    """Naive and truncation-aware survival curves with bands for one group.

    ``analysis`` is a :class:`procmetrics.analyse.lifetimes.analysis.LifetimeAnalysis`.
    """
    ax = ax if ax is not None else Figure(figsize=(6.4, 4.0)).subplots()
    cur = analysis.curves[analysis.curves["group"] == group]
    for method, (color, ls, label) in _STYLE.items():
        tab = cur[cur["method"] == method]
        if len(tab):
            n = int(analysis.groups.query("group == @group and method == @method")["n"].iloc[0])
            _step(ax, tab, color, ls, f"{label} (n={n})")
    ch = getattr(analysis, "horizon_choice", None)
    if ch is not None and ch.horizon is not None:
        # the headline figures describe lifetimes up to H only
        ax.axvline(ch.horizon, color="tab:green", ls=":", lw=1,
                   label=f"headline horizon H = {ch.horizon:g} {analysis.unit}")
    ax.set_xlabel(f"lifetime ({analysis.unit}, {analysis.basis} basis)")
    ax.set_ylabel("share of defects not yet fixed")
    ax.set_ylim(0, 1.02)
    lv = analysis.summary["level"].dropna()
    ax.set_title(f"Defect lifetimes: {group}"
                 + (f"\nshaded: {lv.iloc[0]:.0%} pointwise bands (Greenwood log-log; "
                    "bootstrap for Lynden-Bell)" if len(lv) else ""), fontsize="medium")
    ax.legend(fontsize="small")
    return ax


def plot_survival_by_group(analysis: Any, *, method: str | None = None,
                           ax: Axes | None = None) -> Axes:
    """One curve per group (subsystem or period), each cut where < min_at_risk remain.

    ``method`` default: ``"horizon"`` when the analysis has a common horizon
    (comparable groups), else ``"truncation_aware"`` with a note that the
    curves are not directly comparable.
    """
    ax = ax if ax is not None else Figure(figsize=(6.4, 4.0)).subplots()
    if method is None:
        has_h = (analysis.curves["method"] == "horizon").any()
        method = "horizon" if has_h else "truncation_aware"
    cur = analysis.curves[(analysis.curves["method"] == method)
                          & (analysis.curves["group"] != "(all)")]
    colors = rcParams["axes.prop_cycle"].by_key()["color"]
    order = list(dict.fromkeys(analysis.groups["group"]))      # the analysis' own order
    for i, (g, tab) in enumerate(sorted(cur.groupby("group", sort=False),
                                        key=lambda kv: order.index(kv[0])
                                        if kv[0] in order else len(order))):
        n = int(analysis.groups.query("group == @g and method == @method")["n"].iloc[0])
        _step(ax, tab, colors[i % len(colors)], "-", f"{g} (n={n})")
    ax.set_xlabel(f"lifetime ({analysis.unit}, {analysis.basis} basis)")
    ax.set_ylabel("share of defects not yet fixed")
    ax.set_ylim(0, 1.02)
    what = (f"common horizon {analysis.horizon:g} {analysis.unit}" if method == "horizon"
            else method.replace("_", " "))
    ax.set_title(f"Defect lifetimes by {analysis.by or 'group'} ({what})")
    if method == "truncation_aware":
        ax.text(0.01, 0.01, "each curve is conditional on its group's longest observed "
                "lifetime;\ncompare groups at a common horizon (--horizon)",
                transform=ax.transAxes, fontsize="x-small", va="bottom", color="dimgray")
    ax.legend(fontsize="small")
    return ax
