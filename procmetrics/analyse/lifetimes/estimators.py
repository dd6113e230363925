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
from typing import Any, Iterator

import numpy as np
import pandas as pd
from scipy import stats

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


# --- truncation-aware product-limit ------------------------------------------------

def _lynden_bell(L: np.ndarray, W: np.ndarray, grid: np.ndarray) -> tuple[np.ndarray, ...]:
    """F*(grid) and the reverse-time risk sets at the distinct lifetimes."""
    s, d = np.unique(L, return_counts=True)
    Ls, Ws = np.sort(L), np.sort(W)
    # R(s) = #{L_i <= s <= W_i} = #{L_i <= s} - #{W_i < s}   (since L_i <= W_i)
    R = np.searchsorted(Ls, s, side="right") - np.searchsorted(Ws, s, side="left")
    return _lb_from_counts(s, d, R, grid)


def _lb_from_counts(s: np.ndarray, d: np.ndarray, R: np.ndarray,
                    grid: np.ndarray, idx: np.ndarray | None = None) -> tuple[np.ndarray, ...]:
    """F* on ``grid``; ``idx``: ``searchsorted(s, grid, side="right")`` when the caller
    knows it already."""
    frac = d / R
    with np.errstate(divide="ignore"):
        logf = np.where(frac >= 1.0, -np.inf, np.log1p(-np.minimum(frac, 1.0)))
    # F(t) = prod_{s_j > t} (1 - d_j/R_j); cumulative from the right
    tail = np.concatenate([np.cumsum(logf[::-1])[::-1], [0.0]])
    if grid is s:                 # the distinct lifetimes themselves: s[k] sits at k + 1
        return np.exp(tail[1:]), s, d, R
    if idx is None:
        idx = np.searchsorted(s, grid, side="right")
    return np.exp(tail[idx]), s, d, R


