"""Does a lifetime figure move with the start of the link era?

Each headline figure (and the secondary truncation-aware median) is
re-estimated with the link era starting later: at the chosen start and half a
year, 1, 1.5, 2 and 3 years after it (as long as the horizon cohort keeps
``min_cohort`` defects; the horizon rule guarantees this for one year). Later starts drop the early, sparsely linked years; a figure that
the data identify should not move beyond its own interval. A figure is
flagged ``link_era_sensitive`` when a supported re-estimate lies outside the
interval of the figure at the chosen start *and* the figure at the chosen
start lies outside the re-estimate's own interval (each rejects the other by
its own interval: a later start uses fewer defects, so its estimate alone is
noisier). Claims based on a flagged figure are undecidable. The unconditional
truncation-aware median is re-estimated with a 500-resample bootstrap interval
used for this check.

``SENSITIVITY_COLUMNS``: ``start`` (UTC), ``figure`` (label), ``value``,
``low``, ``high``, ``n``, ``at_risk``, ``supported``, ``chosen`` (the row of
the chosen start).
"""
from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from procmetrics.analyse.lifetimes.horizon import figure_label, headline_figures
from procmetrics.analyse.result import Caveat, caveat

SENSITIVITY_COLUMNS = ["start", "figure", "value", "low", "high", "n", "at_risk", "supported",
                       "chosen"]
LB_MEDIAN = "truncation-aware median (unconditional)"


def link_era_sensitivity(d: pd.DataFrame, start: pd.Timestamp, horizon: float | None, *,
                         years: tuple[float, ...] = (0, 0.5, 1, 1.5, 2, 3),
                         level: float = 0.95,
                         min_at_risk: int = 10, min_cohort: int = 30, unit: str = "days",
                         lb_median: Any = None, n_boot: int = 500,
                         rng: np.random.Generator | None = None
                         ) -> tuple[pd.DataFrame, list[Caveat]]:
    """Re-estimate the headline figures for later link-era starts; flag the movers.

    ``d``: usable defects (non-negative lifetimes) of one group. ``lb_median``:
    the truncation-aware median at the chosen start (a
    :class:`~procmetrics.analyse.lifetimes.quantiles.Quantile`), re-estimated
    (point only) at each start.

    References
    ----------
    Saltelli et al. (2008), Global Sensitivity Analysis, ch. 1 (one-at-a-time
    re-estimation under an analysis choice).
    """
    from procmetrics.analyse.lifetimes.estimators import quantile_estimates

    rows: list[dict[str, Any]] = []
    for k in years:
        s = start + pd.Timedelta(days=round(365 * k))
        g = d[d["intro_date"] >= s]
        if horizon is not None:
            h = headline_figures(g, horizon, level=level, min_at_risk=min_at_risk,
                                 min_cohort=min_cohort, unit=unit)
            if k and (h.empty or int(h["n"].iloc[0]) < min_cohort):
                break
            for r in h.itertuples():
                if r.figure == "probability" and r.t >= horizon:
                    continue
                rows.append({"start": s, "figure": figure_label(r, unit), "value": r.value,
                             "low": r.low, "high": r.high, "n": r.n, "at_risk": r.at_risk,
                             "supported": r.supported, "chosen": k == 0})
        if lb_median is not None and len(g) >= min_cohort:
            q = lb_median if not k else quantile_estimates(
                g["lifetime"].to_numpy(float), g["window"].to_numpy(float), quantiles=(0.5,),
                n_boot=n_boot, level=level, unit=unit, min_at_risk=min_at_risk,
                rng=None)[0]
            rows.append({"start": s, "figure": LB_MEDIAN, "value": q.value,
                         "low": q.low, "high": q.high, "n": q.n,
                         "at_risk": q.at_risk, "supported": q.supported, "chosen": k == 0})
    tab = pd.DataFrame(rows, columns=SENSITIVITY_COLUMNS)
    return tab, sensitivity_caveats(tab, unit)


def sensitivity_caveats(tab: pd.DataFrame, unit: str = "days") -> list[Caveat]:
    """``link_era_sensitive`` for each figure whose re-estimates leave its own interval."""
    out: list[Caveat] = []
    for fig, g in tab.groupby("figure", sort=False):
        base = g[g["chosen"]]
        later = g[~g["chosen"] & g["supported"].astype(bool)]
        if base.empty or later.empty:
            continue
        b = base.iloc[0]
        if not b["supported"] or pd.isna(b["value"]):
            continue
        lo = -np.inf if pd.isna(b["low"]) else float(b["low"])
        hi = np.inf if pd.isna(b["high"]) else float(b["high"])
        v = later["value"].astype(float)
        lo_k = later["low"].astype(float).fillna(-np.inf)
        hi_k = later["high"].astype(float).fillna(np.inf)
        b_v = float(b["value"])
        out_ = later[((v < lo) | (v > hi)) & ((b_v < lo_k) | (b_v > hi_k))]
        if len(out_):
            fmt = (lambda x: f"{x:.2f}") if fig.startswith("P(") else (lambda x: f"{x:,.0f}")
            moves = ", ".join(f"{fmt(r.value)} from {r.start:%Y-%m}" for r in out_.itertuples())
            out.append(caveat("link_era_sensitive", f"{fig} = {fmt(b['value'])} with the link "
                              f"era from {b['start']:%Y-%m-%d} moves outside its interval "
                              f"[{fmt(lo)}, {fmt(hi)}] when the era starts later ({moves}), "
                              "and the later estimate's own interval excludes it: either "
                              "linking was still settling, or lifetimes changed over the "
                              "history; quote the figure only with its start date"))
    return out


def sensitive_figures(caveats: tuple[Caveat, ...] | list[Caveat]) -> list[str]:
    """Labels of the figures flagged ``link_era_sensitive`` (text before ' = ')."""
    return [c.message.split(" = ")[0] for c in caveats if c.code == "link_era_sensitive"]
