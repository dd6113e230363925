"""Model diagnostics, each returned as a :class:`~procmetrics.analyse.result.Diagnostic`.

Every check states its threshold and gives a verdict (``pass``, ``warn``,
``fail`` or ``n/a`` with the reason). The functions take plain arrays so any
model (GLM, discrete count models, OLS, Cox regressions) can reuse them.

References
----------
Cameron, A. C. & Trivedi, P. K. (1990). Regression-based tests for overdispersion
in the Poisson model. J. Econometrics 46:347-364; and (2013) Regression Analysis
of Count Data, 2nd ed., sec. 3.4.
Ljung, G. M. & Box, G. E. P. (1978). On a measure of lack of fit in time series
models. Biometrika 65:297-303.
Durbin, J. & Watson, G. S. (1950, 1951). Testing for serial correlation in least
squares regression. Biometrika 37:409-428, 38:159-178.
Breusch, T. S. & Pagan, A. R. (1979). A simple test for heteroscedasticity.
Econometrica 47:1287-1294.
Shapiro, S. S. & Wilk, M. B. (1965). Biometrika 52:591-611; Jarque, C. M. & Bera,
A. K. (1980). Economics Letters 6:255-259.
Belsley, D. A., Kuh, E. & Welsch, R. E. (1980). Regression Diagnostics (condition
number of the column-scaled design; > 30 strong collinearity).
Cook, R. D. (1977). Detection of influential observation in linear regression.
Technometrics 19:15-18.
"""
from __future__ import annotations

from typing import Iterable

import numpy as np
from scipy import stats

from procmetrics.analyse.result import Diagnostic

DISPERSION_WARN = 1.5
DISPERSION_FAIL = 5.0
CONDITION_WARN = 30.0
CONDITION_FAIL = 1000.0
SHAPIRO_MAX_N = 5000
LARGE_N = 500


def not_applicable(name: str, method: str, reason: str) -> Diagnostic:
    """A diagnostic that does not apply to this model, with the reason."""
    return Diagnostic(name, None, "n/a", "n/a", method, reason)


def _pverdict(p: float, alpha: float) -> str:
    if not np.isfinite(p):
        return "n/a"
    return "warn" if p < alpha else "pass"


def pearson_dispersion(pearson_chi2: float, df_resid: float, *,
                       warn: float = DISPERSION_WARN, fail: float = DISPERSION_FAIL,
                       note: str = "") -> Diagnostic:
    """Pearson X2 / residual df: about 1 when the variance function is right."""
    if df_resid <= 0:
        return not_applicable("dispersion", "Pearson chi2/df", "no residual degrees of freedom")
    phi = float(pearson_chi2) / float(df_resid)
    verdict = "pass" if phi <= warn else ("warn" if phi <= fail else "fail")
    return Diagnostic("dispersion", phi, f"<= {warn} pass, <= {fail} warn, else fail",
                      verdict, "Pearson chi2/df", note)


def cameron_trivedi_stat(y: np.ndarray, mu: np.ndarray, alternative: str = "nb2"
                         ) -> tuple[float, float, float]:
    """Cameron-Trivedi auxiliary regression, computed directly.

    Regress ``z = ((y - mu)^2 - y) / mu`` without intercept on ``mu`` (NB2:
    Var = mu + a mu^2) or on a constant 1 (NB1: Var = (1 + a) mu) by OLS.

    Returns
    -------
    (alpha_hat, t, p) : OLS slope, its ordinary t statistic and the two-sided
        normal p-value (H0: a = 0, equidispersion).
    """
    y = np.asarray(y, dtype=float)
    mu = np.asarray(mu, dtype=float)
    z = ((y - mu) ** 2 - y) / mu
    x = mu if alternative == "nb2" else np.ones_like(mu)
    if alternative not in ("nb1", "nb2"):
        raise ValueError("alternative must be 'nb1' or 'nb2'")
    n = len(z)
    if n < 2:
        return np.nan, np.nan, np.nan
    sxx = float(x @ x)
    a = float(x @ z) / sxx
    resid = z - a * x
    s2 = float(resid @ resid) / (n - 1)
    se = np.sqrt(s2 / sxx)
    t = a / se if se > 0 else np.nan
    p = float(2 * stats.norm.sf(abs(t))) if np.isfinite(t) else np.nan
    return a, float(t), p


