"""Headline lifetime figures that the data identify: conditional on lifetime <= H.

A history of length ``tau`` can show a defect introduced at ``u`` only if it
was fixed by ``tau``. For the *cohort at horizon H* — defects introduced at
least ``H`` before the end of the history, in the link era — every lifetime up
to ``H`` was observable, so their lifetimes, given lifetime <= H, are a plain
(untruncated) sample. The headline figures are read from that cohort:

* ``P(lifetime <= t | lifetime <= H)`` for t = 30, 90, 365 days (those below
  H): the share of the cohort fixed within t, with a Wilson score interval;
* quantiles (25/50/75/90 %) of lifetime given lifetime <= H: sample quantiles
  with distribution-free order-statistic intervals.

Both intervals are analytic, so the displayed figures do not move with the
random seed. The cohort at H is exactly the reverse-time risk set of the
Lynden-Bell estimator at H, ``R(H) = #{L_i <= H <= W_i}``.

**The horizon rule.** ``H`` is the longest horizon on a fixed grid (90, 180
days, then whole years: :data:`HORIZON_GRID`) at which the cohort of *every*
group compared (groups with at least ``min_cohort`` defects; and of all of
them together) holds at least ``min_cohort`` defects,
also when the link era starts a year later (so that the link-era sensitivity
check of :mod:`procmetrics.analyse.lifetimes.sensitivity` has at least one
later start to compare with).

What these figures cannot mean: they say nothing about defects that live
longer than H, defects never found, or defects fixed without a link.

``HEADLINE_COLUMNS``: ``group``, ``figure`` (``probability`` | ``quantile``),
``t`` (days, probabilities), ``quantile`` (quantiles), ``horizon``, ``value``,
``low``, ``high``, ``level``, ``n`` (cohort size), ``at_risk`` (cohort size for
probabilities; ``#{L >= value}`` in the cohort for quantiles), ``supported``,
``support_limit``, ``range_low``, ``range_high``, ``method``.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.lifetimes.quantiles import empirical_quantiles
from procmetrics.analyse.result import to_plain

HORIZON_GRID: tuple[float, ...] = (90.0, 180.0) + tuple(365.0 * k for k in range(1, 21))
PROBABILITY_AT: tuple[float, ...] = (30.0, 90.0, 365.0)
HEADLINE_COLUMNS = ["group", "figure", "t", "quantile", "horizon", "value", "low", "high",
                    "level", "n", "at_risk", "supported", "support_limit", "range_low",
                    "range_high", "method"]
CANDIDATE_COLUMNS = ["horizon", "group", "cohort"]


@dataclass(frozen=True)
class HorizonChoice:
    """The headline horizon, the rule that chose it and the cohort sizes it rests on."""

    horizon: float | None
    rule: str
    sizes: dict[str, int]
    candidates: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=CANDIDATE_COLUMNS))

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def cohort(d: pd.DataFrame, horizon: float) -> pd.DataFrame:
    """Defects with ``lifetime <= H <= window`` (usable rows only)."""
    return d[(d["lifetime"] <= horizon) & (d["window"] >= horizon) & (d["lifetime"] >= 0)]


def choose_horizon(d: pd.DataFrame, by: str | None = None, *, min_cohort: int = 30,
                   grid: tuple[float, ...] = HORIZON_GRID, unit: str = "days",
                   start: pd.Timestamp | None = None,
                   later_days: float = 365.0) -> HorizonChoice:
    """The longest grid horizon at which every group's cohort has ``min_cohort`` defects.

    References
    ----------
    Kalbfleisch & Lawless (1989), JASA 84 (right-truncated data analysed
    within a common observation window).
    """
    if start is not None and len(d):
        d = d[d["intro_date"] >= start + pd.Timedelta(days=later_days)]
    groups = [("(all)", d)] + ([(str(k), g) for k, g in d.groupby(by, sort=True)] if by else [])
    arrays = [(name, g["lifetime"].to_numpy(float, na_value=np.nan),
               g["window"].to_numpy(float, na_value=np.nan))
              for name, g in groups]
    # len(cohort(g, h)) for every pair, counted on arrays (the same comparisons)
    rows = [{"horizon": h, "group": name, "cohort": int(((L <= h) & (W >= h) & (L >= 0)).sum())}
            for h in grid for name, L, W in arrays]
    cand = pd.DataFrame(rows, columns=CANDIDATE_COLUMNS)
    rule = (f"H = the longest of {', '.join(f'{h:g}' for h in grid[:4])}, ... {unit} (90, 180, "
            f"then whole years) at which the cohort of every group"
            + (f" by {by}" if by else "") + f" (defects introduced at least H before the end "
            f"and fixed within H) holds at least {min_cohort} defects"
            + (f", also with the link era starting {later_days:g} days later" if start
               is not None else ""))
    ok = cand.groupby("horizon")["cohort"].min()
    good = ok[ok >= min_cohort]
    if good.empty:
        return HorizonChoice(None, rule + f": no horizon qualifies (largest cohort "
                             f"{int(cand['cohort'].max()) if len(cand) else 0})", {}, cand)
    h = float(good.index.max())
    sizes = {r.group: int(r.cohort) for r in cand[cand["horizon"] == h].itertuples()}
    return HorizonChoice(h, rule, sizes, cand)


def wilson_interval(k: int, n: int, level: float) -> tuple[float, float]:
    """Wilson score interval (scipy's ``binomtest(...).proportion_ci('wilson')``)."""
    ci = stats.binomtest(int(k), int(n)).proportion_ci(confidence_level=level, method="wilson")
    return float(ci.low), float(ci.high)


def headline_figures(d: pd.DataFrame, horizon: float, *, group: str = "(all)",
                     probabilities_at: tuple[float, ...] = PROBABILITY_AT,
                     quantiles: tuple[float, ...] = (0.25, 0.5, 0.75, 0.9),
                     level: float = 0.95, min_at_risk: int = 10, min_cohort: int = 30,
                     unit: str = "days") -> pd.DataFrame:
    """Horizon-conditional probabilities and quantiles for one group (see module docstring).

    A probability is supported when ``t < H`` and the cohort holds at least
    ``min_cohort`` defects; a quantile when at least ``min_at_risk`` cohort
    lifetimes are at least as long.

    References
    ----------
    Wilson (1927), JASA 22 (score interval); Conover (1999), sec. 3.2
    (order-statistic interval for a quantile).
    """
    c = cohort(d, horizon)
    L = c["lifetime"].to_numpy(float)
    n = len(L)
    lo_r = float(L.min()) if n else None
    rows: list[dict[str, Any]] = []
    for t in probabilities_at:
        ok = t < horizon and n >= min_cohort
        k = int((L <= t).sum())
        p = k / n if n else None
        lo, hi = wilson_interval(k, n, level) if n else (None, None)
        rows.append({"group": group, "figure": "probability", "t": t, "quantile": np.nan,
                     "horizon": horizon, "value": p if ok else None,
                     "low": lo if ok else None, "high": hi if ok else None, "level": level,
                     "n": n, "at_risk": n, "supported": bool(ok), "support_limit": horizon,
                     "range_low": lo_r, "range_high": horizon,
                     "method": "share of the horizon cohort; Wilson score interval"})
    if n:
        for q in empirical_quantiles(L, quantiles=quantiles, level=level, unit=unit,
                                     min_at_risk=min_at_risk, support_limit=horizon):
            sup = q.supported and n >= min_cohort
            rows.append({"group": group, "figure": "quantile", "t": np.nan,
                         "quantile": q.quantile, "horizon": horizon,
                         "value": q.value if sup else None, "low": q.low if sup else None,
                         "high": q.high if sup else None, "level": level, "n": n,
                         "at_risk": q.at_risk, "supported": bool(sup),
                         "support_limit": q.support_limit, "range_low": lo_r,
                         "range_high": horizon, "method": "sample quantile of the horizon "
                         "cohort; order-statistic interval (Conover)"})
    return pd.DataFrame(rows, columns=HEADLINE_COLUMNS)


def figure_label(row: Any, unit: str = "days") -> str:
    """``P(L <= 365 | L <= 1460)`` or ``median | L <= 1460``."""
    if row.figure == "probability":
        return f"P(lifetime <= {row.t:g} | lifetime <= {row.horizon:g})"
    name = "median" if row.quantile == 0.5 else f"{row.quantile:.0%} quantile"
    return f"{name} | lifetime <= {row.horizon:g} {unit}"


def figure_text(row: Any, unit: str = "days") -> str:
    """The displayed value: probabilities to 2 decimals, quantiles in whole units."""
    if not row.supported:
        if row.figure == "probability" and row.t >= row.horizon:
            return "not defined (t >= H)"
        return (f"beyond what the data support (> {row.support_limit:,.0f} {unit}, "
                f"{int(row.at_risk) if pd.notna(row.at_risk) else 0} at risk)")
    if row.figure == "probability":
        return f"{row.value:.2f} [{row.low:.2f}, {row.high:.2f}] n={row.n}"
    lo = "-" if pd.isna(row.low) else f"{row.low:,.0f}"
    hi = "-" if pd.isna(row.high) else f"{row.high:,.0f}"
    return f"{row.value:,.0f} [{lo}, {hi}] {unit} n={row.n} at risk {int(row.at_risk)}"