def pointwise_band(replicates: Iterator[np.ndarray], n_boot: int, width: int, a: float,
                   block: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """``np.quantile(boot, [a, 1 - a], axis=0)`` of the ``n_boot`` replicate rows, without
    holding the ``n_boot x width`` matrix (2,000 x 110,000 floats is 1.8 GB at kernel scale).

    The linear-interpolation quantile at ``a`` depends only on the order statistics next
    to position ``(n_boot - 1) a`` of each column: only the smallest few (and for
    ``1 - a`` the largest few) values per column are kept, merged block by block with
    ``np.partition``. At the end ``np.quantile`` runs on columns holding those values and
    +/-inf in the places of the dropped ones, which are beyond the positions it reads:
    the band is the one of the full matrix, number for number.

    ``block`` replicates are merged at a time (default: 256, fewer on a wide grid so
    that a merge's arrays stay near 32 MB each; at a million commits the grid has about
    100,000 points and 256-replicate merges held over a GB). The band does not depend
    on it.
    """
    if block is None:
        block = max(16, min(256, (32 << 20) // (8 * max(width, 1))))
    k_low = min(n_boot, int(np.floor((n_boot - 1) * a)) + 3)
    k_high = min(n_boot, n_boot - int(np.floor((n_boot - 1) * (1 - a))) + 2)
    # grid points as rows, replicates as columns: every partition runs along memory
    low = np.empty((width, 0))
    high = np.empty((width, 0))
    buf: list[np.ndarray] = []

    def merge() -> None:
        nonlocal low, high
        block_t = np.ascontiguousarray(np.vstack(buf).T)
        stack = np.concatenate([low, block_t], axis=1)
        low = (np.partition(stack, k_low - 1, axis=1)[:, :k_low] if stack.shape[1] > k_low
               else stack)
        stack = np.concatenate([high, block_t], axis=1)
        cut = stack.shape[1] - k_high
        high = np.partition(stack, cut, axis=1)[:, cut:] if cut > 0 else stack
        buf.clear()

    for row in replicates:
        buf.append(np.asarray(row, float)[None, :])
        if len(buf) == block:
            merge()
    if buf:
        merge()
    out = []
    rows = max(1, (16 << 20) // (8 * max(n_boot, 1)))      # 16 MB blocks of grid points
    for kept, q, fill in ((low, a, np.inf), (high, 1 - a, -np.inf)):
        res = np.empty(width)
        for j in range(0, width, rows):
            part = np.full((min(rows, width - j), n_boot), fill)
            part[:, :kept.shape[1]] = kept[j:j + rows]
            res[j:j + rows] = np.quantile(part, q, axis=1)
        out.append(res)
    return out[0], out[1]


class _LyndenBellResampler:
    """:func:`_lynden_bell` of bootstrap resamples ``(L[i], W[i])`` without sorting each.

    Every drawn lifetime is one of the sample's distinct lifetimes ``values``, so a
    resample needs only counts over those: ``d`` (draws per distinct lifetime) is a
    ``bincount`` of the draws' lifetime codes, ``#{L <= values[j]}`` its running sum,
    and ``#{W < values[j]}`` the running sum of a ``bincount`` of the draws' window
    codes (the first distinct lifetime above each window). These are the integers
    :func:`_lynden_bell` finds by sorting the drawn pairs, so the replicate is the
    same number for number, from one count of the ``n`` draws per observation
    (:meth:`_counts`) instead of a sort.
    """

    def __init__(self, L: np.ndarray, W: np.ndarray) -> None:
        self.n = len(L)
        self.values = np.unique(L)
        self.k = len(self.values)
        # each observation's lifetime as the index of its distinct value, and its window
        # as the index of the first distinct lifetime above it: W < values[j] iff j >= code
        self.code_l = np.searchsorted(self.values, L, side="left")
        self.code_w = np.searchsorted(self.values, W, side="right")
        # the counts of a resample come from its draws per observation (one bincount of
        # the draws, see _counts): observations in lifetime order (None when they are in
        # it already, as quantile_estimates sorts them) with the last of each distinct
        # lifetime, and in window-code order with, per distinct lifetime j, how many
        # observations have a window code <= j
        by_l = np.argsort(self.code_l, kind="stable")
        self._by_l = None if bool((np.diff(self.code_l) >= 0).all()) else by_l
        sorted_l = self.code_l[by_l]
        self._last_l = np.flatnonzero(np.r_[sorted_l[1:] != sorted_l[:-1], True])
        self._by_w = np.argsort(self.code_w, kind="stable")
        self._upto_w = np.searchsorted(self.code_w[self._by_w], np.arange(self.k),
                                       side="right")

    def _counts(self, i: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``d`` (draws per distinct lifetime) and ``R`` (``#{L <= values[j]} -
        #{W < values[j]}`` among the draws) of the resample ``i``, over every distinct
        lifetime of the sample: integer running sums of the draws per observation, in
        lifetime order and in window order (one ``bincount`` of the draws and one
        gather, instead of a gather and a ``bincount`` per code)."""
        per_obs = np.bincount(i, minlength=self.n)
        in_l = per_obs if self._by_l is None else per_obs[self._by_l]
        upto_l = np.cumsum(in_l)[self._last_l]            # #{drawn L <= values[j]}
        in_w = np.concatenate([[0], np.cumsum(per_obs[self._by_w])])
        R_all = upto_l - in_w[self._upto_w]               # minus #{drawn W < values[j]}
        d_all = np.diff(upto_l, prepend=0)
        return d_all, R_all

    def __call__(self, i: np.ndarray, grid: np.ndarray | None = None
                 ) -> tuple[np.ndarray, np.ndarray]:
        """F* of the resample on ``grid`` (default: its distinct lifetimes), and that grid."""
        d_all, R_all = self._counts(i)
        keep = d_all > 0
        s = self.values[keep]
        if grid is self.values:
            # the sample's own distinct lifetimes: the resample's values <= values[j]
            # are the kept ones up to j, so the binary search is a running count
            return _lb_from_counts(s, d_all[keep], R_all[keep], grid,
                                   np.cumsum(keep))[0], grid
        g = s if grid is None else grid
        return _lb_from_counts(s, d_all[keep], R_all[keep], g)[0], g

    def first_reaching(self, i: np.ndarray, targets: list[float]) -> np.ndarray:
        """For each target ``t``, the smallest of the resample's distinct lifetimes where
        its F* (on its own distinct lifetimes, as :meth:`__call__` gives it) is at least
        ``t``; NaN where F* never reaches it.

        The same numbers as searching ``__call__``'s curve, with two shortcuts:

        * F* is ``exp`` of a running sum from the right of ``log1p(-d/R)`` over the drawn
          lifetimes, which never decreases; a target's place is found by a binary search
          of the sums against ``log(t)``. Only sums within 1e-9 of ``log(t)`` are ambiguous
          (``exp`` is accurate to a few units in the last place, far below a relative 1e-9),
          and only those few are put through ``exp`` and compared with ``t`` as the curve
          compares them; below the window ``exp`` is surely under ``t``, above it surely
          at least ``t``. At a million commits ``exp`` of every sum and a boolean pass per
          target were over a third of a replicate.
        * the counts come from :meth:`_counts`.
        """
        d_all, R_all = self._counts(i)
        at_drawn = np.flatnonzero(d_all)
        frac = d_all[at_drawn] / R_all[at_drawn]
        with np.errstate(divide="ignore"):
            logf = np.where(frac >= 1.0, -np.inf, np.log1p(-np.minimum(frac, 1.0)))
        # log F* at each drawn lifetime: the sum of the terms of the drawn lifetimes above it
        tail = np.empty(len(logf))
        tail[:-1] = np.cumsum(logf[::-1])[::-1][1:]
        tail[-1:] = 0.0
        out = np.full(len(targets), np.nan)
        for j, t in enumerate(targets):
            if t <= 0.0:
                at = 0                                   # F* >= 0 everywhere
            else:
                lt = float(np.log(t))
                lo = int(np.searchsorted(tail, lt - 1e-9, side="left"))
                hi = int(np.searchsorted(tail, lt + 1e-9, side="right"))
                hit = np.flatnonzero(np.exp(tail[lo:hi]) >= t)
                at = lo + int(hit[0]) if len(hit) else hi
            if at < len(tail):
                out[j] = self.values[at_drawn[at]]
        return out


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
