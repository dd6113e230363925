"""Cox proportional-hazards regression of defect lifetime, with its checks.

The model is fitted by lifelines' ``CoxPHFitter``, which handles tied times
with **Efron's** method. Before fitting, the design matrix is checked for rank
(aliased columns are dropped and named) and for events per covariate (below 10
a ``too_few_observations`` caveat is recorded). After fitting, proportional
hazards are checked with the scaled Schoenfeld-residual test
(``lifelines.statistics.proportional_hazard_test``, rank time transform,
Bonferroni over covariates). When that check fails the result says so and
carries a fallback: accelerated failure time models (Weibull and log-normal)
are fitted and the one with the lower AIC is reported
(``fallback = "weibull_aft" | "lognormal_aft"``).

``CoxResult.summary`` columns (:data:`COX_COLUMNS`): ``term``, ``coef``, ``se``,
``hazard_ratio``, ``hr_low``, ``hr_high``, ``z``, ``p``.
``CoxResult.ph_tests`` columns: ``term``, ``statistic``, ``p``.
``CoxResult.fallback_summary`` columns (:data:`AFT_COLUMNS`): ``parameter``,
``term``, ``coef``, ``se``, ``low``, ``high``, ``p``; for an AFT model a positive
``coef`` on ``mu_``/``lambda_`` means *longer* lifetimes.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
import pandas as pd

from procmetrics.analyse.result import Caveat, Diagnostic, caveat, to_plain
from procmetrics.errors import InsufficientData

COX_COLUMNS = ["term", "coef", "se", "hazard_ratio", "hr_low", "hr_high", "z", "p"]
AFT_COLUMNS = ["parameter", "term", "coef", "se", "low", "high", "p"]
LIFETIME_COVARIATES = ("subsystem", "period", "reviewed_introducer", "intro_size")


@dataclass(frozen=True)
class CoxResult:
    """A fitted Cox model with rank, events-per-covariate and PH diagnostics."""

    summary: pd.DataFrame
    n: int
    n_events: int
    ties: str
    level: float
    dropped_terms: tuple[str, ...]
    diagnostics: tuple[Diagnostic, ...]
    ph_tests: pd.DataFrame
    ph_holds: bool
    fallback: str
    fallback_summary: pd.DataFrame
    method: str
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def _full_rank(X: pd.DataFrame) -> tuple[pd.DataFrame, list[str]]:
    """Keep columns greedily while the centred rank grows; return dropped names."""
    keep: list[str] = []
    dropped: list[str] = []
    Xc = X - X.mean()
    for col in X.columns:
        trial = Xc[keep + [col]].to_numpy(float)
        if np.linalg.matrix_rank(trial) == len(keep) + 1:
            keep.append(col)
        else:
            dropped.append(col)
    return X[keep], dropped


def fit_cox(data: pd.DataFrame, duration_col: str, event_col: str | None = None, *,
            level: float = 0.95, ph_alpha: float = 0.05, fallback: bool = True) -> CoxResult:
    """Fit a Cox PH model (Efron ties) on numeric covariates and check it.

    Parameters
    ----------
    data : duration, optional event column and numeric covariate columns.
    duration_col, event_col : column names (no event column: all events).
    level : confidence level of the hazard-ratio intervals.
    ph_alpha : family-wise level of the Schoenfeld proportional-hazards test.
    fallback : fit AFT models when proportional hazards fail.

    References
    ----------
    Cox (1972), JRSS B 34; Efron (1977), JASA 72 (ties); Grambsch & Therneau
    (1994), Biometrika 81 (scaled Schoenfeld residuals); Peduzzi et al. (1995),
    J Clin Epidemiol 48 (ten events per variable).
    """
    from lifelines import CoxPHFitter
    from lifelines.statistics import proportional_hazard_test

    d = data.copy()
    if event_col is None:
        event_col = "_event"
        d[event_col] = True
    covs = [c for c in d.columns if c not in (duration_col, event_col)]
    X = d[covs].astype(float)
    const = [c for c in covs if X[c].nunique() <= 1]
    X, aliased = _full_rank(X.drop(columns=const))
    dropped = tuple(const + aliased)
    n, n_ev = len(d), int(d[event_col].astype(bool).sum())
    p = X.shape[1]
    if p == 0:
        raise InsufficientData("no covariate varies: nothing to model")
    if n_ev <= p:
        raise InsufficientData(f"{n_ev} events for {p} covariates: cannot fit")
    diags = [Diagnostic("design_rank", float(p), "full column rank after dropping "
                        "constant/aliased columns", "pass" if not dropped else "warn",
                        "numpy.linalg.matrix_rank of the centred design",
                        "dropped: " + ", ".join(dropped) if dropped else "")]
    epv = n_ev / p
    diags.append(Diagnostic("events_per_covariate", epv, ">= 10", "pass" if epv >= 10 else
                            "warn", "events / number of covariates (Peduzzi et al. 1995)"))
    cav: list[Caveat] = []
    if dropped:
        cav.append(caveat("diagnostic_failed", "design matrix columns dropped (constant or "
                          "aliased): " + ", ".join(dropped), "info"))
    if epv < 10:
        cav.append(caveat("too_few_observations", f"{n_ev} events for {p} covariates "
                          f"({epv:.1f} per covariate, fewer than 10): estimates unstable"))
    fd = pd.concat([d[[duration_col, event_col]].reset_index(drop=True),
                    X.reset_index(drop=True)], axis=1)
    cph = CoxPHFitter(alpha=1 - level)
    cph.fit(fd, duration_col=duration_col, event_col=event_col)
    s = cph.summary
    lo_col = [c for c in s.columns if c.startswith("exp(coef) lower")][0]
    hi_col = [c for c in s.columns if c.startswith("exp(coef) upper")][0]
    summary = pd.DataFrame({
        "term": s.index.astype(str), "coef": s["coef"].to_numpy(),
        "se": s["se(coef)"].to_numpy(), "hazard_ratio": s["exp(coef)"].to_numpy(),
        "hr_low": s[lo_col].to_numpy(), "hr_high": s[hi_col].to_numpy(),
        "z": s["z"].to_numpy(), "p": s["p"].to_numpy()})[COX_COLUMNS]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ph = proportional_hazard_test(cph, fd, time_transform="rank").summary
    ph_tests = pd.DataFrame({"term": ph.index.astype(str),
                             "statistic": ph["test_statistic"].to_numpy(),
                             "p": ph["p"].to_numpy()})
    p_min = float(ph_tests["p"].min())
    ph_holds = bool(p_min * len(ph_tests) >= ph_alpha)
    diags.append(Diagnostic("schoenfeld_min_p", p_min, f"Bonferroni p >= {ph_alpha}",
                            "pass" if ph_holds else "fail",
                            "scaled Schoenfeld residuals vs rank of time (Grambsch-Therneau)"))
    fb, fb_sum = "none", pd.DataFrame(columns=AFT_COLUMNS)
    if not ph_holds:
        cav.append(caveat("diagnostic_failed", "proportional hazards rejected for "
                          + ", ".join(ph_tests.loc[ph_tests["p"] * len(ph_tests) < ph_alpha,
                                                   "term"])
                          + ("; see the AFT fallback" if fallback else "")))
        if fallback:
            fb, fb_sum = _aft_fallback(fd, duration_col, event_col, level)
    return CoxResult(summary, n, n_ev, "efron", level, dropped, tuple(diags), ph_tests,
                     ph_holds, fb, fb_sum,
                     "Cox proportional hazards, partial likelihood with Efron ties (lifelines "
                     "CoxPHFitter)", tuple(cav))


def _aft_fallback(fd: pd.DataFrame, duration_col: str, event_col: str,
                  level: float) -> tuple[str, pd.DataFrame]:
    from lifelines import LogNormalAFTFitter, WeibullAFTFitter

    fd = fd.copy()
    t = fd[duration_col].astype(float)
    pos = t[t > 0]
    # AFT needs positive times: zero lifetimes become half the smallest positive one
    fd[duration_col] = np.where(t > 0, t, (pos.min() / 2) if len(pos) else 1e-3)
    fits = {}
    for name, cls in (("weibull_aft", WeibullAFTFitter), ("lognormal_aft", LogNormalAFTFitter)):
        try:
            fits[name] = cls(alpha=1 - level).fit(fd, duration_col=duration_col,
                                                  event_col=event_col)
        except Exception:  # noqa: BLE001 - a failed fallback fit is reported, not fatal
            continue
    if not fits:
        return "none (AFT fits failed)", pd.DataFrame(columns=AFT_COLUMNS)
    best = min(fits, key=lambda k: fits[k].AIC_)
    s = fits[best].summary.reset_index()
    lo = [c for c in s.columns if c.startswith("coef lower")][0]
    hi = [c for c in s.columns if c.startswith("coef upper")][0]
    out = pd.DataFrame({"parameter": s["param"].astype(str), "term": s["covariate"].astype(str),
                        "coef": s["coef"], "se": s["se(coef)"], "low": s[lo], "high": s[hi],
                        "p": s["p"]})
    return f"{best} (lower AIC of Weibull and log-normal AFT)", out[AFT_COLUMNS]


def lifetime_design(defects: pd.DataFrame,
                    covariates: Sequence[str] = LIFETIME_COVARIATES) -> pd.DataFrame:
    """Numeric design for :func:`fit_cox` from defect rows.

    Categorical ``subsystem`` and ``period`` become indicator columns against
    the most frequent level (named ``subsystem[x]``); ``reviewed_introducer``
    becomes 0/1 (rows with NA dropped); ``intro_size`` is ``log1p`` of the
    introducer's changed lines, or of its changed files when lines were not
    mined. Columns ``lifetime`` and ``event`` come first.
    """
    d = defects.copy()
    out = pd.DataFrame({"lifetime": d["lifetime"].astype(float), "event": True}, index=d.index)
    for cov in covariates:
        if cov in ("subsystem", "period"):
            ref = d[cov].value_counts().sort_index().idxmax()   # ties: first by name
            for lv in sorted(set(d[cov]) - {ref}):
                out[f"{cov}[{lv}]"] = (d[cov] == lv).astype(float)
        elif cov == "reviewed_introducer":
            out[cov] = d[cov].astype("Float64")
        elif cov == "intro_size":
            lines = d["intro_lines"].astype("Float64")
            size = lines if lines.notna().any() else d["intro_files"].astype("Float64")
            out["log1p_intro_size"] = np.log1p(size.astype(float))
        else:
            out[cov] = d[cov].astype(float)
    return out.dropna().astype({c: float for c in out.columns if c not in ("event",)})


def fit_lifetime_cox(defects: pd.DataFrame, *, covariates: Sequence[str] = LIFETIME_COVARIATES,
                     level: float = 0.95, ph_alpha: float = 0.05) -> CoxResult:
    """Cox model of defect lifetime on subsystem, period, review and change size.

    Pass horizon-restricted defects
    (:func:`procmetrics.analyse.lifetime_analysis.restrict_to_horizon`) so the
    cohorts had equal chance to show long lifetimes; otherwise a
    ``truncation_bias`` caveat is attached.

    References
    ----------
    Cox (1972); Efron (1977); Grambsch & Therneau (1994).
    """
    X = lifetime_design(defects, covariates)
    res = fit_cox(X, "lifetime", "event", level=level, ph_alpha=ph_alpha)
    cav = list(res.caveats)
    if "window" in defects and (defects["lifetime"] > defects["window"].min()).any():
        cav.append(caveat("truncation_bias", "the defects were not restricted to a common "
                          "follow-up horizon; hazard ratios mix truncation with real effects"))
    return CoxResult(**{**res.__dict__, "caveats": tuple(cav)})
