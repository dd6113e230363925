"""Lifetime quantiles reported only where the data support them.

A quantile read off a survival curve is only as good as the number of defects
that support the curve at that point. Every quantile here carries

* ``at_risk``: the risk set at the quantile (forward ``#{L >= t}`` for the
  naive ECDF; the reverse-time ``R(t) = #{L_i <= t <= W_i}`` for the
  truncation-aware estimate);
* ``support_limit``: the time from which fewer than ``min_at_risk`` defects
  support the curve (the curve's cut point; the longest observed lifetime when
  it never drops that low);
* ``range_low`` / ``range_high``: the lifetimes the estimate covers (shortest
  observed lifetime to the support limit);
* ``supported``: False when the quantile lies at or beyond the support limit
  or its risk set is below ``min_at_risk``. Then ``value``, ``low`` and
  ``high`` are None and the quantile is reported as "beyond what the data
  support (> support_limit)";
* ``high_open``: True when the point is supported but the interval's upper
  end lies beyond the support; ``high`` is then None (read "> support_limit").
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from procmetrics.analyse.result import to_plain

QUANTILE_FIELDS = ["name", "quantile", "value", "low", "high", "level", "method", "n", "unit",
                   "at_risk", "supported", "support_limit", "range_low", "range_high",
                   "high_open"]


@dataclass(frozen=True)
class Quantile:
    """One lifetime quantile with its support (see module docstring)."""

    name: str
    quantile: float
    value: float | None
    low: float | None
    high: float | None
    level: float
    method: str
    n: int
    unit: str
    at_risk: int | None
    supported: bool
    support_limit: float | None
    range_low: float | None
    range_high: float | None
    high_open: bool = False

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)

    def text(self, digits: int = 0) -> str:
        """``"85 [74, 103] (at risk 120)"`` or ``"beyond what the data support (> t days)"``."""
        f = (lambda x: f"{x:,.{digits}f}")
        if not self.supported:
            lim = "-" if self.support_limit is None else f(self.support_limit)
            risk = "" if self.at_risk is None else f", {self.at_risk} at risk there"
            return f"beyond what the data support (> {lim} {self.unit}{risk})"
        lo = "-" if self.low is None else f(self.low)
        hi = (f"> {f(self.support_limit)}" if self.high_open and self.support_limit is not None
              else "-" if self.high is None else f(self.high))
        return f"{f(self.value)} [{lo}, {hi}] (at risk {self.at_risk})"  # type: ignore[arg-type]


def support_cut(times: np.ndarray, at_risk: np.ndarray, min_at_risk: int) -> float | None:
    """First time from which the risk set stays below ``min_at_risk`` (None: never)."""
    low = at_risk < min_at_risk
    if not low.any():
        return None
    ok = np.flatnonzero(~low)
    j = ok[-1] + 1 if len(ok) else 0
    return float(times[j]) if j < len(times) else None


def forward_at_risk(x: np.ndarray, t: float) -> int:
    """``#{x_i >= t}``: the Kaplan–Meier risk set at ``t``."""
    return int((x >= t).sum())


def forward_at_risk_sorted(xs: np.ndarray, ts: np.ndarray) -> np.ndarray:
    """:func:`forward_at_risk` at every time of ``ts`` at once, ``xs`` sorted ascending:
    one binary search per time instead of a pass over ``xs`` (NaN, sorted last, is
    never at risk, as in ``x >= t``)."""
    n = len(xs) - int(np.isnan(xs).sum())
    return (n - np.searchsorted(xs, ts, side="left")).clip(min=0)


def reverse_at_risk(L: np.ndarray, W: np.ndarray, t: float) -> int:
    """``R(t) = #{L_i <= t <= W_i}``: the reverse-time risk set of the Lynden-Bell estimate."""
    return int(((L <= t) & (W >= t)).sum())


