"""Defect-lifetime analysis per group: curves, quantile summaries, comparisons.

This module turns a :class:`~procmetrics.analyse.lifetimes.defects.DefectTable` into
what a report shows:

* for the whole history and per group (``subsystem`` or ``period``): the naive
  Kaplan–Meier/ECDF curve beside the truncation-aware (Lynden-Bell) curve, each
  with a band and a cut point where fewer than ``min_at_risk`` remain;
* quantiles 25/50/75/90 with intervals and n (never a mean alone);
* comparisons between groups (log-rank) restricted to a *common follow-up
  horizon* ``H``: only defects introduced at least ``H`` before the end of the
  history, and only lifetimes up to ``H``. For those cohorts every lifetime
  ``<= H`` was observable, so the comparison is free of truncation bias; the
  numbers describe the distribution of lifetime *given* lifetime ``<= H``;
* beside that log-rank test, a *stratified* log-rank test on the same cohort
  with the other grouping variable as strata (periods compared within
  subsystems, subsystems within periods), so a difference between periods is
  not just a change in the subsystem mix (``stratified_comparison``). Both are
  reported; when they disagree a caveat says so.

Negative lifetimes (clock skew) are excluded from every estimator and counted
(``n_negative_excluded``).

Table columns
-------------
``LifetimeAnalysis.summary`` (:data:`SUMMARY_COLUMNS`): ``group``, ``method``
(``naive`` | ``truncation_aware`` | ``horizon``), ``quantile``, ``value``,
``low``, ``high``, ``level``, ``n``, ``unit``, and the support of each
quantile (see :mod:`procmetrics.analyse.lifetimes.quantiles`): ``at_risk``,
``supported`` (False: beyond what the data support; ``value`` is then empty),
``support_limit``, ``range_low``, ``range_high``, ``high_open`` (the upper
end of the interval lies beyond the support; ``high`` is then empty).

``LifetimeAnalysis.headline`` (:data:`procmetrics.analyse.lifetimes.horizon.HEADLINE_COLUMNS`):
the headline figures, conditional on lifetime <= the horizon chosen by the
stated rule (``horizon_choice``), per group.

``LifetimeAnalysis.sensitivity``
(:data:`procmetrics.analyse.lifetimes.sensitivity.SENSITIVITY_COLUMNS`): the
headline figures of all defects, re-estimated for later link-era starts.

``LifetimeAnalysis.curves`` (:data:`CURVES_COLUMNS`): ``group``, ``method`` and
the curve columns of :data:`procmetrics.analyse.lifetimes.estimators.CURVE_COLUMNS`.

``LifetimeAnalysis.groups`` (:data:`GROUP_COLUMNS`): ``group``, ``method``,
``n``, ``cut_time``, ``band_method``, ``population``, ``truncation`` (which
truncation the estimator models: ``none``, ``right`` or ``both ends``).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd

from procmetrics.analyse.lifetimes.defects import DefectTable, lifetimes_for_estimation
from procmetrics.analyse.lifetimes.double import NotIdentifiable
from procmetrics.analyse.lifetimes.estimators import (
    CURVE_COLUMNS, kaplan_meier, quantile_estimates,
)
from procmetrics.analyse.result import Caveat, caveat, to_plain
from procmetrics.analyse.lifetimes.comparisons import TestResult, logrank, stratified_logrank
from procmetrics.analyse.lifetimes.horizon import (
    HEADLINE_COLUMNS, HorizonChoice, choose_horizon, headline_figures,
)
from procmetrics.analyse.lifetimes.sensitivity import SENSITIVITY_COLUMNS, link_era_sensitivity
from procmetrics.analyse.lifetimes.bands import (  # noqa: F401 - re-exported
    ALL, ASIDE_MIN_DEFECTS, DEFAULT_SEED, _band_curve, _estimation_groups, _group_keys,
    _is_double, _with_bands_drawn_apart, truncation_aware_bands,
)

SUMMARY_COLUMNS = ["group", "method", "quantile", "value", "low", "high", "level", "n", "unit",
                   "at_risk", "supported", "support_limit", "range_low", "range_high",
                   "high_open"]
CURVES_COLUMNS = ["group", "method"] + CURVE_COLUMNS
GROUP_COLUMNS = ["group", "method", "n", "cut_time", "band_method", "population",
                 "truncation"]


@dataclass(frozen=True)
class HorizonCohort:
    """Defects usable for a comparison at a common follow-up horizon."""

    defects: pd.DataFrame
    horizon: float
    n_too_recent: int        # introduced less than H before the end
    n_beyond_horizon: int    # fixed later than H after introduction
    population: str

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class LifetimeAnalysis:
    """Everything about defect lifetimes on one basis; see module docstring."""

    basis: str
    unit: str
    by: str | None
    horizon: float | None
    n_defects: int
    n_negative_excluded: int
    summary: pd.DataFrame
    curves: pd.DataFrame
    groups: pd.DataFrame
    comparison: TestResult | None
    population: str
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)
    stratified_comparison: TestResult | None = None
    strata_by: str | None = None
    headline: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=HEADLINE_COLUMNS))
    horizon_choice: HorizonChoice | None = None
    sensitivity: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame(columns=SENSITIVITY_COLUMNS))
    truncation_model: str = "right"
    link_era_start: pd.Timestamp | None = None
    link_era_rule: str = ""

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def restrict_to_horizon(defects: pd.DataFrame, horizon: float, unit: str = "days") -> HorizonCohort:
    """Keep defects introduced at least ``horizon`` before the end, fixed within it.

    References
    ----------
    Kalbfleisch & Lawless (1989), JASA 84 (inference from right-truncated data
    restricted to a common observation window).
    """
    d, _ = lifetimes_for_estimation(defects)
    old = d["window"] >= horizon
    within = d["lifetime"] <= horizon
    pop = (f"defects introduced at least {horizon:g} {unit} before the end of the history "
           f"and fixed with a link within {horizon:g} {unit}: lifetimes conditional on "
           f"lifetime <= {horizon:g} {unit}")
    return HorizonCohort(d[old & within].copy(), float(horizon), int((~old).sum()),
                         int((old & ~within).sum()), pop)


def analyse_lifetimes(
    table: DefectTable,
    *,
    by: Literal["subsystem", "period"] | None = None,
    horizon: float | None = None,
    quantiles: tuple[float, ...] = (0.25, 0.5, 0.75, 0.9),
    level: float = 0.95,
    min_at_risk: int = 10,
    n_boot: int = 2000,
    min_group_size: int = 10,
    min_cohort: int = 30,
    rng: np.random.Generator | None = None,
    stratify: bool = True,
    alpha: float = 0.05,
    jobs: int = 1,
    bands: Any = None,
) -> LifetimeAnalysis:
    """Curves, quantile summaries and (with ``by``) a log-rank comparison.

    Parameters
    ----------
    table : the defect table (:func:`procmetrics.analyse.lifetimes.defects.build_defects`).
    by : ``"subsystem"`` or ``"period"`` for per-group results, or None.
    horizon : common follow-up horizon (basis units) for the ``horizon``
        summaries and for the comparison; without it, no comparison is made
        (naive comparisons mix different amounts of truncation).
    min_at_risk : curves are cut, and quantiles reported as beyond the
        support, where fewer remain at risk.
    n_boot : bootstrap resamples for the truncation-aware band and quantiles
        (2,000: 200 gave upper bounds that moved by a factor of two between seeds).
    min_cohort : the headline horizon is the longest grid horizon at which every
        group's horizon cohort holds this many defects
        (:func:`procmetrics.analyse.lifetimes.horizon.choose_horizon`); the
        comparison ``horizon`` does not change it.
    min_group_size : groups with fewer usable defects get no curve/summary.
    rng : random generator (bootstrap); a fixed seed is used when None.
    stratify : with ``by`` and ``horizon``, also run the log-rank test
        stratified by the other grouping variable (``subsystem`` for periods,
        ``period`` for subsystems).
    jobs : processes; with 2 or more and a group of at least :data:`ASIDE_MIN_DEFECTS`
        defects, the bootstrap bands (:func:`truncation_aware_bands`) are drawn in a
        second process while the quantile intervals are drawn here
        (:mod:`procmetrics.background`). The result is the same with any ``jobs``; the
        generator's state comes back with the bands.
    bands : :func:`truncation_aware_bands` of this table with these arguments and a
        generator in the state of ``rng``, started elsewhere: an
        :class:`~procmetrics.background.AsideJob` (or its result). Used when its groups
        and sizes are this analysis's; otherwise the bands are drawn here.
    alpha : level used only to word the caveat when the plain and the
        stratified comparison disagree.

    References
    ----------
    Kaplan & Meier (1958); Lynden-Bell (1971); Lagakos, Barraj & De Gruttola
    (1988); Peto & Peto (1972) for the log-rank test; Klein & Moeschberger
    (2003), Survival Analysis, sec. 7.5 (stratified tests).
    """
    rng = rng if rng is not None else np.random.default_rng(DEFAULT_SEED)
    if by not in (None, "subsystem", "period"):
        raise ValueError("by must be 'subsystem', 'period' or None")
    d, n_neg = lifetimes_for_estimation(table.defects)
    unit = table.unit
    cav: list[Caveat] = list(table.caveats)
    srows: list[dict[str, Any]] = []
    cframes: list[pd.DataFrame] = []
    grows: list[dict[str, Any]] = []
    cohort = restrict_to_horizon(table.defects, horizon, unit) if horizon is not None else None
    skipped: list[str] = []

    double = _is_double(d)
    truncation = "both ends" if double else "right"

    def add_curve(group: str, method: str, curve: Any, trunc: str) -> None:
        cframes.append(curve.table[CURVE_COLUMNS].assign(group=group, method=method))
        grows.append({"group": group, "method": method, "n": curve.n,
                      "cut_time": curve.cut_time, "band_method": curve.band_method,
                      "population": curve.population, "truncation": trunc})
        cav.extend(c for c in curve.caveats if c not in cav)

    def add_q(group: str, method: str, ests: list[Any]) -> None:
        for q, e in zip(quantiles, ests):
            srows.append({"group": group, "method": method, "quantile": q, "value": e.value,
                          "low": e.low, "high": e.high, "level": level, "n": e.n,
                          "unit": unit, "at_risk": e.at_risk, "supported": e.supported,
                          "support_limit": e.support_limit, "range_low": e.range_low,
                          "range_high": e.range_high, "high_open": e.high_open})

    def q(L: np.ndarray, W: np.ndarray, U: np.ndarray | None) -> list[Any]:
        return quantile_estimates(L, W, quantiles=quantiles, level=level, n_boot=n_boot,
                                  unit=unit, rng=None, min_at_risk=min_at_risk, window_low=U)

    def add_aware(group: str, curve: Any, qe: list[Any], median: Any) -> Any:
        """Add a group's truncation-aware curve and quantiles; the median of all defects
        (``median`` kept for the other groups)."""
        add_curve(group, "truncation_aware", curve, truncation)
        add_q(group, "truncation_aware", qe)
        return qe[list(quantiles).index(0.5)] if group == ALL and 0.5 in quantiles else median

    def refused_note(group: str, exc: NotIdentifiable) -> None:
        cav.append(caveat("not_identifiable", f"{group}: truncation-aware curve and "
                          f"quantiles refused: {exc}"))

    groups, skipped = _estimation_groups(d, by, min_group_size, double)
    band_args = dict(level=level, n_boot=n_boot, min_at_risk=min_at_risk)
    if bands is None and jobs > 1 and any(len(L) >= ASIDE_MIN_DEFECTS for _, L, _, _ in groups):
        from procmetrics.background import AsideJob

        bands = AsideJob(truncation_aware_bands, table, by=by, min_group_size=min_group_size,
                         rng=rng, **band_args)
    lb_all = None
    if bands is None:
        # one process: each group's band, then its quantiles (skipped when it is refused)
        for group, L, W, U in groups:
            add_curve(group, "naive", kaplan_meier(L, level=level, min_at_risk=min_at_risk),
                      "none")
            add_q(group, "naive", quantile_estimates(L, quantiles=quantiles, level=level,
                                                     unit=unit, min_at_risk=min_at_risk))
            curve, refused = _band_curve(L, U, W, rng=rng, **band_args)
            try:
                if refused is not None:
                    raise refused
                qe = q(L, W, U)
            except NotIdentifiable as exc:
                refused_note(group, exc)
                continue
            lb_all = add_aware(group, curve, qe, lb_all)
    else:
        lb_all = _with_bands_drawn_apart(
            groups, bands, rng, q, add_curve, add_q, add_aware, refused_note,
            quantiles=quantiles, level=level, unit=unit, min_at_risk=min_at_risk,
            band_args=band_args)
    if cohort is not None:
        for group, g in _group_keys(cohort.defects, by):
            if len(g) < min_group_size:
                skipped.append(f"{group} within horizon (n={len(g)})")
                continue
            L = g["lifetime"].to_numpy(float)
            add_curve(group, "horizon", kaplan_meier(L, level=level, min_at_risk=min_at_risk),
                      "none (common horizon)")
            add_q(group, "horizon", quantile_estimates(L, quantiles=quantiles, level=level,
                                                       unit=unit, min_at_risk=min_at_risk))
    # headline: conditional on lifetime <= H, H by the stated rule (or as given)
    # the horizon cohort must be free of left truncation: with every introducer kept,
    # the headline uses those introduced from the first linked fix on
    dh = d[d["window_low"] <= 0] if double else d
    start = table.links_from if table.links_from is not None else (
        dh["intro_date"].min() if len(dh) else None)
    # groups compared: those with at least min_cohort usable defects (a handful of tiny
    # subsystems must not take the headline away from everyone)
    small: list[str] = []
    dsel = dh
    if by and len(dh):
        size = dh.groupby(by)[by].transform("size")
        dsel = dh[size >= min_cohort]
        small = sorted(set(dh[by].astype(str)) - set(dsel[by].astype(str)))
        if small:
            cav.append(caveat("too_few_observations", f"no headline figures for {by} groups "
                              f"with fewer than {min_cohort} defects: " + ", ".join(small),
                              "info"))
    choice = choose_horizon(dsel, by, min_cohort=min_cohort, unit=unit,
                            start=start if unit == "days" else None)
    all_only = False
    if by and choice.horizon is None and len(dh):
        # no horizon serves every group: the headline of all defects alone, said so
        alone = choose_horizon(dh, None, min_cohort=min_cohort, unit=unit,
                               start=start if unit == "days" else None)
        if alone.horizon is not None:
            all_only = True
            choice = HorizonChoice(alone.horizon, alone.rule + f"; no horizon serves every "
                                   f"{by} group ({choice.rule.split(': ')[-1]}), so only "
                                   "all defects together get headline figures",
                                   alone.sizes, alone.candidates)
    if unit != "days":
        choice = HorizonChoice(None, f"headline figures are given in days only (basis "
                               f"{table.basis}: lifetimes in {unit})", {}, choice.candidates)
    H = choice.horizon
    heads = []
    if H is not None:
        for group, g in _group_keys(dh, by):
            if group in small or (all_only and group != ALL):
                continue
            heads.append(headline_figures(g, H, group=group, quantiles=quantiles, level=level,
                                          min_at_risk=min_at_risk, min_cohort=min_cohort,
                                          unit=unit))
    elif unit == "days":
        cav.append(caveat("too_few_observations", "no headline horizon: " + choice.rule,
                          "warn"))
    headline = (pd.concat(heads, ignore_index=True)[HEADLINE_COLUMNS] if heads
                else pd.DataFrame(columns=HEADLINE_COLUMNS))
    sens = pd.DataFrame(columns=SENSITIVITY_COLUMNS)
    if start is not None and len(dh) and unit == "days":
        sens, sc = link_era_sensitivity(dh, start, H, level=level, min_at_risk=min_at_risk,
                                        min_cohort=min_cohort, unit=unit, lb_median=lb_all,
                                        rng=rng)
        cav.extend(sc)
    if double:
        cav.append(caveat("truncation_bias", f"{int((d['window_low'] > 0).sum())} defect(s) "
                          "introduced before the first linked fix are kept: they are seen only "
                          "when fixed after linking began and before the end of the history "
                          "(truncated at both ends); the truncation-aware figures use the "
                          "Efron-Petrosian estimator for doubly truncated data, which assumes "
                          "every fix is linked from the first linked fix on", "info"))
    if skipped:
        cav.append(caveat("too_few_observations", "no curve or summary for groups with fewer "
                          f"than {min_group_size} usable defects: " + ", ".join(skipped)))

    comparison = None
    stratified: TestResult | None = None
    strata_by: str | None = None
    if by and cohort is not None:
        c = cohort.defects
        big = c.groupby(by)[by].transform("size") >= min_group_size
        c = c[big]
        if c[by].nunique() >= 2:
            comparison = logrank(c["lifetime"], c[by])
            if stratify:
                strata_by = "subsystem" if by == "period" else "period"
                stratified, note = _stratified(c, by, strata_by, comparison, alpha)
                if note is not None:
                    cav.append(note)
    elif by:
        cav.append(caveat("truncation_bias", "groups were not compared: give a common "
                          "follow-up horizon so each group has the same chance to show long "
                          "lifetimes", "info"))
    population = (f"{table.population}. 'naive' treats observed lifetimes at face value "
                  "(biased short); 'truncation_aware' corrects for right truncation and "
                  + ("and both-ends truncation (Efron-Petrosian) " if double else "")
                  + "describes lifetimes conditional on lifetime <= the longest observed; "
                  + (f"'horizon': {cohort.population}" if cohort is not None else ""))
    summary = pd.DataFrame(srows, columns=SUMMARY_COLUMNS)
    curves = (pd.concat(cframes, ignore_index=True)[CURVES_COLUMNS] if cframes
              else pd.DataFrame(columns=CURVES_COLUMNS))
    return LifetimeAnalysis(table.basis, unit, by, horizon, int(len(table.defects)), n_neg,
                            summary, curves, pd.DataFrame(grows, columns=GROUP_COLUMNS),
                            comparison, population, tuple(cav), stratified,
                            strata_by if stratified is not None else None, headline, choice,
                            sens, truncation, table.links_from, table.link_era_rule)


def _stratified(c: pd.DataFrame, by: str, strata_by: str, plain: TestResult,
                alpha: float) -> tuple[TestResult | None, Caveat | None]:
    """Log-rank of ``by`` stratified by ``strata_by``, and a caveat if it tells otherwise."""
    strata = c[strata_by].astype(str)
    if strata.nunique() < 2:
        return None, caveat("too_few_observations", f"no stratified comparison: all defects "
                            f"in the horizon cohort share one {strata_by} ({strata.iloc[0]})",
                            "info")
    levels_per = c.groupby(strata)[by].nunique()
    useful = set(levels_per.index[levels_per >= 2])
    if not useful:
        return None, caveat("not_identifiable", f"no {strata_by} has defects from two "
                            f"{by} groups: {by} and {strata_by} cannot be separated")
    res = stratified_logrank(c["lifetime"], c[by], strata)
    n_useful = int(strata.isin(useful).sum())
    note = None
    sig_plain, sig_strat = plain.p_value < alpha, res.p_value < alpha
    if sig_plain != sig_strat:
        note = caveat("tuning_sensitive", f"the {by} comparison changes when stratified by "
                      f"{strata_by}: log-rank p = {plain.p_value:.3g}, stratified p = "
                      f"{res.p_value:.3g} ({n_useful} of {len(c)} defects are in "
                      f"{strata_by} strata holding more than one {by})"
                      + ("; the plain difference may be a change in the "
                         f"{strata_by} mix" if sig_plain else ""))
    elif n_useful < len(c):
        note = caveat("too_few_observations", f"stratified by {strata_by}: {len(c) - n_useful} "
                      f"of {len(c)} defects are in strata with a single {by} and carry no "
                      "information for the stratified test", "info")
    return res, note
