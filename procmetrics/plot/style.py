"""One look for every figure: palette, labels with units, legends outside the data.

Unit conventions (the same in every figure, table and caption of the report):
shares are drawn in **percent of commits** (0–100 %); counts are counts;
lifetimes are in days. Colours are the Okabe–Ito palette, which stays
distinguishable under the common colour-vision deficiencies; lines that must
be told apart also differ in dash or marker, so nothing depends on colour alone.

References
----------
Okabe, M. & Ito, K. (2008). Color Universal Design: how to make figures and
presentations that are friendly to colorblind people (the eight-colour palette).
"""
from __future__ import annotations

from typing import Any

#: Okabe–Ito palette (Okabe & Ito 2008)
OKABE_ITO = {"black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9",
             "green": "#009E73", "yellow": "#F0E442", "blue": "#0072B2",
             "vermillion": "#D55E00", "purple": "#CC79A7"}
#: colour, line style and marker per compared group, in order (before, after, ...)
GROUP_STYLES = ((OKABE_ITO["blue"], "-", "o"), (OKABE_ITO["vermillion"], "--", "s"),
                (OKABE_ITO["green"], "-.", "^"), (OKABE_ITO["purple"], ":", "D"))
TREND = OKABE_ITO["blue"]
CHANGE = OKABE_ITO["vermillion"]
EXTRAPOLATION = "#6b6b6b"
BEFORE_USE = "#d9d9d9"

#: metric -> (label for axes and legends, unit in the label, drawn as percent)
QUANTITIES: dict[str, tuple[str, str, bool]] = {
    "review_coverage": ("Review coverage", "% of commits", True),
    "independent_review": ("Independent review", "% of commits", True),
    "unreviewed_self_commits": ("Unreviewed self-committed", "% of commits", True),
    "fix_ratio": ("Fix ratio", "% of commits", True),
    "fix_ratio_heuristic": ("Fix ratio (subject keywords)", "% of commits", True),
    "revert_ratio": ("Revert ratio", "% of commits", True),
    "stable_request_share": ("Stable backport requests", "% of fixing commits", True),
    "fixes_tag_adoption": ("Fixes: trailer use", "% of commits", True),
    "commits": ("Commits", "commits per period", False),
    "active_authors": ("Active authors", "authors per period", False),
    "churn_lines": ("Lines changed", "lines per period", False),
    "churn_median": ("Median lines changed", "lines per commit", False),
}


def quantity(metric: str) -> tuple[str, str, bool]:
    """(label, unit, percent) for a metric; unknown names are made readable."""
    return QUANTITIES.get(metric, (metric.replace("_", " ").capitalize(), "", False))


def axis_label(metric: str) -> str:
    """``"Review coverage (% of commits with a review trailer)"``."""
    label, unit, _ = quantity(metric)
    return f"{label} ({unit})" if unit else label


def scale(metric: str) -> float:
    """Factor from the stored value to the drawn one (100 for shares, else 1)."""
    return 100.0 if quantity(metric)[2] else 1.0


def legend_below(ax: Any, *, ncol: int = 2) -> None:
    """Put the legend under the axes, outside the data."""
    handles, labels = ax.get_legend_handles_labels()
    if not handles:
        return
    ax.legend(handles, labels, loc="upper center", bbox_to_anchor=(0.5, -0.16), ncol=ncol,
              fontsize="x-small", frameon=False)


def fit_axis_to_intervals(ax: Any, lows: Any, highs: Any, *, floor: float | None = None,
                          ceiling: float | None = None) -> None:
    """Set the y limits so every interval bar is drawn whole (no silent clipping)."""
    import numpy as np

    lo = np.asarray(lows, dtype=float)
    hi = np.asarray(highs, dtype=float)
    vals = np.r_[lo[np.isfinite(lo)], hi[np.isfinite(hi)]]
    if not len(vals):
        return
    bottom, top = float(vals.min()), float(vals.max())
    pad = 0.05 * (top - bottom or 1.0)
    bottom, top = bottom - pad, top + pad
    if floor is not None:
        bottom = max(bottom, floor)
    if ceiling is not None:
        top = min(top, ceiling)
    ax.set_ylim(bottom, top)