def cameron_trivedi(y: np.ndarray, mu: np.ndarray, *, alternative: str = "nb2",
                    alpha: float = 0.05) -> Diagnostic:
    """Cameron-Trivedi overdispersion test for a Poisson fit (see :func:`cameron_trivedi_stat`)."""
    a, t, p = cameron_trivedi_stat(y, mu, alternative)
    p_one = float(stats.norm.sf(t)) if np.isfinite(t) else np.nan
    verdict = "n/a" if not np.isfinite(p_one) else ("warn" if p_one < alpha else "pass")
    return Diagnostic(f"cameron_trivedi_{alternative}", t,
                      f"one-sided evidence of overdispersion at p < {alpha}", verdict,
                      f"Cameron-Trivedi auxiliary OLS ({alternative.upper()}), t statistic",
                      f"alpha_hat={a:.4g}, one-sided p={p_one:.3g}, two-sided p={p:.3g}")


def ljung_box(resid: np.ndarray, *, lags: int | None = None, alpha: float = 0.05,
              model_df: int = 0) -> Diagnostic:
    """Ljung-Box Q test for autocorrelation of residuals in time order."""
    from statsmodels.stats.diagnostic import acorr_ljungbox

    r = np.asarray(resid, dtype=float)
    r = r[np.isfinite(r)]
    n = len(r)
    if lags is None:
        lags = max(1, min(10, n // 5))
    if n < 8 or lags < 1 or np.allclose(r, r[0]):
        return not_applicable("ljung_box", "Ljung-Box Q", f"too few residuals (n={n})")
    res = acorr_ljungbox(r, lags=[lags], model_df=0)
    q = float(res["lb_stat"].iloc[-1])
    p = float(res["lb_pvalue"].iloc[-1])
    return Diagnostic("ljung_box", q, f"p >= {alpha} (lags={lags})", _pverdict(p, alpha),
                      f"Ljung-Box Q at {lags} lags", f"p={p:.3g}, n={n}")


def durbin_watson(resid: np.ndarray, *, applicable: bool = True,
                  reason: str = "") -> Diagnostic:
    """Durbin-Watson statistic; only valid for OLS without a lagged dependent variable."""
    from statsmodels.stats.stattools import durbin_watson as _dw

    if not applicable:
        return not_applicable("durbin_watson", "Durbin-Watson d",
                              reason or "valid only for OLS without lagged dependent variable")
    d = float(_dw(np.asarray(resid, dtype=float)))
    verdict = "pass" if 1.5 <= d <= 2.5 else "warn"
    return Diagnostic("durbin_watson", d, "1.5 <= d <= 2.5 (rule of thumb, common practice)",
                      verdict, "Durbin-Watson d (OLS, no lagged dependent variable)")


def breusch_pagan(resid: np.ndarray, exog: np.ndarray, *, alpha: float = 0.05,
                  applicable: bool = True, reason: str = "") -> Diagnostic:
    """Breusch-Pagan (studentized, Koenker) test; only for Gaussian models."""
    from statsmodels.stats.diagnostic import het_breuschpagan

    if not applicable:
        return not_applicable("breusch_pagan", "Breusch-Pagan LM",
                              reason or "the model's variance function is not constant "
                              "by design (not a Gaussian model)")
    exog = np.asarray(exog, dtype=float)
    if exog.shape[1] < 2:
        return not_applicable("breusch_pagan", "Breusch-Pagan LM", "no regressor besides "
                              "the constant")
    lm, p, _, _ = het_breuschpagan(np.asarray(resid, dtype=float), exog)
    return Diagnostic("breusch_pagan", float(lm), f"p >= {alpha}", _pverdict(p, alpha),
                      "Breusch-Pagan LM (studentized)", f"p={p:.3g}")


def normality(resid: np.ndarray, *, alpha: float = 0.05) -> Diagnostic:
    """Shapiro-Wilk (n <= 5000) or Jarque-Bera test of residual normality.

    At large n any test rejects trivial departures: the note gives skewness and
    excess kurtosis so the reader judges size, together with the QQ plot.
    """
    r = np.asarray(resid, dtype=float)
    r = r[np.isfinite(r)]
    n = len(r)
    if n < 3 or np.allclose(r, r[0]):
        return not_applicable("normality", "Shapiro-Wilk", f"too few residuals (n={n})")
    skew, kurt = float(stats.skew(r)), float(stats.kurtosis(r))
    if n <= SHAPIRO_MAX_N:
        stat, p = stats.shapiro(r)
        method = "Shapiro-Wilk W"
    else:
        stat, p = stats.jarque_bera(r)
        method = "Jarque-Bera"
    note = f"p={p:.3g}, n={n}, skewness={skew:.2f}, excess kurtosis={kurt:.2f}"
    if n >= LARGE_N:
        note += ("; large n: judge by effect size (skewness, kurtosis) and the QQ plot, "
                 "not by the p-value")
    return Diagnostic("normality", float(stat), f"p >= {alpha}", _pverdict(float(p), alpha),
                      method, note)


def design_checks(exog: np.ndarray, *, warn: float = CONDITION_WARN,
                  fail: float = CONDITION_FAIL) -> tuple[Diagnostic, Diagnostic]:
    """Rank and condition number of the column-scaled design matrix."""
    X = np.asarray(exog, dtype=float)
    rank = int(np.linalg.matrix_rank(X))
    k = X.shape[1]
    rd = Diagnostic("design_rank", float(rank), f"== {k} columns",
                    "pass" if rank == k else "fail", "numpy matrix_rank (SVD)",
                    "" if rank == k else "collinear columns: coefficients not identifiable")
    norms = np.linalg.norm(X, axis=0)
    norms[norms == 0] = 1.0
    sv = np.linalg.svd(X / norms, compute_uv=False)
    cond = float(sv[0] / sv[-1]) if sv[-1] > 0 else float("inf")
    verdict = "pass" if cond <= warn else ("warn" if cond <= fail else "fail")
    cd = Diagnostic("condition_number", cond if np.isfinite(cond) else None,
                    f"<= {warn:g} pass, <= {fail:g} warn", verdict,
                    "condition number of the column-scaled design (Belsley, Kuh & Welsch)")
    return rd, cd


def cooks_distance(cooks: np.ndarray) -> Diagnostic:
    """Largest Cook's distance and how many exceed the 4/n screening cut-off."""
    d = np.asarray(cooks, dtype=float)
    d = d[np.isfinite(d)]
    n = len(d)
    if n == 0:
        return not_applicable("cooks_distance", "Cook's distance", "not available")
    cut = 4.0 / n
    n_above = int((d > cut).sum())
    dmax = float(d.max())
    verdict = "pass" if dmax <= 1.0 else "warn"
    return Diagnostic("cooks_distance", dmax, "max <= 1 (4/n used for screening)", verdict,
                      "Cook's distance", f"{n_above} of {n} above 4/n={cut:.3g}")


def worst_verdict(diags: Iterable[Diagnostic]) -> str:
    """``fail`` > ``warn`` > ``pass``; ``n/a`` is ignored."""
    order = {"n/a": -1, "pass": 0, "warn": 1, "fail": 2}
    best = "pass"
    for d in diags:
        if order[d.verdict] > order[best]:
            best = d.verdict
    return best
