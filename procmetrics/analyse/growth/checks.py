"""Goodness of fit, prequential checks and predictions for NHPP growth models.

* **Time-transformed uniformity**: under a correct NHPP, conditional on the
  count, ``m(t_i) / m(T)`` are independent uniform(0, 1) (Cox & Lewis 1966);
  tested with Cramér–von Mises and Kolmogorov–Smirnov. Parameters are
  estimated from the same data, so the p-values are approximate
  (conservative): a fail is meaningful, a pass is weak.
* **Prequential u-plot**: fit on the first ``k`` fixes, predict the time to
  fix ``k+1``; ``u_k = F_k(observed gap)`` should be uniform. The u-plot
  distance is the Kolmogorov distance of the ``u_k`` from uniform
  (Abdel-Ghaly, Chan & Littlewood 1986).
* **Hold-out**: fit on the first part of the window, predict the number of
  fixes in the rest, compare with what happened.
* **Predictions** (all ``extrapolated=True``): expected residual fixes
  (Goel–Okumoto only, profile-likelihood interval), expected fixes in the next
  ``ahead`` days and median time to the next fix (parametric bootstrap
  percentile intervals).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from procmetrics.analyse.growth.nhpp import (
    FITTERS, NHPPFit, go_residual_profile, inverse_mean_value, mean_value,
)
from procmetrics.analyse.result import Diagnostic, Estimate, to_plain
from procmetrics.errors import InsufficientData


@dataclass(frozen=True)
class Prediction:
    """A prediction, or the reason it was refused (``estimate`` is then None)."""

    name: str
    estimate: Estimate | None
    refused_reason: str = ""

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def uniformity_checks(fit: NHPPFit, times: Any, alpha: float = 0.05) -> list[Diagnostic]:
    """CvM and KS tests of ``m(t_i)/m(T)`` against uniform(0, 1)."""
    t = np.sort(np.asarray(times, float))
    pts = t if fit.truncation == "time-truncated" else t[:-1]
    u = fit.mean_value(pts) / float(fit.mean_value(np.array(fit.end)))
    note = "parameters estimated from the same data: p-value approximate (conservative)"
    out = []
    cvm = stats.cramervonmises(u, "uniform")
    out.append(Diagnostic("cramer_von_mises", float(cvm.statistic), f"p >= {alpha}",
                          "pass" if cvm.pvalue >= alpha else "fail",
                          f"Cramér-von Mises on m(t_i)/m(T), p={cvm.pvalue:.3g}", note))
    ks = stats.kstest(u, "uniform")
    out.append(Diagnostic("kolmogorov_smirnov", float(ks.statistic), f"p >= {alpha}",
                          "pass" if ks.pvalue >= alpha else "fail",
                          f"Kolmogorov-Smirnov on m(t_i)/m(T), p={ks.pvalue:.3g}", note))
    return out


def prequential_u(model: str, times: Any, *, start: int | None = None) -> tuple[np.ndarray, int]:
    """u-values of one-step-ahead predictions; also the number of failed refits.

    For ``k = start .. n-1``: fit (failure-truncated) on ``t_1..t_k`` and
    ``u_k = 1 - exp(-(m_k(t_{k+1}) - m_k(t_k)))``.

    References
    ----------
    Abdel-Ghaly, Chan & Littlewood (1986), IEEE TSE 12(9); Dawid (1984),
    JRSS A 147 (prequential analysis).
    """
    t = np.sort(np.asarray(times, float))
    n = len(t)
    start = max(5, n // 3) if start is None else start
    us, failed = [], 0
    for k in range(start, n):
        try:
            f = FITTERS[model](t[:k], None, intervals=False)    # the prediction only
        except InsufficientData:
            failed += 1
            continue
        dm = float(f.mean_value(np.array(t[k])) - f.mean_value(np.array(t[k - 1])))
        us.append(-math.expm1(-dm))
    return np.asarray(us), failed


def u_plot_check(model: str, times: Any, alpha: float = 0.05) -> tuple[Diagnostic, np.ndarray]:
    """The u-plot Kolmogorov distance as a diagnostic, with the u-values."""
    u, failed = prequential_u(model, times)
    if len(u) < 5:
        return (Diagnostic("u_plot_distance", None, f"p >= {alpha}", "n/a",
                           "prequential u-plot (Littlewood)",
                           f"only {len(u)} one-step predictions ({failed} refits failed)"), u)
    ks = stats.kstest(u, "uniform")
    return (Diagnostic("u_plot_distance", float(ks.statistic), f"p >= {alpha}",
                       "pass" if ks.pvalue >= alpha else "fail",
                       f"Kolmogorov distance of {len(u)} prequential u-values from uniform, "
                       f"p={ks.pvalue:.3g}",
                       f"{failed} prefix refits failed (no growth in the prefix)"), u)


def holdout_check(model: str, times: Any, end: float, fraction: float = 2 / 3,
                  level: float = 0.95) -> Diagnostic:
    """Fit on ``(0, fraction*end]``, predict the count in the rest (Poisson)."""
    t = np.sort(np.asarray(times, float))
    cut = fraction * end
    head = t[t <= cut]
    name = "holdout_count"
    try:
        f = FITTERS[model](head, cut)
    except (InsufficientData, ValueError) as exc:
        return Diagnostic(name, None, "observed within predictive interval", "n/a",
                          "fit on first part, predict the rest", f"fit failed: {exc}")
    mu = float(f.mean_value(np.array(end)) - f.mean_value(np.array(cut)))
    a = (1 - level) / 2
    lo, hi = stats.poisson.ppf(a, mu), stats.poisson.ppf(1 - a, mu)
    obs = int((t > cut).sum())
    ok = lo <= obs <= hi
    return Diagnostic(name, float(obs), f"within Poisson {level:.0%} interval "
                      f"[{lo:.0f}, {hi:.0f}] around predicted {mu:.1f}",
                      "pass" if ok else "fail",
                      f"fit on the first {fraction:.0%} of the window, count the rest",
                      "parameter uncertainty ignored: the interval is too narrow, a fail "
                      "is less decisive than it looks")


def _bootstrap_thetas(fit: NHPPFit, n_boot: int, rng: np.random.Generator
                      ) -> tuple[np.ndarray, int]:
    thetas, failed = [], 0
    for _ in range(n_boot):
        if fit.truncation == "time-truncated":
            m_end = float(fit.mean_value(np.array(fit.end)))
            k = rng.poisson(m_end)
            sim = inverse_mean_value(fit.model, fit.theta, np.sort(rng.uniform(0, m_end, k)))
            end: float | None = fit.end
        else:
            sim = inverse_mean_value(fit.model, fit.theta, np.cumsum(rng.exponential(1, fit.n)))
            end = None
        if not np.all(np.isfinite(sim)) or len(sim) < 3:
            failed += 1
            continue
        try:
            thetas.append(FITTERS[fit.model](sim, end, level=0.5, intervals=False).theta)
        except (InsufficientData, ValueError):
            failed += 1
    return np.asarray(thetas, float).reshape(-1, 2), failed


def predictions(fit: NHPPFit, times: Any, *, ahead: float = 90.0, level: float = 0.95,
                n_boot: int = 200, min_residual: float = 0.5,
                rng: np.random.Generator | None = None) -> tuple[list[Prediction], np.ndarray]:
    """Predictions from a fit, each with an interval or a refusal reason.

    Returns the predictions and the bootstrap parameter draws (for bands).
    The residual is refused when its interval's lower end is below
    ``min_residual`` (the data would allow "no defects remain", which fix
    data can never show) and when the ``a`` interval is unbounded.

    References
    ----------
    Goel & Okumoto (1979); Efron & Tibshirani (1993), ch. 6 (parametric
    bootstrap); Musa, Iannino & Okumoto (1987), ch. 12.
    """
    rng = rng if rng is not None else np.random.default_rng(20240602)
    T = fit.end
    thetas, failed = _bootstrap_thetas(fit, n_boot, rng)
    a = (1 - level) / 2
    boot_note = (f"parametric bootstrap percentile interval ({len(thetas)} refits, "
                 f"{failed} failed)")
    out: list[Prediction] = []
    if fit.model == "goel_okumoto":
        r, lo, hi = go_residual_profile(fit, times, level=level)
        a_hi = fit.params[0].high
        est = Estimate("expected_residual_fixes", r, lo, hi, level,
                       "a*exp(-bT), profile-likelihood interval", fit.n, "fixes", True)
        if a_hi is None or hi is None:
            out.append(Prediction(est.name, None, "the data do not bound the total number of "
                                  "fixes (upper profile limit of a not reached)"))
        elif lo < min_residual:
            out.append(Prediction(est.name, None, f"the interval [{lo:.2g}, {hi:.3g}] reaches "
                                  "zero: the model would allow the claim that no defects "
                                  "remain, which fix data cannot support"))
        else:
            out.append(Prediction(est.name, est))
    else:
        out.append(Prediction("expected_residual_fixes", None, "the power-law model has no "
                              "finite total: residual defects are not identifiable"))

    def next_count(th: np.ndarray) -> float:
        return float(mean_value(fit.model, tuple(th), np.array(T + ahead))
                     - mean_value(fit.model, tuple(th), np.array(T)))

    def median_gap(th: np.ndarray) -> float:
        m_T = float(mean_value(fit.model, tuple(th), np.array(T)))
        return float(inverse_mean_value(fit.model, tuple(th), np.array(m_T + math.log(2))) - T)

    th0 = np.asarray(fit.theta)
    for name, fn, unit in ((f"expected_fixes_next_{ahead:g}_days", next_count, "fixes"),
                           ("median_days_to_next_fix", median_gap, "days")):
        v = fn(th0)
        if len(thetas) < max(20, n_boot // 2):
            out.append(Prediction(name, None, f"bootstrap failed ({failed} of {n_boot} refits)"))
            continue
        draws = np.array([fn(th) for th in thetas])
        if not np.isfinite(v):
            out.append(Prediction(name, None, "under the fitted model another fix has "
                                  "probability below one half: no median exists"))
            continue
        fin = draws[np.isfinite(draws)]
        lo_, hi_ = np.quantile(fin, [a, 1 - a]) if len(fin) else (np.nan, np.nan)
        if len(fin) < len(draws) * (1 - a):   # upper end is infinite
            hi_ = np.inf
        out.append(Prediction(name, Estimate(name, v, float(lo_),
                                             None if not np.isfinite(hi_) else float(hi_),
                                             level, boot_note, fit.n, unit, True)))
    return out, thetas
