"""Non-homogeneous Poisson process models of cumulative fixes, by maximum likelihood.

* **Goel–Okumoto**: ``m(t) = a (1 - exp(-b t))`` — ``a`` is the expected total
  number of fixes, ``b`` the per-defect detection rate.
* **Power law (Crow–AMSAA)**: ``m(t) = lambda t^beta`` — ``beta < 1`` means a
  falling fix rate; the model has no finite total.

Log-likelihood for fix times ``t_1 <= ... <= t_n`` observed on ``(0, T]``:
``sum log m'(t_i) - m(T)``. Time-truncated data give ``T`` (end of
observation); failure-truncated data use ``T = t_n``. Intervals are profile
likelihood intervals: the parameter values whose profile log-likelihood lies
within ``chi2_1(level) / 2`` of the maximum (Venzon & Moolgavkar 1988). An
end of ``None`` in an interval means the profile never fell that far: the
data do not bound the parameter on that side.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import numpy as np
from scipy import optimize, stats

from procmetrics.analyse.result import Estimate, to_plain
from procmetrics.errors import InsufficientData


@dataclass(frozen=True)
class NHPPFit:
    """A fitted NHPP model; ``params`` carry profile-likelihood intervals."""

    model: str
    params: tuple[Estimate, ...]
    loglik: float
    aic: float
    n: int
    end: float
    truncation: str
    method: str

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)

    def value(self, name: str) -> float:
        return float(next(p.value for p in self.params if p.name == name))

    def mean_value(self, t: Any) -> np.ndarray:
        """Expected cumulative number of fixes by time ``t``."""
        return mean_value(self.model, self.theta, np.asarray(t, float))

    @property
    def theta(self) -> tuple[float, float]:
        return (self.params[0].value, self.params[1].value)  # type: ignore[return-value]


def mean_value(model: str, theta: tuple[float, float], t: np.ndarray) -> np.ndarray:
    """``m(t)`` for ``model`` with parameters ``theta`` = (a, b) or (lambda, beta)."""
    p, q = theta
    if model == "goel_okumoto":
        return p * -np.expm1(-q * t)
    if model == "power_law":
        return p * np.power(np.maximum(t, 0.0), q)
    raise ValueError(f"unknown model {model!r}")


def inverse_mean_value(model: str, theta: tuple[float, float], m: np.ndarray) -> np.ndarray:
    """Time at which ``m(t)`` reaches ``m`` (inf where it never does)."""
    p, q = theta
    m = np.asarray(m, float)
    if model == "goel_okumoto":
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(m < p, -np.log1p(-m / p) / q, np.inf)
    return np.power(m / p, 1.0 / q)


def _prep(times: Any, end: float | None) -> tuple[np.ndarray, float, str]:
    t = np.sort(np.asarray(times, float))
    if len(t) < 3:
        raise InsufficientData(f"an NHPP fit needs at least 3 fix times, got {len(t)}")
    if np.any(t <= 0) or np.any(~np.isfinite(t)):
        raise ValueError("fix times must be finite and > 0 (after the origin)")
    if end is None:
        return t, float(t[-1]), "failure-truncated"
    if end < t[-1]:
        raise ValueError("end of observation precedes the last fix time")
    return t, float(end), "time-truncated"


def _bracket_root(f: Callable[[float], float], x0: float, step: float, limit: float) -> float | None:
    """Root of ``f`` between ``x0`` (f>0) and moving geometrically towards ``limit``."""
    x_prev = x0
    for _ in range(200):
        x = x_prev * step
        if (step > 1 and x > limit) or (step < 1 and x < limit):
            return None
        if f(x) < 0:
            return float(optimize.brentq(f, min(x, x_prev), max(x, x_prev), xtol=1e-12 * x0,
                                         rtol=1e-10))
        x_prev = x
    return None


def profile_interval(profile: Callable[[float], float], theta_hat: float, ll_max: float,
                     level: float, low_limit: float = 1e-12,
                     high_limit: float = 1e12) -> tuple[float | None, float | None]:
    """Profile-likelihood interval for a positive parameter by root bracketing."""
    cut = stats.chi2.ppf(level, 1) / 2

    def f(x: float) -> float:
        return profile(x) - (ll_max - cut)
    lo = _bracket_root(f, theta_hat, 0.8, low_limit)
    hi = _bracket_root(f, theta_hat, 1.25, high_limit)
    return lo, hi


def _maximise_log(fn: Callable[[float], float], lo: float, hi: float) -> float:
    """max over x in [lo, hi] of fn(x), searching on log x."""
    r = optimize.minimize_scalar(lambda z: -fn(np.exp(z)), bounds=(np.log(lo), np.log(hi)),
                                 method="bounded", options={"xatol": 1e-10})
    return float(-r.fun)


# --- Goel–Okumoto ---------------------------------------------------------------

def go_loglik(a: float, b: float, t: np.ndarray, T: float) -> float:
    if a <= 0 or b <= 0:
        return -np.inf
    n = len(t)
    return float(n * np.log(a) + n * np.log(b) - b * t.sum() + a * np.expm1(-b * T))


def fit_goel_okumoto(times: Any, end: float | None = None, *, level: float = 0.95,
                     intervals: bool = True) -> NHPPFit:
    """Maximum-likelihood Goel–Okumoto fit with profile-likelihood intervals
    (``intervals=False``: the estimates only, for bootstrap refits that use the point
    estimate alone; the profile searches are nine tenths of a fit's time).

    The MLE exists only when the mean fix time is below ``T/2`` (fixes crowd
    early); otherwise :class:`InsufficientData` is raised.

    References
    ----------
    Goel & Okumoto (1979), IEEE Trans. Reliability R-28(3), 206–211;
    Musa, Iannino & Okumoto (1987), Software Reliability, ch. 11.
    """
    t, T, trunc = _prep(times, end)
    n, S = len(t), float(t.sum())
    if S >= n * T / 2:
        raise InsufficientData("no Goel-Okumoto maximum: mean fix time is not below T/2 "
                               "(no sign of a falling fix rate)")

    def g(x: float) -> float:   # score in x = bT, divided by T
        return n / x - S / T - n / np.expm1(x)
    x = optimize.brentq(g, 1e-9, 700.0, xtol=1e-14)
    b = x / T
    a = n / -np.expm1(-b * T)
    ll = go_loglik(a, b, t, T)

    def prof_b(bb: float) -> float:
        return go_loglik(n / -np.expm1(-bb * T), bb, t, T)

    def prof_a(aa: float) -> float:
        return _maximise_log(lambda bb: go_loglik(aa, bb, t, T), b * 1e-6, b * 1e6)

    b_lo = b_hi = a_lo = a_hi = None
    if intervals:
        b_lo, b_hi = profile_interval(prof_b, b, ll, level, low_limit=b * 1e-8)
        a_lo, a_hi = profile_interval(prof_a, a, ll, level, low_limit=n * 0.5,
                                      high_limit=a * 1e6)
    if _hpp_within_cut(ll, n, T, level):
        # as b -> 0 and a -> infinity the model tends to a constant rate; when that limit
        # is inside the likelihood region, a has no upper and b no lower limit (any finite
        # value found above is an artefact of the search range)
        a_hi, b_lo = None, None
    meth = f"maximum likelihood ({trunc}); profile-likelihood interval"
    params = (Estimate("a", a, a_lo, a_hi, level, meth, n, "fixes"),
              Estimate("b", b, b_lo, b_hi, level, meth, n, "per day"))
    return NHPPFit("goel_okumoto", params, ll, 4 - 2 * ll, n, T, trunc,
                   "Goel-Okumoto NHPP m(t) = a(1 - exp(-b t))")


def _hpp_within_cut(ll_max: float, n: int, T: float, level: float) -> bool:
    """Is the constant-rate (HPP) limit of the model inside the profile region?

    The HPP log-likelihood ``n log(n/T) - n`` is the supremum of the
    Goel-Okumoto likelihood along ``b -> 0``; a likelihood-ratio statistic
    ``2 (ll_max - ll_hpp)`` below the chi-square(1) quantile leaves ``a``
    unbounded above.
    """
    ll_hpp = n * np.log(n / T) - n
    return bool(2 * (ll_max - ll_hpp) < stats.chi2.ppf(level, 1))


def go_residual_profile(fit: NHPPFit, times: Any, *, level: float = 0.95
                        ) -> tuple[float, float | None, float | None]:
    """Expected residual fixes ``r = a exp(-b T)`` with a profile-likelihood interval.

    With ``a = r exp(bT)`` the log-likelihood is profiled over ``b`` for each
    fixed ``r``. A lower end of ``0.0`` means the data are consistent with
    (almost) no remaining fixes *under the model* — never a claim that no
    defects remain.
    """
    t = np.sort(np.asarray(times, float))
    T = fit.end
    a, b = fit.theta
    r_hat = a * np.exp(-b * T)

    def prof_r(r: float) -> float:
        return _maximise_log(lambda bb: go_loglik(r * np.exp(bb * T), bb, t, T),
                             b * 1e-4, min(b * 1e4, 700.0 / T))
    lo, hi = profile_interval(prof_r, r_hat, fit.loglik, level, low_limit=1e-6,
                              high_limit=r_hat * 1e6 + 1e6)
    if _hpp_within_cut(fit.loglik, len(t), T, level):
        hi = None     # r grows without limit along the constant-rate direction
    return float(r_hat), (0.0 if lo is None else lo), hi


# --- power law ------------------------------------------------------------------

def pl_loglik(lam: float, beta: float, t: np.ndarray, T: float) -> float:
    if lam <= 0 or beta <= 0:
        return -np.inf
    n = len(t)
    return float(n * np.log(lam) + n * np.log(beta) + (beta - 1) * np.log(t).sum()
                 - lam * T ** beta)


def fit_power_law(times: Any, end: float | None = None, *, level: float = 0.95,
                  intervals: bool = True) -> NHPPFit:
    """Maximum-likelihood power-law (Crow–AMSAA) fit with profile intervals
    (``intervals=False``: the estimates only, as in :func:`fit_goel_okumoto`).

    ``beta_hat = n / sum log(T / t_i)`` (sum over all ``n`` when
    time-truncated, over the first ``n - 1`` when failure-truncated) and
    ``lambda_hat = n / T^beta_hat``.

    References
    ----------
    Crow (1974); MIL-HDBK-189C (2011), sec. 5; Rigdon & Basu (2000),
    Statistical Methods for the Reliability of Repairable Systems, ch. 5.
    """
    t, T, trunc = _prep(times, end)
    n = len(t)
    pts = t if trunc == "time-truncated" else t[:-1]
    s = float(np.log(T / pts).sum())
    if s <= 0:
        raise InsufficientData("all fix times coincide with the end of observation")
    beta = n / s
    lam = n / T ** beta
    ll = pl_loglik(lam, beta, t, T)

    def prof_beta(bb: float) -> float:
        return pl_loglik(n / T ** bb, bb, t, T)

    def prof_lam(lm: float) -> float:
        return _maximise_log(lambda bb: pl_loglik(lm, bb, t, T), beta * 1e-3, beta * 1e3)

    be_lo = be_hi = la_lo = la_hi = None
    if intervals:
        be_lo, be_hi = profile_interval(prof_beta, beta, ll, level)
        la_lo, la_hi = profile_interval(prof_lam, lam, ll, level)
    meth = f"maximum likelihood ({trunc}); profile-likelihood interval"
    params = (Estimate("lambda", lam, la_lo, la_hi, level, meth, n, "fixes per day^beta"),
              Estimate("beta", beta, be_lo, be_hi, level, meth, n, ""))
    return NHPPFit("power_law", params, ll, 4 - 2 * ll, n, T, trunc,
                   "power-law (Crow-AMSAA) NHPP m(t) = lambda t^beta")


FITTERS: dict[str, Callable[..., NHPPFit]] = {
    "goel_okumoto": fit_goel_okumoto, "power_law": fit_power_law,
}


def simulate_nhpp(model: str, theta: tuple[float, float], end: float,
                  rng: np.random.Generator) -> np.ndarray:
    """Event times of an NHPP on ``(0, end]`` (time transformation of a unit HPP)."""
    m_end = float(mean_value(model, theta, np.array(end)))
    k = rng.poisson(m_end)
    u = np.sort(rng.uniform(0.0, m_end, k))
    return inverse_mean_value(model, theta, u)
