"""Fit one regression with the right family, dispersion handling and diagnostics.

Shared by the trend (:mod:`procmetrics.analyse.change.trend`) and the interrupted time
series (:mod:`procmetrics.analyse.change.its`). ``kind`` chooses the family:

* ``"proportion"``: binomial GLM (logit) on successes out of trials; when the
  Pearson dispersion exceeds ``dispersion_threshold`` the same GLM is refitted
  as quasi-binomial (scale = Pearson X2/df).
* ``"count"``: Poisson GLM (log) with offset ``log(exposure)``; when
  overdispersed, negative binomial (NB2) with alpha ESTIMATED by maximum
  likelihood (statsmodels discrete ``NegativeBinomial``), then a GLM with that
  alpha for residuals, influence and robust covariances. If that estimation
  fails, quasi-Poisson.
* ``"continuous"``: OLS (Gaussian), with Durbin-Watson, Breusch-Pagan and a
  normality test.

Rows must be in time order: with ``hac="auto"`` residual autocorrelation
(Ljung-Box) switches the covariance to HAC (Newey-West).

References
----------
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed.
Cameron, A. C. & Trivedi, P. K. (2013). Regression Analysis of Count Data, 2nd ed.
Newey, W. K. & West, K. D. (1987, 1994). Econometrica 55:703-708; Review of
Economic Studies 61:631-653 (lag rule floor(4 (n/100)^(2/9))).
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
import pandas as pd
import statsmodels.api as sm
from scipy import stats
from scipy.special import expit
from statsmodels.tools.sm_exceptions import ConvergenceWarning, PerfectSeparationWarning

from procmetrics.analyse import diagnostics as dg
from procmetrics.analyse.result import Caveat, Diagnostic, Estimate, caveat, to_plain
from procmetrics.errors import InsufficientData

KINDS = ("proportion", "count", "continuous")


@dataclass(frozen=True)
class ModelFit:
    """A fitted regression: coefficients with intervals, diagnostics and caveats.

    ``params`` columns: ``term``, ``estimate``, ``std_error``, ``ci_low``,
    ``ci_high``, ``p_value`` (link scale). ``residuals`` columns: ``observed``,
    ``fitted`` (response scale: proportion, rate per exposure unit, or value),
    ``resid_pearson``, ``resid_response``, ``cooks``.
    """

    model: str
    kind: str
    link: str
    cov_type: str
    params: pd.DataFrame
    cov: tuple[tuple[float, ...], ...]
    scale: float
    dispersion_initial: float | None
    nb_alpha: Estimate | None
    n_obs: int
    n_units: float
    df_resid: float
    level: float
    residuals: pd.DataFrame
    diagnostics: tuple[Diagnostic, ...]
    caveats: tuple[Caveat, ...] = field(default=())
    deviance: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)

    def predict(self, exog: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Mean on the response scale (per unit of exposure) with a Wald interval.

        The interval is computed on the link scale and transformed back.
        """
        X = np.atleast_2d(np.asarray(exog, dtype=float))
        b = self.params["estimate"].to_numpy(dtype=float)
        V = np.asarray(self.cov, dtype=float)
        eta = X @ b
        se = np.sqrt(np.einsum("ij,jk,ik->i", X, V, X))
        z = stats.norm.ppf(0.5 + self.level / 2)
        inv = _INVERSE[self.link]
        return inv(eta), inv(eta - z * se), inv(eta + z * se)


_INVERSE = {
    "logit": expit,   # overflow-free inverse logit
    "log": np.exp,
    "identity": lambda e: e,
}


def newey_west_lags(n: int) -> int:
    """Newey-West (1994) automatic lag: floor(4 (n/100)^(2/9)), at least 1."""
    return max(1, int(np.floor(4 * (n / 100.0) ** (2.0 / 9.0))))


