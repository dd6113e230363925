"""Lifetime distribution estimators: naive Kaplan–Meier/ECDF and the
truncation-aware reverse-time product-limit (Lynden-Bell) estimator.

Defect lifetimes mined from a history are *right-truncated*: a defect
introduced at ``u`` appears only if it was fixed before the end of the history
``tau``, i.e. only if ``lifetime <= tau - u`` (its *window*). The naive
estimator treats the observed lifetimes as a sample of all lifetimes and is
biased towards short lifetimes. The product-limit estimator of Lynden-Bell
(1971), in the reverse-time hazard form of Lagakos, Barraj & De Gruttola
(1988), uses each defect's window and estimates

    F*(t) = P(lifetime <= t | lifetime <= t_max)

where ``t_max`` is the longest observed lifetime: the distribution of
lifetimes among defects that are eventually fixed within the longest window
the history allows. Mass beyond that window, and defects never found, are not
identifiable from fix data.

Curves report *survival* ``S(t) = 1 - F(t)``: the share of defects still
unfixed ``t`` units after introduction.

Curve table columns (:data:`CURVE_COLUMNS`): ``time``, ``survival``, ``low``,
``high``, ``at_risk``, ``events``, ``shown`` (False beyond the cut point where
fewer than ``min_at_risk`` observations support the curve).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.lifetimes.lyndenbell import (
    _LyndenBellResampler, _lynden_bell, pointwise_band,
)
from procmetrics.analyse.lifetimes.quantiles import (
    curve_table,
    Quantile, empirical_quantiles, make_quantile, order_statistic_interval, reverse_at_risk,
    support_cut,
)
from procmetrics.analyse.result import Caveat, caveat, to_plain
from procmetrics.errors import InsufficientData
from procmetrics.resampling import data_keyed_rng

CURVE_COLUMNS = ["time", "survival", "low", "high", "at_risk", "events", "shown"]


@dataclass(frozen=True)
class SurvivalCurve:
    """A survival curve with its pointwise band.

    ``method`` is ``"kaplan_meier"`` or ``"truncation_product_limit"``;
    ``band_method`` says how ``low``/``high`` were obtained. ``cut_time`` is
    the time from which the curve is not shown (fewer than ``min_at_risk`` at
    risk), ``None`` when it never drops that low.
    """

    method: str
    table: pd.DataFrame
    n: int
    n_events: int
    level: float
    band_method: str
    cut_time: float | None
    min_at_risk: int
    population: str
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)

    def survival_at(self, t: float) -> float:
        """Step-function value S(t) (right-continuous)."""
        tab = self.table
        i = np.searchsorted(tab["time"].to_numpy(), t, side="right") - 1
        return float(tab["survival"].iloc[max(i, 0)])


_cut = support_cut


def kaplan_meier(durations: Any, observed: Any = None, *, level: float = 0.95,
                 min_at_risk: int = 10) -> SurvivalCurve:
    """Kaplan–Meier estimate with Greenwood variance and a log(-log) band.

    With every observation an event (the defect table) this is one minus the
    empirical distribution function.

    Parameters
    ----------
    durations : non-negative times.
    observed : event indicators (default: all events).
    level : band confidence level.
    min_at_risk : curve cut where fewer remain at risk.

    References
    ----------
    Kaplan & Meier (1958); Greenwood (1926); Kalbfleisch & Prentice (2002),
    sec. 1.4 (log(-log) transformed interval).
    """
    t = np.asarray(durations, float)
    e = np.ones_like(t, bool) if observed is None else np.asarray(observed, bool)
    if len(t) == 0:
        raise InsufficientData("no lifetimes to estimate from")
    if np.any(t < 0) or np.any(~np.isfinite(t)):
        raise ValueError("durations must be finite and non-negative")
    # risk set #{t_i >= s} and events #{t_i = s, e_i} at each distinct event time, by one
    # sort instead of a pass over every lifetime per time (quadratic at kernel scale)
    ut, d = np.unique(t[e], return_counts=True)
    n_at = (len(t) - np.searchsorted(np.sort(t), ut, side="left")).astype(float)
    d = d.astype(float)
    s_hat = np.cumprod(1.0 - d / n_at)
    with np.errstate(divide="ignore", invalid="ignore"):
        gw = np.cumsum(d / (n_at * (n_at - d)))
        z = stats.norm.ppf(0.5 + level / 2)
        # log(-log) transform: v = var(log(-log S)) = gw / (log S)^2
        ll = np.log(-np.log(s_hat))
        se = np.sqrt(gw) / np.abs(np.log(s_hat))
        low = np.exp(-np.exp(ll + z * se))
        high = np.exp(-np.exp(ll - z * se))
    low = np.where(s_hat <= 0, 0.0, np.where(s_hat >= 1, 1.0, low))
    high = np.where(s_hat <= 0, 0.0, np.where(s_hat >= 1, 1.0, high))
    times = np.concatenate([[0.0], ut]) if (len(ut) == 0 or ut[0] > 0) else ut
    pad = len(times) - len(ut)
    tab = pd.DataFrame({
        "time": times,
        "survival": np.concatenate([[1.0] * pad, s_hat]),
        "low": np.concatenate([[1.0] * pad, low]),
        "high": np.concatenate([[1.0] * pad, high]),
        "at_risk": np.concatenate([[len(t)] * pad, n_at]).astype(int),
        "events": np.concatenate([[0] * pad, d]).astype(int),
    })
    cut = _cut(tab["time"].to_numpy(), tab["at_risk"].to_numpy(), min_at_risk)
    tab["shown"] = True if cut is None else tab["time"] < cut
    with np.errstate(invalid="ignore"):
        se_s = np.where(s_hat > 0, s_hat * np.sqrt(gw), np.nan)   # undefined once S = 0
    tab["greenwood_se"] = np.concatenate([[0.0] * pad, se_s])
    return SurvivalCurve("kaplan_meier", tab, int(len(t)), int(e.sum()), level,
                         "Greenwood variance, log(-log) transformed", cut, min_at_risk,
                         "the observed lifetimes, taken at face value")


# --- truncation-aware product-limit (its counts and resamples: lyndenbell.py) ------

def truncated_product_limit(lifetimes: Any, windows: Any, *, level: float = 0.95,
                            n_boot: int = 200, min_at_risk: int = 10,
                            rng: np.random.Generator | None = None) -> SurvivalCurve:
    """Lynden-Bell product-limit estimate for right-truncated lifetimes.

    Parameters
    ----------
    lifetimes : observed lifetimes ``L_i >= 0``.
    windows : truncation windows ``W_i >= L_i`` (``tau - u_i``: the longest
        lifetime that defect could have had and still be observed).
    level : level of the pointwise percentile bootstrap band.
    n_boot : bootstrap resamples of (lifetime, window) pairs.
    min_at_risk : cut the curve where the reverse-time risk set
        ``R(s) = #{L_i <= s <= W_i}`` stays below this.
    rng : random generator for the bootstrap (a fixed default seed if None).

    Returns
    -------
    SurvivalCurve with ``survival = 1 - F*(t)``; ``at_risk`` is ``R(s)``.

    Notes
    -----
    ``F*`` is the lifetime distribution conditional on ``lifetime <= t_max``
    (the longest observed lifetime). A risk set with ``R = d`` at an interior
    time sets ``F*`` to zero below it; this is reported as a caveat.

    References
    ----------
    Lynden-Bell (1971), MNRAS 155; Woodroofe (1985), Ann. Statist. 13;
    Lagakos, Barraj & De Gruttola (1988), Biometrika 75 (reverse-time hazard).
    """
    L = np.asarray(lifetimes, float)
    W = np.asarray(windows, float)
    if len(L) == 0:
        raise InsufficientData("no lifetimes to estimate from")
    if L.shape != W.shape:
        raise ValueError("lifetimes and windows differ in length")
    if np.any(L < 0) or np.any(~np.isfinite(L)) or np.any(~np.isfinite(W)):
        raise ValueError("lifetimes must be finite and non-negative; windows finite")
    bad = W < L
    if bad.any():
        raise ValueError(f"{int(bad.sum())} window(s) shorter than their lifetime: "
                         "check the end date and the basis")
    rng = rng if rng is not None else np.random.default_rng(20240601)
    F, s, d, R = _lynden_bell(L, W, np.unique(L))
    n = len(L)
    resample = _LyndenBellResampler(L, W)
    # every value is a lifetime of the sample, so s holds the resampler's values
    grid = resample.values if np.array_equal(s, resample.values) else s
    a = (1 - level) / 2
    F_low, F_high = (pointwise_band((resample(rng.integers(0, n, n), grid)[0]
                                     for _ in range(n_boot)), n_boot, len(grid), a)
                     if n_boot else (np.full_like(F, np.nan), np.full_like(F, np.nan)))
    tab, cut = curve_table(s, F, F_low, F_high, R, d, min_at_risk)
    cav: list[Caveat] = []
    holes = int(((d >= R) & (np.arange(len(s)) > 0)).sum())
    if holes:
        cav.append(caveat("tuning_sensitive", f"{holes} interior risk set(s) with R = d set "
                          "the estimate to zero below them; the left tail is unstable"))
    pop = (f"defects eventually fixed with a link, conditional on lifetime <= {s[-1]:.4g} "
           "(the longest observed); defects never found are not identifiable")
    return SurvivalCurve("truncation_product_limit", tab, n, n, level,
                         f"pointwise percentile bootstrap, {n_boot} resamples of "
                         "(lifetime, window) pairs", cut, min_at_risk, pop, tuple(cav))


# --- quantiles (reported only within the support; see quantiles.py) ------------------

def curve_quantile(curve: SurvivalCurve, q: float, column: str = "survival", *,
                   within_support: bool = True) -> float | None:
    """Smallest time with F(t) = 1 - S(t) >= q on ``column``.

    None when the curve never reaches ``q`` or, with ``within_support``
    (default), when it reaches it only at or beyond the curve's cut point
    (fewer than ``min_at_risk`` at risk).
    """
    tab = curve.table
    F = 1.0 - tab[column].to_numpy()
    hit = np.flatnonzero(F >= q - 1e-12)
    if not len(hit):
        return None
    t = float(tab["time"].iloc[hit[0]])
    if within_support and curve.cut_time is not None and t >= curve.cut_time:
        return None
    return t


def _lb_cut(x: np.ndarray, W: np.ndarray, min_at_risk: int) -> float | None:
    s = np.unique(x)
    R = np.searchsorted(np.sort(x), s, side="right") - np.searchsorted(np.sort(W), s, side="left")
    return support_cut(s, R, min_at_risk) if (R >= min_at_risk).any() else float(s[0])


def quantile_estimates(lifetimes: Any, windows: Any | None = None, *,
                       quantiles: tuple[float, ...] = (0.25, 0.5, 0.75, 0.9),
                       level: float = 0.95, n_boot: int = 2000, unit: str = "days",
                       rng: np.random.Generator | None = None, min_at_risk: int = 10,
                       window_low: Any | None = None) -> list[Quantile]:
    """Lifetime quantiles with intervals, reported only within the support.

    Without ``windows``: sample quantiles (``numpy`` "inverted_cdf", the ECDF
    inverse) with order-statistic intervals. With ``windows``: quantiles of
    the Lynden-Bell estimate with percentile-bootstrap intervals; with
    ``window_low`` too (lower truncation bounds, some > 0), quantiles of the
    Efron–Petrosian NPMLE for doubly truncated data. A quantile at or beyond
    the support limit, or with fewer than ``min_at_risk`` at risk, is returned
    unsupported (value None); see :mod:`procmetrics.analyse.lifetimes.quantiles`.

    Bootstrap: 2,000 resamples by default (200 moved a median's upper bound by
    a factor of two between seeds on a real history). With ``rng=None`` (what the
    CLI, the report and the claims pass) the resamples come from a generator keyed
    by the data themselves (:func:`data_keyed_rng`), so one set of defects has one
    interval everywhere; the Monte-Carlo error of 2,000 resamples remains.

    References
    ----------
    Conover (1999); Lynden-Bell (1971); Efron & Petrosian (1999), JASA 94;
    Efron & Tibshirani (1993), ch. 13.
    """
    x = np.asarray(lifetimes, float)
    n = len(x)
    if windows is None:
        return empirical_quantiles(x, quantiles=quantiles, level=level, unit=unit,
                                   min_at_risk=min_at_risk)
    W = np.asarray(windows, float)
    U = None if window_low is None else np.asarray(window_low, float)
    # the resamples are keyed by the data: the same defects (in any row order) give the
    # same interval wherever it is computed (CLI, report table, claim), whatever the seed
    order = np.lexsort((W, x) if U is None else (U, W, x))
    x, W = x[order], W[order]
    U = None if U is None else U[order]
    double = U is not None and bool((U > 0).any())
    if rng is None:
        rng = data_keyed_rng(x, W, U)

    def qs(F: np.ndarray, g: np.ndarray) -> np.ndarray:
        res = []
        for q in quantiles:
            hit = np.flatnonzero(F >= q - 1e-12)
            res.append(g[hit[0]] if len(hit) else np.nan)
        return np.array(res)

    failed = [0]

    def cdf(i: np.ndarray | slice) -> tuple[np.ndarray, np.ndarray]:
        if resample is not None and not isinstance(i, slice):
            return resample(i)           # the same replicate as below, without a sort
        g = np.unique(x[i])
        if double:
            from procmetrics.analyse.lifetimes.double import (
                BOOT_TOL, NOT_CONVERGED, NotIdentifiable, check_support, efron_petrosian,
            )

            point = isinstance(i, slice)
            fit = efron_petrosian(x[i], U[i], W[i],  # type: ignore[index]
                                  **({} if point else {"tol": BOOT_TOL}))
            if not fit.converged:
                if point:
                    raise NotIdentifiable(NOT_CONVERGED.format(it=fit.iterations))
                failed[0] += 1
            elif point:
                check_support(fit, x, W, min_at_risk)
            return fit.cdf_at(g), g
        return _lynden_bell(x[i], W[i], g)[0], g

    resample = None if double else _LyndenBellResampler(x, W)
    point = qs(*cdf(slice(None)))
    boot = np.empty((n_boot, len(quantiles)))
    targets = [q - 1e-12 for q in quantiles]      # the thresholds qs compares with
    for b in range(n_boot):
        draw = rng.integers(0, n, n)
        boot[b] = (resample.first_reaching(draw, targets) if resample is not None
                   else qs(*cdf(draw)))
    if failed[0] > 0.05 * max(n_boot, 1):
        from procmetrics.analyse.lifetimes.double import NotIdentifiable

        raise NotIdentifiable(f"the Efron-Petrosian estimate did not converge in {failed[0]} "
                              f"of {n_boot} bootstrap resamples: no interval can be given")
    a = (1 - level) / 2
    cut = _lb_cut(x, W, min_at_risk)
    method = ("Efron-Petrosian NPMLE quantile (doubly truncated); " if double
              else "Lynden-Bell product-limit quantile; ") + \
        f"percentile bootstrap ({n_boot} resamples)"
    out = []
    for k, q in enumerate(quantiles):
        col = boot[:, k][np.isfinite(boot[:, k])]
        lo, hi = (np.quantile(col, [a, 1 - a]) if len(col) else (np.nan, np.nan))
        v = float(point[k])
        out.append(make_quantile(
            f"q{int(round(q * 100))}", q, v if np.isfinite(v) else None,
            float(lo) if np.isfinite(lo) else None, float(hi) if np.isfinite(hi) else None,
            level=level, method=method, n=n, unit=unit,
            at_risk=reverse_at_risk(x, W, v) if np.isfinite(v) else None,
            support_limit=cut if cut is not None else float(x.max()),
            range_low=float(x.min()), min_at_risk=min_at_risk))
    return out


__all__ = ["CURVE_COLUMNS", "Quantile", "SurvivalCurve", "curve_quantile", "kaplan_meier",
           "order_statistic_interval", "quantile_estimates", "truncated_product_limit"]