def make_quantile(name: str, q: float, value: float | None, low: float | None,
                  high: float | None, *, level: float, method: str, n: int, unit: str,
                  at_risk: int | None, support_limit: float | None, range_low: float | None,
                  min_at_risk: int) -> Quantile:
    """Apply the support rule to one raw quantile estimate."""
    ok = (value is not None and np.isfinite(value) and at_risk is not None
          and at_risk >= min_at_risk
          and (support_limit is None or value < support_limit))
    rh = support_limit
    if not ok:
        return Quantile(name, q, None, None, None, level, method, n, unit, at_risk, False,
                        support_limit, range_low, rh)
    open_ = high is None or (support_limit is not None and high >= support_limit)
    return Quantile(name, q, float(value), low, None if open_ else high,  # type: ignore[arg-type]
                    level, method, n, unit, at_risk, True, support_limit, range_low, rh,
                    bool(open_))


def order_statistic_interval(x: Any, q: float, level: float = 0.95) -> tuple[float, float]:
    """Distribution-free interval for the q-quantile from order statistics.

    References
    ----------
    Conover (1999), Practical Nonparametric Statistics, sec. 3.2.
    """
    xs = np.sort(np.asarray(x, float))
    n = len(xs)
    a = (1 - level) / 2
    lo = int(stats.binom.ppf(a, n, q))          # number of obs below the lower bound
    hi = int(stats.binom.ppf(1 - a, n, q)) + 1
    low = xs[lo - 1] if lo >= 1 else -np.inf
    high = xs[hi - 1] if hi <= n else np.inf
    return float(low), float(high)


def empirical_quantiles(x: Any, *, quantiles: tuple[float, ...], level: float, unit: str,
                        min_at_risk: int, support_limit: float | None = None,
                        method: str = "empirical quantile; order-statistic interval "
                        "(Conover)") -> list[Quantile]:
    """ECDF quantiles with order-statistic intervals and the forward risk set.

    ``support_limit`` default: the time from which fewer than ``min_at_risk``
    lifetimes are at least that long (the Kaplan–Meier cut point).

    References
    ----------
    Conover (1999), sec. 3.2; Hyndman & Fan (1996), definition 1 (inverted CDF).
    """
    xs = np.sort(np.asarray(x, float))
    n = len(xs)
    if support_limit is None and n:
        ut = np.unique(xs)
        support_limit = support_cut(ut, forward_at_risk_sorted(xs, ut), min_at_risk)
    out = []
    for q in quantiles:
        v = float(np.quantile(xs, q, method="inverted_cdf")) if n else None
        lo, hi = order_statistic_interval(xs, q, level) if n else (np.nan, np.nan)
        out.append(make_quantile(
            f"q{int(round(q * 100))}", q, v, float(lo) if np.isfinite(lo) else None,
            float(hi) if np.isfinite(hi) else None, level=level, method=method, n=n,
            unit=unit, at_risk=None if v is None else forward_at_risk(xs, v),
            support_limit=support_limit if support_limit is not None
            else (float(xs[-1]) if n else None),
            range_low=float(xs[0]) if n else None, min_at_risk=min_at_risk))
    return out


def curve_table(s: np.ndarray, F: np.ndarray, F_low: np.ndarray, F_high: np.ndarray,
                R: np.ndarray, d: np.ndarray, min_at_risk: int) -> tuple[Any, float | None]:
    """The fixed-column curve table of a distribution estimate F at the times ``s``,
    and the support cut (None: no cut).

    Columns ``time`` (0 added first when the first event is later), ``survival``,
    ``low``/``high`` (band from ``F_high``/``F_low``), ``at_risk``, ``events`` and
    ``shown`` (False from the support cut on: fewer than ``min_at_risk`` at risk at
    the upper end; reverse-time risk sets are small at the start by design).
    """
    import pandas as pd

    times = np.concatenate([[0.0], s]) if s[0] > 0 else s
    pad = len(times) - len(s)
    tab = pd.DataFrame({
        "time": times,
        "survival": np.concatenate([[1.0] * pad, 1 - F]),
        "low": np.concatenate([[1.0] * pad, 1 - F_high]),
        "high": np.concatenate([[1.0] * pad, 1 - F_low]),
        "at_risk": np.concatenate([[0] * pad, R]).astype(int),
        "events": np.concatenate([[0] * pad, d]).astype(int),
    })
    cut = support_cut(s, R, min_at_risk) if (R >= min_at_risk).any() else float(s[0])
    tab["shown"] = True if cut is None else tab["time"] < cut
    return tab, cut