def _fit_quiet(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        warnings.simplefilter("ignore", PerfectSeparationWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        return fn(*args, **kwargs)


def _cov_kwargs(use_hac: bool, n: int) -> tuple[dict[str, Any], str]:
    if use_hac:
        lags = newey_west_lags(n)
        return ({"cov_type": "HAC", "cov_kwds": {"maxlags": lags}},
                f"HAC (Newey-West, maxlags={lags})")
    return {}, "nonrobust"


def estimate_nb_alpha(y: np.ndarray, X: np.ndarray, offset: np.ndarray | None,
                      level: float = 0.95) -> Estimate | None:
    """NB2 dispersion alpha by maximum likelihood (Var = mu + alpha mu^2).

    Returns ``None`` when the likelihood does not converge to a positive alpha.
    """
    from statsmodels.discrete.discrete_model import NegativeBinomial

    mod = NegativeBinomial(y, X, loglike_method="nb2", offset=offset)
    res = None
    for method in ("bfgs", "nm"):
        try:
            r = _fit_quiet(mod.fit, method=method, maxiter=5000, disp=0)
        except (np.linalg.LinAlgError, ValueError):
            continue
        if np.all(np.isfinite(r.params)) and r.params[-1] > 1e-8:
            res = r
            break
    if res is None:
        return None
    a = float(res.params[-1])
    se = float(np.asarray(res.bse)[-1]) if np.isfinite(np.asarray(res.bse)[-1]) else np.nan
    z = stats.norm.ppf(0.5 + level / 2)
    se_log = se / a if np.isfinite(se) else np.nan
    lo = a * np.exp(-z * se_log) if np.isfinite(se_log) else None
    hi = a * np.exp(z * se_log) if np.isfinite(se_log) else None
    return Estimate("nb_alpha", a, lo, hi, level,
                    "NB2 maximum likelihood; Wald interval on log(alpha)", len(y))


def fit_model(endog: np.ndarray, exog: np.ndarray, *, kind: str,
              trials: np.ndarray | None = None, exposure: np.ndarray | None = None,
              names: Sequence[str] | None = None, alpha: float = 0.05,
              dispersion_threshold: float = dg.DISPERSION_WARN,
              hac: str = "auto", detail: bool = True) -> ModelFit:
    """Fit ``endog ~ exog`` with the family for ``kind`` and run the diagnostics.

    Parameters
    ----------
    endog : successes (proportion), counts (count) or values (continuous).
    exog : design matrix including the constant column.
    trials : number of trials per row (proportion only).
    exposure : exposure per row for counts (offset ``log(exposure)``), or None.
    names : names of the design columns.
    alpha : 1 - interval level, and the level of the diagnostic tests.
    dispersion_threshold : Pearson X2/df above which the binomial/Poisson model
        is replaced (quasi-binomial, negative binomial).
    hac : ``"auto"`` (HAC when Ljung-Box flags autocorrelation), ``"always"``
        or ``"never"``.
    detail : ``False`` skips what only describes the fit (Durbin-Watson,
        Breusch-Pagan, normality, design and Cook's distance diagnostics, and the
        caveats drawn from them; ``cooks`` is NaN): for callers that read only the
        coefficients and their intervals, which are the same either way.

    Raises
    ------
    InsufficientData
        Fewer rows than coefficients + 2, or no variation in the outcome.

    References
    ----------
    See the module docstring.
    """
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {KINDS}")
    y = np.asarray(endog, dtype=float)
    X = np.asarray(exog, dtype=float)
    n, k = X.shape
    names = list(names) if names is not None else [f"x{i}" for i in range(k)]
    if n < k + 2:
        raise InsufficientData(f"{n} observations for {k} coefficients: need at least {k + 2}")
    level = 1 - alpha
    diags: list[Diagnostic] = []
    notes: list[str] = []
    phi0: float | None = None
    nb_alpha: Estimate | None = None
    offset = None
    if kind == "proportion":
        m = np.asarray(trials, dtype=float)
        if y.sum() == 0 or y.sum() == m.sum():
            raise InsufficientData("the proportion is 0 or 1 in every period: no trend to fit")
        endog2 = np.column_stack([y, m - y])
        glm = sm.GLM(endog2, X, family=sm.families.Binomial())
        base = _fit_quiet(glm.fit)
        phi0 = float(base.pearson_chi2 / base.df_resid)
        quasi = phi0 > dispersion_threshold
        model, link, units = ("quasi-binomial GLM (logit, scale = Pearson X2/df)" if quasi
                              else "binomial GLM (logit)"), "logit", float(m.sum())
        # Pass the dispersion as a number: with a two-column (successes, failures)
        # endog, statsmodels' scale="X2" is computed on the proportion scale without
        # the binomial weights and comes out far too small (measured: 0.015 where
        # Pearson X2/df is 3.0), which would make quasi-binomial intervals narrower
        # than binomial ones instead of wider.
        fit_kw: dict[str, Any] = {"scale": phi0} if quasi else {}
        diags.append(dg.pearson_dispersion(base.pearson_chi2, base.df_resid,
                                           warn=dispersion_threshold,
                                           note="switched to quasi-binomial" if quasi else ""))
        observed = y / m
    elif kind == "count":
        if y.sum() == 0:
            raise InsufficientData("no events in any period: no trend to fit")
        offset = np.log(np.asarray(exposure, dtype=float)) if exposure is not None else None
        glm = sm.GLM(y, X, family=sm.families.Poisson(), offset=offset)
        base = _fit_quiet(glm.fit)
        phi0 = float(base.pearson_chi2 / base.df_resid)
        mu0 = base.fittedvalues
        diags.append(dg.cameron_trivedi(y, mu0, alternative="nb2", alpha=alpha))
        diags.append(dg.cameron_trivedi(y, mu0, alternative="nb1", alpha=alpha))
        overdispersed = phi0 > dispersion_threshold
        model, link, units, fit_kw = "Poisson GLM (log)", "log", float(y.sum()), {}
        if overdispersed:
            nb_alpha = estimate_nb_alpha(y, X, offset, level)
            if nb_alpha is not None:
                glm = sm.GLM(y, X, family=sm.families.NegativeBinomial(alpha=nb_alpha.value),
                             offset=offset)
                model = f"negative binomial NB2 GLM (log, alpha={nb_alpha.value:.3g} by MLE)"
            else:
                fit_kw = {"scale": phi0}
                model = "quasi-Poisson GLM (log, scale = Pearson X2/df)"
                notes.append("NB2 alpha did not converge; quasi-Poisson used")
        diags.insert(0, dg.pearson_dispersion(
            base.pearson_chi2, base.df_resid, warn=dispersion_threshold,
            note=("switched to " + model.split(" GLM")[0]) if overdispersed else ""))
        if offset is not None:
            model += ", offset log(exposure)"
        ex = np.asarray(exposure, dtype=float) if exposure is not None else np.ones(n)
        observed = y / ex
    else:
        glm = sm.OLS(y, X)
        model, link, units, fit_kw = "OLS (Gaussian)", "identity", float(n), {}
        observed = y
        base = None
    # the first fit already is the final one when the model and its options are unchanged
    # (the fit is deterministic: the same call gives the same result)
    same = base is not None and not fit_kw and glm is base.model
    res = base if same else _fit_quiet(glm.fit, **fit_kw)
    resid_p = _pearson(res, kind)
    lb = dg.ljung_box(resid_p, alpha=alpha, model_df=0)
    use_hac = hac == "always" or (hac == "auto" and lb.verdict == "warn")
    if use_hac:
        ckw, cov_label = _cov_kwargs(True, n)
        try:
            res = _fit_quiet(glm.fit, **fit_kw, **ckw)
        except np.linalg.LinAlgError as exc:
            # the residuals are autocorrelated, so the plain standard errors would be too
            # narrow; without the HAC ones no interval can be given (a weighted design
            # that is singular: e.g. a share of 0 or 1 in most periods of a small subsystem)
            raise InsufficientData(
                "the residuals are autocorrelated but the autocorrelation-robust (HAC) "
                f"covariance cannot be computed ({exc}): no interval is given") from exc
        if hac == "auto":
            notes.append("residual autocorrelation: HAC standard errors")
    else:
        cov_label = "nonrobust"
    diags.append(lb)
    if kind == "count" and nb_alpha is not None:
        diags.append(Diagnostic("dispersion_final", float(res.pearson_chi2 / res.df_resid),
                                f"<= {dispersion_threshold} pass", "pass" if
                                res.pearson_chi2 / res.df_resid <= dispersion_threshold
                                else "warn", "Pearson chi2/df of the NB2 fit"))
    gaussian = kind == "continuous"
    cooks = np.full(n, np.nan)
    cavs: list[Caveat] = []
    if detail:
        resid_r = np.asarray(res.resid_response if hasattr(res, "resid_response")
                             else res.resid, dtype=float)
        diags.append(dg.durbin_watson(resid_r, applicable=gaussian,
                                      reason="" if gaussian else
                                      "not an OLS model; autocorrelation judged by Ljung-Box"))
        diags.append(dg.breusch_pagan(resid_r, X, alpha=alpha, applicable=gaussian))
        diags.append(dg.normality(resid_r, alpha=alpha) if gaussian else dg.not_applicable(
            "normality", "Shapiro-Wilk", "normal residuals are not assumed by this GLM"))
        diags.extend(dg.design_checks(X))
        try:
            cooks = np.asarray(res.get_influence().cooks_distance[0], dtype=float)
        except (AttributeError, ValueError, np.linalg.LinAlgError):
            pass
        diags.append(dg.cooks_distance(cooks))
        remedied = {"ljung_box"} if use_hac else set()
        if phi0 is not None and phi0 > dispersion_threshold:
            remedied |= {"dispersion", "cameron_trivedi_nb2", "cameron_trivedi_nb1"}
        cavs = _caveats(diags, n, k, remedied)
    z = stats.norm.ppf(1 - alpha / 2) if not gaussian else stats.t.ppf(1 - alpha / 2,
                                                                       res.df_resid)
    b, se = np.asarray(res.params, dtype=float), np.asarray(res.bse, dtype=float)
    pvals = np.asarray(res.pvalues, dtype=float)
    params = pd.DataFrame({"term": names, "estimate": b, "std_error": se,
                           "ci_low": b - z * se, "ci_high": b + z * se, "p_value": pvals})
    fitted = _fitted_response(res, kind, offset)
    residuals = pd.DataFrame({"observed": observed, "fitted": fitted,
                              "resid_pearson": _pearson(res, kind),
                              "resid_response": observed - fitted, "cooks": cooks})
    if notes:
        model += "; " + "; ".join(notes)
    return ModelFit(model=model, kind=kind, link=link, cov_type=cov_label, params=params,
                    cov=tuple(tuple(map(float, r)) for r in np.asarray(res.cov_params())),
                    scale=float(res.scale), dispersion_initial=phi0, nb_alpha=nb_alpha,
                    n_obs=n, n_units=units, df_resid=float(res.df_resid), level=level,
                    residuals=residuals, diagnostics=tuple(diags), caveats=tuple(cavs),
                    deviance=float(getattr(res, "deviance", np.nan))
                    if hasattr(res, "deviance") else float(res.ssr))


def _pearson(res, kind: str) -> np.ndarray:
    if kind == "continuous":
        r = np.asarray(res.resid, dtype=float)
        s = np.sqrt(res.scale) if res.scale > 0 else 1.0
        return r / s
    return np.asarray(res.resid_pearson, dtype=float)


def _fitted_response(res, kind: str, offset: np.ndarray | None) -> np.ndarray:
    mu = np.asarray(res.fittedvalues, dtype=float)
    if kind == "count" and offset is not None:
        return mu / np.exp(offset)
    return mu


def _caveats(diags: Sequence[Diagnostic], n: int, k: int, remedied: set[str]
             ) -> list[Caveat]:
    cavs: list[Caveat] = []
    failed = [d.name for d in diags if d.verdict == "fail" and d.name not in remedied]
    open_warn = [d.name for d in diags if d.verdict == "warn" and d.name not in remedied]
    if failed:
        cavs.append(caveat("diagnostic_failed", "failed: " + ", ".join(failed), "fail"))
    if open_warn:
        cavs.append(caveat("diagnostic_failed", "warning not remedied by the model: "
                           + ", ".join(open_warn), "warn"))
    if n < 8:
        cavs.append(caveat("too_few_observations",
                           f"{n} periods for {k} coefficients: diagnostics have little power"))
    return cavs
