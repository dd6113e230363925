"""Restricted mean lifetime (RMST) up to a horizon, and the difference between two groups.

The restricted mean survival time up to ``tau`` is the area under the survival
curve, ``RMST(tau) = int_0^tau S(t) dt``: the mean of ``min(T, tau)``. Unlike a
hazard ratio it needs no proportional-hazards assumption and it has a sign:
a difference "before minus after" above 0 means defects introduced after the
date live shorter, on average, up to ``tau``.

``S`` is the Kaplan-Meier estimate; the variance of the estimate is the
standard one obtained from Greenwood's formula (Klein & Moeschberger 2003,
sec. 4.5):

    Var(RMST) = sum_j A_j^2 d_j / (n_j (n_j - d_j)),   A_j = int_{t_j}^tau S(u) du,

summed over event times ``t_j <= tau`` with ``d_j`` events among ``n_j`` at
risk (a term with ``n_j = d_j`` has ``A_j = 0`` when ``S`` reaches 0 there and
is left out). Without censoring this is the plug-in variance of
``min(T, tau)`` over ``n``. Two independent groups give the difference with
variance the sum of the two, and a normal interval.

References
----------
Klein, J. P. & Moeschberger, M. L. (2003). Survival Analysis, 2nd ed.,
Springer, sec. 4.5 (mean and restricted mean survival time, variance).
Royston, P. & Parmar, M. K. B. (2013). Restricted mean survival time: an
alternative to the hazard ratio for the design and analysis of randomized
trials with a time-to-event outcome. BMC Med. Res. Methodol. 13:152.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from procmetrics.analyse.result import Estimate, to_plain
from procmetrics.errors import InsufficientData


@dataclass(frozen=True)
class RMST:
    """Restricted mean lifetime of one group up to ``horizon``."""

    value: float
    variance: float
    horizon: float
    n: int
    n_events: int

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def restricted_mean(durations: Any, observed: Any = None, *, horizon: float) -> RMST:
    """Kaplan-Meier restricted mean up to ``horizon`` with its Greenwood-type variance.

    Parameters
    ----------
    durations : non-negative times.
    observed : event indicators (default: every time is an event).
    horizon : the upper limit ``tau`` of the integral (> 0).

    Raises
    ------
    InsufficientData
        No durations.

    References
    ----------
    Klein & Moeschberger (2003), sec. 4.5.
    """
    t = np.asarray(durations, float)
    e = np.ones(len(t), bool) if observed is None else np.asarray(observed, bool)
    if len(t) == 0:
        raise InsufficientData("no lifetimes for a restricted mean")
    if not horizon > 0:
        raise ValueError("horizon must be positive")
    if np.any(t < 0) or np.any(~np.isfinite(t)):
        raise ValueError("durations must be finite and non-negative")
    order = np.argsort(t, kind="stable")
    t, e = t[order], e[order]
    times, first = np.unique(t, return_index=True)
    n_at = len(t) - first                                   # at risk just before each time
    d = np.add.reduceat(e.astype(float), first)             # events at each time
    keep = (d > 0) & (times <= horizon)
    tj, nj, dj = times[keep], n_at[keep].astype(float), d[keep]
    s = np.cumprod(1.0 - dj / nj)                           # S just after each event time
    # S is 1 on [0, t_1), s[k] on [t_{k+1-1}, t_{k+1}) ..., up to the horizon
    edges = np.concatenate([[0.0], tj, [horizon]])
    level = np.concatenate([[1.0], s])
    areas = level * np.diff(edges)                          # area of each step
    value = float(areas.sum())
    # A_j = area from t_j to the horizon = sum of the steps after t_j
    a = np.cumsum(areas[::-1])[::-1][1:]
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(nj > dj, a ** 2 * dj / (nj * (nj - dj)), 0.0)
    return RMST(value, float(terms.sum()), float(horizon), int(len(t)), int(e.sum()))


def rmst_difference(before: Any, after: Any, *, horizon: float, level: float = 0.95,
                    observed_before: Any = None, observed_after: Any = None) -> Estimate:
    """RMST(before) - RMST(after) up to ``horizon`` with a normal (Wald) interval.

    Positive values mean shorter lifetimes after. The groups are independent;
    the interval is ``diff +- z_{(1+level)/2} sqrt(var_b + var_a)``.

    References
    ----------
    Royston & Parmar (2013); Klein & Moeschberger (2003), sec. 4.5.
    """
    b = restricted_mean(before, observed_before, horizon=horizon)
    a = restricted_mean(after, observed_after, horizon=horizon)
    diff = b.value - a.value
    se = float(np.sqrt(b.variance + a.variance))
    z = float(stats.norm.ppf(0.5 + level / 2))
    return Estimate(f"restricted mean lifetime up to {horizon:g}, before minus after", diff,
                    diff - z * se, diff + z * se, level,
                    "difference of Kaplan-Meier restricted means, Greenwood-type variance, "
                    "normal interval", b.n + a.n, "days")
