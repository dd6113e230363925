"""Cox proportional-hazards regression of defect lifetime, with its checks.

The model is fitted by lifelines' ``CoxPHFitter``, which handles tied times
with **Efron's** method. Before fitting, the design matrix is checked for rank
(aliased columns are dropped and named) and for events per covariate (below 10
a ``too_few_observations`` caveat is recorded). After fitting, proportional
hazards are checked with the scaled Schoenfeld-residual test
(``lifelines.statistics.proportional_hazard_test``, rank time transform,
Bonferroni over covariates).

When that check fails (and ``fallback=True``) two remedies are tried and both
are kept on the result:

* **Stratification** on the failing covariates that are *categorical* (a
  group of indicator columns named ``name[level]``, as
  :func:`lifetime_design` builds them, or a column with two values): a Cox
  model with a separate baseline hazard per stratum
  (``CoxPHFitter.fit(..., strata=[...])``), which makes no proportionality
  assumption about the stratifying covariate but gives no coefficient for it.
  Its Schoenfeld test is re-run.
* **Accelerated failure time** models (Weibull and log-normal); the one with
  the lower AIC is kept. The log-normal AFT does not assume proportional
  hazards; the Weibull AFT is also a PH model.

``CoxResult.fallback`` names the remedy the result recommends and
``fallback_reason`` says why: the stratified model when it exists and passes
its re-test, otherwise the AFT model (e.g. because a failing covariate is
continuous and cannot become a stratum).

``CoxResult.summary`` and ``stratified_summary`` columns (:data:`COX_COLUMNS`):
``term``, ``coef``, ``se``, ``hazard_ratio``, ``hr_low``, ``hr_high``, ``z``,
``p``. ``CoxResult.ph_tests`` and ``stratified_ph_tests`` columns
(:data:`PH_COLUMNS`): ``term``, ``statistic``, ``p``.
``CoxResult.aft_summary`` columns (:data:`AFT_COLUMNS`): ``parameter``,
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
PH_COLUMNS = ["term", "statistic", "p"]
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
    aft_summary: pd.DataFrame
    method: str
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)
    fallback_reason: str = ""
    strata: tuple[str, ...] = ()
    stratified_summary: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame(columns=COX_COLUMNS))
    stratified_ph_tests: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame(columns=PH_COLUMNS))
    stratified_ph_holds: bool | None = None
    aft_model: str = ""

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)

    @property
    def fallback_summary(self) -> pd.DataFrame:
        """The AFT summary (older name of :attr:`aft_summary`)."""
        return self.aft_summary


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
            level: float = 0.95, ph_alpha: float = 0.05, fallback: bool = True,
            categorical: Sequence[str] | None = None) -> CoxResult:
    """Fit a Cox PH model (Efron ties) on numeric covariates and check it.

    Parameters
    ----------
    data : duration, optional event column and numeric covariate columns.
    duration_col, event_col : column names (no event column: all events).
    level : confidence level of the hazard-ratio intervals.
    ph_alpha : family-wise level of the Schoenfeld proportional-hazards test.
    fallback : when proportional hazards fail, fit a model stratified on the
        failing categorical covariates and AFT models, and say which to use.
    categorical : covariates that may become strata (group names such as
        ``subsystem`` or column names); default: every ``name[level]`` group
        and every two-valued column.

    References
    ----------
    Cox (1972), JRSS B 34; Efron (1977), JASA 72 (ties); Grambsch & Therneau
    (1994), Biometrika 81 (scaled Schoenfeld residuals); Peduzzi et al. (1995),
    J Clin Epidemiol 48 (ten events per variable); Therneau & Grambsch (2000),
    Modeling Survival Data, sec. 6.6 (stratification for non-proportional
    covariates); Kalbfleisch & Prentice (2002), ch. 7 (AFT models).
    """
    from lifelines import CoxPHFitter

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
    summary = _cox_summary(cph)
    ph_tests = _ph_tests(cph, fd)
    ph_holds, p_min = _ph_verdict(ph_tests, ph_alpha)
    diags.append(Diagnostic("schoenfeld_min_p", p_min, f"Bonferroni p >= {ph_alpha}",
                            "pass" if ph_holds else "fail",
                            "scaled Schoenfeld residuals vs rank of time (Grambsch-Therneau)"))
    extra: dict[str, Any] = {}
    fb, aft_sum = "none", pd.DataFrame(columns=AFT_COLUMNS)
    if not ph_holds:
        failing = list(ph_tests.loc[ph_tests["p"] * len(ph_tests) < ph_alpha, "term"])
        cav.append(caveat("diagnostic_failed", "proportional hazards rejected for "
                          + ", ".join(failing)
                          + ("; see the stratified and AFT fallbacks" if fallback else "")))
        if fallback:
            groups = categorical_groups(list(X.columns), X, categorical)
            strat = _stratified_fallback(fd, duration_col, event_col, failing, groups,
                                         level, ph_alpha)
            aft_name, aft_sum = _aft_fallback(fd, duration_col, event_col, level)
            fb, reason = _choose(failing, groups, strat, aft_name, ph_alpha)
            extra = {"fallback_reason": reason, "aft_model": aft_name}
            if strat.get("summary") is not None:
                extra.update(strata=tuple(strat["strata"]),
                             stratified_summary=strat["summary"],
                             stratified_ph_tests=strat["ph_tests"],
                             stratified_ph_holds=strat["ph_holds"])
                diags.append(Diagnostic(
                    "schoenfeld_min_p_stratified", strat["p_min"],
                    f"Bonferroni p >= {ph_alpha}", "pass" if strat["ph_holds"] else "fail",
                    "scaled Schoenfeld residuals of the model stratified by "
                    + ", ".join(strat["strata"])))
    return CoxResult(summary, n, n_ev, "efron", level, dropped, tuple(diags), ph_tests,
                     ph_holds, fb, aft_sum,
                     "Cox proportional hazards, partial likelihood with Efron ties (lifelines "
                     "CoxPHFitter)", tuple(cav), **extra)


def _cox_summary(cph: Any) -> pd.DataFrame:
    s = cph.summary
    lo_col = [c for c in s.columns if c.startswith("exp(coef) lower")][0]
    hi_col = [c for c in s.columns if c.startswith("exp(coef) upper")][0]
    return pd.DataFrame({
        "term": s.index.astype(str), "coef": s["coef"].to_numpy(),
        "se": s["se(coef)"].to_numpy(), "hazard_ratio": s["exp(coef)"].to_numpy(),
        "hr_low": s[lo_col].to_numpy(), "hr_high": s[hi_col].to_numpy(),
        "z": s["z"].to_numpy(), "p": s["p"].to_numpy()})[COX_COLUMNS]


def _ph_tests(cph: Any, fd: pd.DataFrame) -> pd.DataFrame:
    from lifelines.statistics import proportional_hazard_test

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ph = proportional_hazard_test(cph, fd, time_transform="rank").summary
    return pd.DataFrame({"term": ph.index.astype(str),
                         "statistic": ph["test_statistic"].to_numpy(),
                         "p": ph["p"].to_numpy()})[PH_COLUMNS]


def _ph_verdict(ph_tests: pd.DataFrame, ph_alpha: float) -> tuple[bool, float]:
    p_min = float(ph_tests["p"].min())
    return bool(p_min * len(ph_tests) >= ph_alpha), p_min


def categorical_groups(columns: Sequence[str], X: pd.DataFrame,
                       categorical: Sequence[str] | None = None) -> dict[str, list[str]]:
    """Covariates that may become strata: name -> its design columns.

    Indicator columns ``name[level]`` form one group ``name``; any other column
    with exactly two distinct values is a group of its own. With
    ``categorical`` given, only the named groups (or columns) are kept.
    """
    groups: dict[str, list[str]] = {}
    for col in columns:
        if col.endswith("]") and "[" in col:
            groups.setdefault(col[:col.index("[")], []).append(col)
        elif X[col].nunique() == 2:
            groups[col] = [col]
    if categorical is not None:
        groups = {k: v for k, v in groups.items() if k in set(categorical)}
    return groups


def _stratum_labels(fd: pd.DataFrame, cols: list[str]) -> np.ndarray:
    """One integer label per row from a group of exclusive indicators (0 = reference)."""
    if len(cols) == 1:
        return pd.factorize(fd[cols[0]], sort=True)[0]
    return (fd[cols].to_numpy(float) * np.arange(1, len(cols) + 1)).sum(axis=1).round().astype(int)


def _stratified_fallback(fd: pd.DataFrame, duration_col: str, event_col: str,
                         failing: list[str], groups: dict[str, list[str]], level: float,
                         ph_alpha: float) -> dict[str, Any]:
    """Cox model stratified on the failing categorical covariates, with its PH re-test."""
    from lifelines import CoxPHFitter

    owner = {c: g for g, cols in groups.items() for c in cols}
    strata = sorted({owner[t] for t in failing if t in owner})
    if not strata:
        return {"strata": [], "summary": None, "why": "no failing covariate is categorical"}
    drop = [c for g in strata for c in groups[g]]
    sd = fd.drop(columns=drop)
    if sd.shape[1] <= 2:
        return {"strata": strata, "summary": None,
                "why": "no covariate is left to estimate once the strata are removed"}
    names = [f"stratum:{g}" for g in strata]
    for g, name in zip(strata, names):
        sd[name] = _stratum_labels(fd, groups[g])
    try:
        cph = CoxPHFitter(alpha=1 - level).fit(sd, duration_col=duration_col,
                                                 event_col=event_col, strata=names)
        ph_tests = _ph_tests(cph, sd)
    except Exception as exc:  # noqa: BLE001 - a failed fallback fit is reported, not fatal
        return {"strata": strata, "summary": None,
                "why": f"the stratified fit failed ({exc.__class__.__name__})"}
    holds, p_min = _ph_verdict(ph_tests, ph_alpha)
    return {"strata": strata, "summary": _cox_summary(cph), "ph_tests": ph_tests,
            "ph_holds": holds, "p_min": p_min, "why": ""}


def _choose(failing: list[str], groups: dict[str, list[str]], strat: dict[str, Any],
            aft_name: str, ph_alpha: float) -> tuple[str, str]:
    """Which fallback the result recommends, and why, in plain words."""
    owner = {c: g for g, cols in groups.items() for c in cols}
    cont = [t for t in failing if t not in owner]
    head = "proportional hazards rejected for " + ", ".join(failing)
    aft_note = ("; the log-normal AFT does not assume proportional hazards"
                if aft_name.startswith("lognormal") else
                "; note the Weibull AFT is itself a proportional-hazards model"
                if aft_name.startswith("weibull") else "")
    if strat.get("summary") is not None:
        sname = ", ".join(strat["strata"])
        if strat["ph_holds"]:
            return (f"stratified_cox (strata: {sname})",
                    f"{head}; {sname} is categorical and became a stratum (own baseline "
                    "hazard, no coefficient); the stratified model passes its Schoenfeld "
                    f"re-test (min p = {strat['p_min']:.3g}, Bonferroni)"
                    + (f"; {', '.join(cont)} (not categorical) also passes the re-test of the "
                       "stratified model" if cont else "") + f". AFT alternative kept: {aft_name}")
        pt = strat["ph_tests"]
        bad = ", ".join(pt.loc[pt["p"] * len(pt) < ph_alpha, "term"])
        return (aft_name, f"{head}; stratified by {sname}, the Schoenfeld re-test still "
                f"rejects {bad} (min p = {strat['p_min']:.3g}), so the AFT model is "
                f"recommended{aft_note}; the stratified fit is kept for comparison")
    why = strat.get("why", "")
    return (aft_name, f"{head}; no stratified model ({why}"
            + (f": {', '.join(cont)} not categorical" if cont and not strat["strata"] else "")
            + f"), so the AFT model is recommended{aft_note}")


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
    (:func:`procmetrics.analyse.lifetimes.analysis.restrict_to_horizon`) so the
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
