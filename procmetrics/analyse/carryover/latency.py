"""Carry-over latency as right-censored survival data.

For each upstream fix that concerns the tree and is due (status ``carried`` or
``missing`` in :func:`~procmetrics.analyse.carryover.missing.carryover_table`)
the duration is the time from its upstream committer date to its arrival in the
tree; a fix not yet carried is right-censored at the tree's tip (its gap). The
whole population is observed at the tip, so - unlike defect lifetimes, which are
right-truncated - the product-limit (Kaplan–Meier) estimator applies directly.
Fixes in the shared history (latency zero by construction) and excluded fixes
are left out.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.result import Caveat, Estimate, caveat, to_plain
from procmetrics.errors import InsufficientData

CURVE_COLUMNS = ["time_days", "n_at_risk", "n_events", "n_censored", "survival", "low", "high"]
KM = "Kaplan-Meier, Greenwood variance, log(-log) interval"


def km_curve(durations: np.ndarray, events: np.ndarray, *, level: float = 0.95) -> pd.DataFrame:
    """Kaplan–Meier survival with pointwise log(-log) Greenwood intervals.

    One row per distinct time (events or censorings) plus time 0
    (columns :data:`CURVE_COLUMNS`); ``survival`` is the share of fixes not yet
    carried over.

    References
    ----------
    Kaplan, E. L. & Meier, P. (1958). Nonparametric estimation from incomplete
    observations. JASA 53, 457-481. Kalbfleisch, J. D. & Prentice, R. L. (2002).
    The Statistical Analysis of Failure Time Data, 2nd ed., section 1.4 (log(-log) limits).
    """
    t = np.asarray(durations, dtype=float)
    e = np.asarray(events, dtype=bool)
    times, inv = np.unique(t, return_inverse=True)
    d = np.bincount(inv, weights=e, minlength=len(times)).astype(int)
    c = np.bincount(inv, weights=~e, minlength=len(times)).astype(int)
    n = len(t) - np.concatenate([[0], np.cumsum(d + c)[:-1]])
    z = stats.norm.ppf(0.5 + level / 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.cumprod(1.0 - d / n)
        gw = np.cumsum(np.where(d > 0, d / (n * (n - d)), 0.0))
        lv = np.log(s)
        lo = np.exp(-np.exp(np.log(-lv) - z * np.sqrt(gw) / lv))
        hi = np.exp(-np.exp(np.log(-lv) + z * np.sqrt(gw) / lv))
    flat = s >= 1.0
    lo, hi = np.where(flat, 1.0, lo), np.where(flat, 1.0, hi)
    dead = (s <= 0.0) | ~np.isfinite(gw)
    lo, hi = np.where(dead, s, lo), np.where(dead, s, hi)
    curve = pd.DataFrame({"time_days": times, "n_at_risk": n, "n_events": d, "n_censored": c,
                          "survival": s, "low": lo, "high": hi}, columns=CURVE_COLUMNS)
    if len(times) == 0 or times[0] > 0.0:
        start = pd.DataFrame([(0.0, len(t), 0, 0, 1.0, 1.0, 1.0)], columns=CURVE_COLUMNS)
        curve = pd.concat([start, curve], ignore_index=True)
    return curve


def _first_below(curve: pd.DataFrame, col: str, q: float) -> float:
    hit = curve.loc[curve[col] <= q, "time_days"]
    return float(hit.iloc[0]) if len(hit) else float("inf")


def _at(curve: pd.DataFrame, col: str, day: float) -> float:
    return float(curve.loc[curve["time_days"] <= day, col].iloc[-1])


def logrank_one_sided(d1: np.ndarray, e1: np.ndarray, d2: np.ndarray, e2: np.ndarray
                      ) -> tuple[float, float]:
    """Log-rank z for "group 2 is carried over faster than group 1" and its one-sided p.

    z = (O2 - E2) / sqrt(V2) over the pooled event times; z > 0 means group 2
    had more arrivals than expected under equal hazards.

    References
    ----------
    Mantel, N. (1966). Evaluation of survival data and two new rank order statistics
    arising in its consideration. Cancer Chemotherapy Reports 50, 163-170.
    """
    t = np.concatenate([d1, d2]).astype(float)
    e = np.concatenate([e1, e2]).astype(bool)
    g = np.concatenate([np.zeros(len(d1), bool), np.ones(len(d2), bool)])
    o_e, var = 0.0, 0.0
    for u in np.unique(t[e]):
        at = t >= u
        n, n2 = int(at.sum()), int((at & g).sum())
        d = int((e & (t == u)).sum())
        d2_ = int((e & (t == u) & g).sum())
        o_e += d2_ - d * n2 / n
        if n > 1:
            var += d * (n2 / n) * (1 - n2 / n) * (n - d) / (n - 1)
    if var <= 0:
        return float("nan"), float("nan")
    z = o_e / np.sqrt(var)
    return float(z), float(stats.norm.sf(z))


@dataclass(frozen=True)
class LatencyResult:
    """Carry-over latency of one population of upstream fixes."""

    n: int
    n_carried: int
    n_censored: int
    median: Estimate
    carried_within: tuple[Estimate, ...]
    curve: pd.DataFrame = field(repr=False)
    caveats: tuple[Caveat, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return to_plain({"n": self.n, "n_carried": self.n_carried,
                         "n_censored": self.n_censored, "median": self.median,
                         "carried_within": list(self.carried_within),
                         "caveats": list(self.caveats)})


def survival_data(table: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, int]:
    """(durations in days, carried?, number of negative latencies set to 0)."""
    pop = table[table["status"].isin(["carried", "missing"])]
    carried = (pop["status"] == "carried").to_numpy()
    dur = np.where(carried, pop["latency_days"].to_numpy(float), pop["gap_days"].to_numpy(float))
    n_neg = int(np.sum(dur < 0))
    return np.clip(dur, 0.0, None), carried, n_neg


def carryover_latency(table: pd.DataFrame, *, level: float = 0.95,
                      within_days: tuple[float, ...] = (30.0, 90.0, 365.0),
                      min_n: int = 5) -> LatencyResult:
    """Kaplan–Meier carry-over latency of the due upstream fixes concerning the tree.

    Parameters
    ----------
    table : :func:`~procmetrics.analyse.carryover.missing.carryover_table` output.
    level : confidence level of the intervals.
    within_days : horizons N for "share carried over within N days" (1 - S(N)).
    min_n : fewer fixes than this raise :class:`InsufficientData`.

    Returns
    -------
    LatencyResult
        The median latency with the Brookmeyer–Crowley-type interval read off the
        pointwise limits (infinite when the limit never reaches one half), and the
        share carried within each horizon with its interval.

    References
    ----------
    Brookmeyer, R. & Crowley, J. (1982). A confidence interval for the median
    survival time. Biometrics 38, 29-41.
    """
    dur, ev, n_neg = survival_data(table)
    if len(dur) < min_n:
        raise InsufficientData(f"{len(dur)} upstream fixes concern the tree; need {min_n}")
    curve = km_curve(dur, ev, level=level)
    med = Estimate("median carry-over latency", _first_below(curve, "survival", 0.5),
                   _first_below(curve, "low", 0.5), _first_below(curve, "high", 0.5),
                   level, KM, len(dur), "days")
    within = tuple(Estimate(f"share carried over within {d:g} days",
                            1 - _at(curve, "survival", d), 1 - _at(curve, "high", d),
                            1 - _at(curve, "low", d), level, KM, len(dur), "share",
                            extrapolated=d > float(dur.max()))
                   for d in within_days)
    cav = []
    if n_neg:
        cav.append(caveat("clock_skew", f"{n_neg} fix(es) arrived in the tree before their "
                          "upstream committer date (picked from an earlier posting, or "
                          "upstream rebased); their latency is counted as 0"))
    if not np.isfinite(med.value):
        cav.append(caveat("not_identifiable", "fewer than half of the fixes were carried "
                          "over by the tree's tip: the median is not reached"))
    return LatencyResult(len(dur), int(ev.sum()), int((~ev).sum()), med, within, curve,
                         tuple(cav))


@dataclass(frozen=True)
class PeriodComparison:
    """Carry-over latency of the fixes landed upstream before and on/after a date."""

    date: pd.Timestamp
    before: LatencyResult
    after: LatencyResult
    z: float
    p_faster_after: float       # one-sided log-rank p for "carried over faster after"
    method: str = "log-rank (Mantel 1966), one-sided: faster after the date"


def compare_periods(table: pd.DataFrame, date: pd.Timestamp, *, level: float = 0.95,
                    min_n: int = 5) -> PeriodComparison:
    """Latency before vs after ``date`` (by upstream committer date) and a one-sided
    log-rank test of "faster after". A p-value is evidence, not a verdict: a
    claim needs the interval rule of :mod:`procmetrics.claims.base`.

    References
    ----------
    Mantel (1966); see :func:`logrank_one_sided`.
    """
    after_mask = table["fix_date"] >= date
    before = carryover_latency(table[~after_mask], level=level, within_days=(), min_n=min_n)
    after = carryover_latency(table[after_mask], level=level, within_days=(), min_n=min_n)
    d1, e1, _ = survival_data(table[~after_mask])
    d2, e2, _ = survival_data(table[after_mask])
    z, p = logrank_one_sided(d1, e1, d2, e2)
    return PeriodComparison(date, before, after, z, p)
