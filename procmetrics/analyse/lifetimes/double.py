"""Lifetimes truncated at both ends: the Efron–Petrosian NPMLE.

When defects introduced before the link era (``A``) are kept, a defect
introduced at ``u < A`` is seen only if it was fixed after linking began
(``lifetime >= A - u``) and before the end of the history ``tau``
(``lifetime <= tau - u``). Its lifetime is *doubly truncated* to
``[U_i, V_i] = [max(0, A - u), tau - u]``. Introducers from the link era on
have ``U_i = 0`` (right truncation only). The nonparametric maximum-likelihood
estimate of the lifetime distribution maximises

    prod_i f(L_i) / F_i,    F_i = sum_{j: U_i <= t_j <= V_i} f_j,

over distributions ``f`` on the observed lifetimes ``t_j``. At its maximum
``f_j = d_j / sum_i 1{U_i <= t_j <= V_i} / F_i`` (normalised), which is
iterated to convergence (Efron & Petrosian 1999, sec. 2; Shen 2010). With all
``U_i = 0`` the estimate equals the Lynden-Bell estimate.

As for Lynden-Bell, what is identified is the distribution conditional on the
lifetime lying within the range that some window covers.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from procmetrics.errors import InsufficientData


class NotIdentifiable(InsufficientData):
    """The doubly truncated data do not identify the lifetime distribution."""


#: convergence tolerance of the bootstrap refits (the band needs ~1e-3 precision)
BOOT_TOL = 1e-8
NOT_CONVERGED = ("the Efron-Petrosian estimate for doubly truncated lifetimes did not converge "
                 "in {it} iterations: the likelihood keeps moving mass to the longest "
                 "lifetimes, so the data (defects introduced before linking began, seen only "
                 "when fixed after it) do not identify the lifetime distribution; use "
                 "--links-from settled or first, or the horizon-conditional figures")


@dataclass(frozen=True)
class DoubleTruncationFit:
    """The NPMLE: support points, their masses and the convergence record."""

    times: np.ndarray
    mass: np.ndarray
    iterations: int
    converged: bool

    def cdf_at(self, grid: np.ndarray) -> np.ndarray:
        """F(t) = P(lifetime <= t) at ``grid`` (right-continuous step function)."""
        c = np.concatenate([[0.0], np.cumsum(self.mass)])
        return c[np.searchsorted(self.times, np.asarray(grid, float), side="right")]


def efron_petrosian(lifetimes: np.ndarray, lower: np.ndarray, upper: np.ndarray, *,
                    tol: float = 1e-10, max_iter: int = 20000,
                    start: np.ndarray | None = None) -> DoubleTruncationFit:
    """NPMLE of the lifetime distribution from doubly truncated observations.

    Parameters
    ----------
    lifetimes : observed lifetimes ``L_i``.
    lower, upper : truncation bounds ``U_i <= L_i <= V_i``.
    tol : stop when no mass changes by more than ``tol``; without convergence
        within ``max_iter`` iterations the fit is returned with
        ``converged=False`` (on real histories this happens when the likelihood
        drifts towards putting all mass on the longest lifetimes: the data do
        not identify the distribution, and callers refuse the estimate).
    start : starting masses on the distinct lifetimes (default: uniform).

    References
    ----------
    Efron & Petrosian (1999), "Nonparametric methods for doubly truncated data",
    JASA 94, 824-834; Shen (2010), "Nonparametric analysis of doubly truncated
    data", Ann. Inst. Stat. Math. 62, 835-853.
    """
    L = np.asarray(lifetimes, float)
    U = np.asarray(lower, float)
    V = np.asarray(upper, float)
    if len(L) == 0:
        raise InsufficientData("no lifetimes to estimate from")
    if np.any(U > L + 1e-9) or np.any(L > V + 1e-9):
        raise ValueError("each lifetime must lie within its truncation bounds")
    t, d = np.unique(L, return_counts=True)
    m = len(t)
    lo = np.searchsorted(t, U - 1e-9, side="left")
    hi = np.searchsorted(t, V + 1e-9, side="right") - 1
    f = np.full(m, 1.0 / m) if start is None else np.asarray(start, float) / np.sum(start)

    def step(f: np.ndarray) -> np.ndarray:
        c = np.concatenate([[0.0], np.cumsum(f)])
        w = 1.0 / (c[hi + 1] - c[lo])
        S = np.cumsum(np.bincount(lo, w, m + 1) - np.bincount(hi + 1, w, m + 1))[:m]
        new = d / S
        return new / new.sum()

    # fixed-point iteration accelerated by SQUAREM (Varadhan & Roland 2008, scheme S3):
    # the plain iteration converges slowly where the likelihood is flat
    it, converged = 0, False
    while it < max_iter:
        f1 = step(f)
        f2 = step(f1)
        it += 2
        r, v = f1 - f, f2 - 2 * f1 + f
        nv = float(np.sqrt(np.sum(v * v)))
        alpha = -float(np.sqrt(np.sum(r * r))) / nv if nv > 0 else -1.0
        alpha = min(alpha, -1.0)
        g = f - 2 * alpha * r + alpha * alpha * v
        if np.any(g <= 0) or not np.all(np.isfinite(g)):
            g = f2
        g = step(g / g.sum())
        it += 1
        delta = float(np.max(np.abs(g - f)))
        f = g
        if delta < tol:
            converged = True
            break
    return DoubleTruncationFit(t, f, it, converged)


def check_support(fit: DoubleTruncationFit, L: np.ndarray, V: np.ndarray,
                  min_at_risk: int) -> None:
    """Refuse an estimate that puts half its mass or more where fewer than
    ``min_at_risk`` defects are at risk (``#{L_i <= t <= V_i}``): the median would
    lie beyond what the data support, and the curve before it would be read from
    the few longest lifetimes."""
    from procmetrics.analyse.lifetimes.quantiles import support_cut

    s = fit.times
    R = np.searchsorted(np.sort(L), s, side="right") - np.searchsorted(np.sort(V), s,
                                                                       side="left")
    cut = support_cut(s, R, min_at_risk) if (R >= min_at_risk).any() else float(s[0])
    if cut is None:
        return
    below = float(fit.cdf_at(np.array([np.nextafter(cut, -np.inf)]))[0])
    if below < 0.5:
        raise NotIdentifiable(
            f"the Efron-Petrosian estimate puts {1 - below:.0%} of its mass on lifetimes of "
            f"{cut:,.0f} days or more, where fewer than {min_at_risk} defects are at risk: "
            "the defects introduced before linking began (seen only when fixed after it) "
            "do not identify the lifetime distribution; use --links-from settled or first, "
            "or the horizon-conditional figures")


def log_likelihood(fit: DoubleTruncationFit, lifetimes: np.ndarray, lower: np.ndarray,
                   upper: np.ndarray) -> float:
    """Conditional log-likelihood ``sum_i log f(L_i) - log F_i`` of a fit."""
    L, U, V = (np.asarray(a, float) for a in (lifetimes, lower, upper))
    j = np.searchsorted(fit.times, L)
    Fi = fit.cdf_at(V) - fit.cdf_at(U - 1e-9)
    return float(np.sum(np.log(fit.mass[j])) - np.sum(np.log(Fi)))


def doubly_truncated_curve(lifetimes: np.ndarray, lower: np.ndarray, upper: np.ndarray, *,
                           level: float = 0.95, n_boot: int = 2000, min_at_risk: int = 10,
                           rng: np.random.Generator | None = None):  # -> SurvivalCurve
    """Survival curve ``1 - F(t)`` of the Efron–Petrosian NPMLE with a bootstrap band.

    ``at_risk`` is the reverse-time risk set ``#{L_i <= t <= V_i}`` (as for
    Lynden-Bell): the curve is cut where it stays below ``min_at_risk``.

    References
    ----------
    Efron & Petrosian (1999); Moreira & de Uña-Álvarez (2010), J. Nonparametr.
    Stat. 22 (bootstrap for doubly truncated data, resampling triplets).
    """

    from procmetrics.analyse.lifetimes.estimators import SurvivalCurve
    from procmetrics.analyse.lifetimes.quantiles import curve_table

    L, U, V = (np.asarray(a, float) for a in (lifetimes, lower, upper))
    rng = rng if rng is not None else np.random.default_rng(20240601)
    fit = efron_petrosian(L, U, V)
    if not fit.converged:
        raise NotIdentifiable(NOT_CONVERGED.format(it=fit.iterations))
    check_support(fit, L, V, min_at_risk)
    s = fit.times
    F = fit.cdf_at(s)
    n = len(L)
    boot = np.empty((n_boot, len(s)))
    failed = 0
    for b in range(n_boot):
        i = rng.integers(0, n, n)
        bf = efron_petrosian(L[i], U[i], V[i], tol=BOOT_TOL)
        failed += not bf.converged
        boot[b] = bf.cdf_at(s)
    if n_boot and failed > 0.05 * n_boot:
        raise NotIdentifiable(f"the Efron-Petrosian estimate did not converge in {failed} of "
                              f"{n_boot} bootstrap resamples: no interval can be given")
    a = (1 - level) / 2
    F_low, F_high = (np.quantile(boot, [a, 1 - a], axis=0) if n_boot
                     else (np.full_like(F, np.nan), np.full_like(F, np.nan)))
    d = np.unique(L, return_counts=True)[1]
    R = np.searchsorted(np.sort(L), s, side="right") - np.searchsorted(np.sort(V), s, side="left")
    tab, cut = curve_table(s, F, F_low, F_high, R, d, min_at_risk)
    n_left = int((U > 0).sum())
    pop = (f"defects eventually fixed with a link, {n_left} of them introduced before the "
           "link era and truncated at both ends (seen only when fixed after linking began "
           "and before the end of the history); conditional on lifetime <= "
           f"{s[-1]:.4g} (the longest observed)")
    return SurvivalCurve("doubly_truncated_npmle", tab, n, n, level,
                         f"pointwise percentile bootstrap, {n_boot} resamples of "
                         "(lower bound, lifetime, upper bound) triplets", cut, min_at_risk, pop)
