"""The Lynden-Bell product-limit estimate as counts, its bootstrap resamples and their
pointwise band: the computational core under
:func:`procmetrics.analyse.lifetimes.estimators.truncated_product_limit` and
:func:`~procmetrics.analyse.lifetimes.estimators.quantile_estimates` (see that module
for the estimator, its population and its references).

* :func:`_lynden_bell`: F*(grid) and the reverse-time risk sets of a sample.
* :class:`_LyndenBellResampler`: the same for bootstrap resamples, from counts of the
  draws instead of a sort of each resample (same numbers).
* :func:`pointwise_band`: the percentile band of many replicate curves without
  holding the replicate matrix.
"""
from __future__ import annotations

from typing import Iterator

import numpy as np


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
    resample needs only counts over those: ``d`` (draws per distinct lifetime),
    ``#{L <= values[j]}`` (its running sum) and ``#{W < values[j]}`` among the draws.
    :meth:`_counts` reads all three off one count of the draws per observation. These
    are the integers :func:`_lynden_bell` finds by sorting the drawn pairs, so the
    replicate is the same number for number, without a sort.
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
