"""Interrupted time series: did a metric's level or slope change at a policy date?

Segmented regression on the per-period series (Wagner et al. 2002):
``g(E y) = b0 + b1 t + b2 post + b3 post * t`` with ``t`` in years from the
policy date and ``post = 1`` for periods starting on or after it. A period
that straddles the date (starts before, ends after) is a transition period and
is left out. ``b2`` is the level change at the date and ``b3`` the slope
change (per year), on the link scale (log-odds for proportions, log-rate for
counts, units for continuous values); proportions and counts use the same
binomial / Poisson / NB2 GLMs as the trends. Standard errors are HAC
(Newey-West) when the Ljung-Box test finds residual autocorrelation
(``hac="auto"``, the default) or always with ``hac="always"``. HAC is not the
blanket default because it is anti-conservative in short series: in a
simulation without any change (48 monthly binomial periods, 300 series) HAC
intervals excluded 0 for the level change in 10-17% of series at the 5% level,
model-based intervals in about 7%.

Guarded intervals. Three departures of that fit's interval from its stated
level were measured in simulated 48-month binomial series with a trend and no
step (``tests/claims/test_calibration_at_date.py``): the plain binomial model is
kept up to a Pearson dispersion of 1.5, so mild overdispersion goes unnoticed
(dispersion about 1.4: the interval missed a zero level change on the upper
side in 20 of 400 series, 0.050 against 0.025); Newey-West errors, switched on
when the Ljung-Box test flags the residuals, are too small in short series (7
of 78 such series, 0.09); and a quasi-likelihood scale estimated from
``periods - 4`` degrees of freedom wants Student's t quantile, not the normal
one. For shares and counts the level and slope changes are therefore reported
with the widest of two intervals around the same estimate: the fit's own and a
model-based refit that allows any overdispersion (quasi-binomial / quasi-
Poisson whenever the Pearson dispersion exceeds 1, no HAC), each with the t
quantile when its scale is estimated. The method text says when the refit
decided. The before/after section, the ``compare`` command and every claim
about a change at a date read these same intervals (``guard=False`` gives the
fit's own, for tests and studies of the fit).

Sensitivity checks: placebo dates (the date moved by +-k periods, each placebo
fitted only on data from one side of the real date, so it contains no real
intervention) give a reference distribution of "effects" where none exists; a
control series (another subsystem that the policy did not target) should not
show the same change.

References
----------
Wagner, A. K., Soumerai, S. B., Zhang, F. & Ross-Degnan, D. (2002). Segmented
regression analysis of interrupted time series studies in medication use
research. J. Clin. Pharm. Ther. 27:299-309.
Bernal, J. L., Cummins, S. & Gasparrini, A. (2017). Interrupted time series
regression for the evaluation of public health interventions: a tutorial.
Int. J. Epidemiol. 46:348-355 (placebo and control series).
Newey, W. K. & West, K. D. (1987). Econometrica 55:703-708.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterator, Mapping, Sequence

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.glmfit import ModelFit, fit_model
from procmetrics.analyse.measures.metrics import ALL
from procmetrics.analyse.measures.periods import period_midpoints, years_since
from procmetrics.analyse.result import Caveat, Diagnostic, Estimate, caveat, to_plain
from procmetrics.analyse.change.trend import metric_kind, select_series, usable_rows
from procmetrics.errors import InsufficientData

MIN_PERIODS_PER_SEGMENT = 12
PLACEBO_MIN_SIDE = 6
PLACEBO_COLUMNS = ["shift_periods", "placebo_date", "side", "level_change", "slope_change",
                   "level_p_value", "slope_p_value"]
FITTED_COLUMNS = ["period", "period_start", "time_years", "post", "observed", "fitted",
                  "fit_low", "fit_high", "counterfactual", "extrapolated"]
_TERMS = ["const", "time_years", "post", "post_time"]


@dataclass(frozen=True)
class ITSResult:
    """Level and slope change at a date, with sensitivity checks.

    ``fitted`` has :data:`FITTED_COLUMNS` (``counterfactual`` = the pre-date
    trend continued after the date, flagged ``extrapolated``); ``placebo`` has
    :data:`PLACEBO_COLUMNS`.
    """

    metric: str
    subsystem: str
    kind: str
    at: pd.Timestamp
    model: str
    cov_type: str
    level_change: Estimate
    slope_change: Estimate
    level_ratio: Estimate | None
    pre_slope: Estimate
    n_before: int
    n_after: int
    n_transition: int
    n: int
    fitted: pd.DataFrame
    fit: ModelFit
    placebo: pd.DataFrame
    placebo_p_level: float | None
    control_subsystem: str | None
    control_level_change: Estimate | None
    control_slope_change: Estimate | None
    diagnostics: tuple[Diagnostic, ...]
    caveats: tuple[Caveat, ...] = field(default=())
    #: two-sided p-value of the level change from the interval shown (same quantile)
    level_p_value: float | None = None
    #: which fit gave the level interval ("fit" or "refit") and why, in words
    guard_note: str = ""

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


#: designs by period grid (see :func:`_design`); bounded, cleared when full
_DESIGNS: dict[tuple, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
_DESIGNS_MAX = 4096


def _design(s: pd.DataFrame, at: pd.Timestamp) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Design matrix, time in years and post indicator of the series' periods.

    It depends only on the period grid and the date, which the subsystems of one
    table share: computed once per grid (the pandas time arithmetic was a tenth of a
    per-subsystem test) and copied to every caller, so the numbers are the ones the
    computation gives.
    """
    start, end = s["period_start"].values, s["period_end"].values
    key = (start.dtype.str, start.tobytes(), end.dtype.str, end.tobytes(), at.value)
    hit = _DESIGNS.get(key)
    if hit is None:
        t = years_since(period_midpoints(s), at)
        post = (s["period_start"] >= at).to_numpy(dtype=float)
        X = np.column_stack([np.ones(len(t)), t, post, post * t])
        if len(_DESIGNS) >= _DESIGNS_MAX:
            _DESIGNS.clear()
        hit = _DESIGNS[key] = (X, t, post)
    return hit[0].copy(), hit[1].copy(), hit[2].copy()


def _series(table: pd.DataFrame, metric: str, subsystem: str, kind: str, at: pd.Timestamp,
            selected: bool = False) -> tuple[pd.DataFrame, int]:
    """Usable rows of the series and the number of periods straddling ``at`` (dropped);
    ``selected``: ``table`` holds only this metric and subsystem already."""
    s = (usable_rows(table, metric, kind) if selected
         else select_series(table, metric, subsystem, kind))
    straddle = (s["period_start"] < at) & (s["period_end"] > at)
    return s[~straddle].reset_index(drop=True), int(straddle.sum())


def _endog(s: pd.DataFrame, kind: str):
    if kind == "proportion":
        return s["numerator"].to_numpy(float), s["denominator"].to_numpy(float), None
    if kind == "count":
        den = s["denominator"].to_numpy(float)
        ok = np.all(np.isfinite(den)) and np.all(den > 0)
        return s["numerator"].to_numpy(float), None, den if ok else None
    return s["value"].to_numpy(float), None, None


def _fit(s, kind, at, alpha, dispersion_threshold, hac="auto", detail=True):
    X, _, _ = _design(s, at)
    y, trials, exposure = _endog(s, kind)
    return fit_model(y, X, kind=kind, trials=trials, exposure=exposure, names=_TERMS,
                     alpha=alpha, dispersion_threshold=dispersion_threshold, hac=hac,
                     detail=detail)


def _utc(at: pd.Timestamp | str) -> pd.Timestamp:
    at = pd.Timestamp(at)
    return at.tz_localize("UTC") if at.tzinfo is None else at.tz_convert("UTC")


def _sides(s: pd.DataFrame, metric: str, subsystem: str, at: pd.Timestamp
           ) -> tuple[np.ndarray, int, int]:
    post = (s["period_start"] >= at).to_numpy()
    n_before, n_after = int((~post).sum()), int(post.sum())
    if n_before < 3 or n_after < 3:
        raise InsufficientData(f"{metric} for {subsystem}: {n_before} periods before and "
                               f"{n_after} after {at:%Y-%m-%d}; need >= 3 on each side")
    return post, n_before, n_after


def _fits(s, kind, at, alpha, dispersion_threshold, hac, guard, detail=True):
    """The fit and, for the guarded interval, the model-based refit (whose diagnostics
    are never shown, so it skips them).

    The refit is the fit itself when it would repeat it: no HAC errors in the fit and
    the same choice of model at both dispersion thresholds (the fit is deterministic,
    so the same call gives the same coefficients and intervals)."""
    fit = _fit(s, kind, at, alpha, dispersion_threshold, hac, detail)
    refit = None
    phi0 = fit.dispersion_initial
    if (guard and kind != "continuous" and fit.cov_type == "nonrobust" and phi0 is not None
            and (phi0 > dispersion_threshold) == (phi0 > 1.0)):
        refit = fit
    elif guard and kind != "continuous":
        try:
            refit = _fit(s, kind, at, alpha, 1.0, "never", detail=False)
        except InsufficientData:
            refit = None
    return fit, refit


def _not_estimable(kind: str, level: Estimate) -> bool:
    """A share or count whose level change has an unbounded interval (a share of 0 or 1,
    or no events, on one side of the date)."""
    bounds = [x if x is not None else np.nan for x in (level.value, level.low, level.high)]
    return kind != "continuous" and (not np.all(np.isfinite(bounds))
                                     or max(abs(bounds[1]), abs(bounds[2])) > 50)


@dataclass(frozen=True)
class LevelChange:
    """The level change of one series at a date, as the per-subsystem tests read it
    (the same estimate, interval and p-value as :func:`interrupted_time_series`)."""

    metric: str
    subsystem: str
    level_change: Estimate
    p_value: float | None
    n_before: int
    n_after: int
    #: False when the interval is unbounded (see ``diagnostic_failed`` in the ITS caveats)
    estimable: bool


def level_change_at(table: pd.DataFrame, metric: str, at: pd.Timestamp | str, *,
                    subsystem: str = ALL, kind: str | None = None, alpha: float = 0.05,
                    dispersion_threshold: float = 1.5, hac: str = "auto") -> LevelChange:
    """Only the guarded level change of :func:`interrupted_time_series` (same fits,
    same interval), without the slope, fitted values, placebos and the diagnostics
    that only describe the fit: for running one test per subsystem.

    Raises :class:`InsufficientData` as :func:`interrupted_time_series` does.
    """
    return _level_change(table, metric, _utc(at), subsystem, kind, alpha,
                         dispersion_threshold, hac, selected=False)


def level_changes(table: pd.DataFrame, metrics: Sequence[str], at: pd.Timestamp | str,
                  subsystems: Sequence[str], *, alpha: float = 0.05,
                  dispersion_threshold: float = 1.5, hac: str = "auto",
                  parts: Mapping[str, pd.DataFrame] | None = None
                  ) -> Iterator[tuple[str, str, LevelChange | InsufficientData]]:
    """:func:`level_change_at` of every subsystem and metric (subsystem by subsystem,
    metrics in the given order), each subsystem's rows split into its series once:
    yields ``(subsystem, metric, result)``, the result being the
    :class:`InsufficientData` the test raised when the data cannot support it.

    ``parts``: the table's rows by subsystem when the caller has them (``groupby``
    order); the series of one subsystem at a time are held, not all of them.
    """
    at = _utc(at)
    if parts is None:
        parts = dict(tuple(table.groupby("subsystem", sort=False)))
    empty = table.iloc[:0]
    for sub in subsystems:
        part = parts.get(sub, empty)
        series = dict(tuple(part.groupby("metric", sort=False))) if len(part) else {}
        for m in metrics:
            try:
                yield sub, m, _level_change(series.get(m, empty), m, at, sub, None,
                                            alpha, dispersion_threshold, hac, selected=True)
            except InsufficientData as exc:
                yield sub, m, exc


def _level_change(table: pd.DataFrame, metric: str, at: pd.Timestamp, subsystem: str,
                  kind: str | None, alpha: float, dispersion_threshold: float, hac: str, *,
                  selected: bool) -> LevelChange:
    kind = kind or metric_kind(metric)
    s, _ = _series(table, metric, subsystem, kind, at, selected)
    _, n_before, n_after = _sides(s, metric, subsystem, at)
    fit, refit = _fits(s, kind, at, alpha, dispersion_threshold, hac, True, detail=False)
    unit = {"proportion": "log-odds", "count": "log-rate"}.get(kind, "metric units")
    level, p, _ = _guarded(fit, refit, "post", "level_change", unit, int(s["n"].sum()),
                           n_before + n_after - len(_TERMS))
    return LevelChange(metric, subsystem, level, p, n_before, n_after,
                       not _not_estimable(kind, level))


def _est(fit: ModelFit, term: str, name: str, unit: str, n: int) -> Estimate:
    p = fit.params          # by position: no index built per call (one per subsystem)
    i = list(p["term"]).index(term)
    return Estimate(name, float(p["estimate"].iat[i]), float(p["ci_low"].iat[i]),
                    float(p["ci_high"].iat[i]), fit.level, f"{fit.model}; {fit.cov_type} SE",
                    n, unit=unit)


def _guarded(fit: ModelFit, refit: ModelFit | None, term: str, name: str, unit: str,
             n: int, df: int) -> tuple[Estimate, float | None, str]:
    """The estimate of ``term`` with the widest interval of ``fit`` and ``refit``
    (see the module docstring); also its two-sided p-value and which fit decided."""
    own = _est(fit, term, name, unit, n)
    if own.low is None or own.high is None or not np.isfinite([own.low, own.high]).all():
        return own, None, ""
    z = float(stats.norm.ppf(0.5 + fit.level / 2))
    t = float(stats.t.ppf(0.5 + fit.level / 2, max(df, 1)))
    cands = []
    for label, f in (("fit", fit), ("refit", refit)):
        if f is None:
            continue
        e = _est(f, term, name, unit, n)
        if e.low is None or not np.isfinite([e.low, e.high]).all():
            continue
        quasi = f.model.startswith("quasi")
        cands.append(((e.high - e.low) / 2 * (t / z if quasi else 1.0), label, f, quasi))
    half, label, f, quasi = max(cands, key=lambda c: c[0])
    q = t if quasi else z
    se = half / q if q > 0 else float("nan")
    stat = abs(own.value) / se if se > 0 else float("inf")
    p = float(2 * (stats.t.sf(stat, max(df, 1)) if quasi else stats.norm.sf(stat)))
    method = f"{f.model}; {f.cov_type} SE" + (f"; t quantile, {df} df" if quasi else "")
    note = ""
    if label == "refit" or (quasi and t > z and abs(half - (own.high - own.low) / 2) > 1e-12):
        why = []
        if fit.cov_type.startswith("HAC"):
            why.append("Newey-West errors are too small in short series")
        if quasi:
            phi = next((d.value for d in f.diagnostics if d.name == "dispersion"), float("nan"))
            why.append(f"the Pearson dispersion is {phi:.2f} and the scale is estimated "
                       f"from {df} degrees of freedom (t quantile)")
        method = ("widest of the fit's interval and a model-based refit: " + method)
        note = ("the interval is the wider one of the fit's own ("
                + f"{own.value:+.2f} [{own.low:+.2f}, {own.high:+.2f}]) and a model-based "
                "refit allowing any overdispersion" + (" (" + "; ".join(why) + ")" if why
                                                        else ""))
    est = Estimate(name, own.value, own.value - half, own.value + half, fit.level, method, n,
                   unit=unit)
    return est, p, note


def interrupted_time_series(table: pd.DataFrame, metric: str, at: pd.Timestamp | str, *,
                            subsystem: str = ALL, kind: str | None = None,
                            control_subsystem: str | None = None,
                            placebo_shifts: int = 8, alpha: float = 0.05,
                            dispersion_threshold: float = 1.5, hac: str = "auto",
                            guard: bool = True) -> ITSResult:
    """Segmented regression of one metric around the date ``at``.

    Parameters
    ----------
    table : the tidy metric table.
    metric, subsystem : which series.
    at : the policy date (UTC if naive).
    kind : override the model kind (see :func:`~procmetrics.analyse.change.trend.fit_trend`).
    control_subsystem : a subsystem the policy did not target (sensitivity check).
    placebo_shifts : placebo dates at +-1..placebo_shifts periods; a placebo is
        fitted only when it leaves >= 6 periods on both sides within its half.
    alpha : 1 - interval level.
    hac : ``"auto"`` (HAC when residuals are autocorrelated), ``"always"``, ``"never"``.
    guard : report the level and slope changes of shares and counts with the
        guarded interval (module docstring); ``False``: the fit's own interval.

    Raises
    ------
    InsufficientData
        Fewer than 3 usable periods on either side of the date.

    References
    ----------
    Wagner et al. (2002); Bernal, Cummins & Gasparrini (2017).
    """
    at = _utc(at)
    kind = kind or metric_kind(metric)
    s, n_trans = _series(table, metric, subsystem, kind, at)
    post, n_before, n_after = _sides(s, metric, subsystem, at)
    fit, refit = _fits(s, kind, at, alpha, dispersion_threshold, hac, guard)
    n = int(s["n"].sum())
    unit = {"proportion": "log-odds", "count": "log-rate"}.get(kind, "metric units")
    df = n_before + n_after - len(_TERMS)
    level, p_level_model, note = _guarded(fit, refit, "post", "level_change", unit, n, df)
    slope, _, _ = _guarded(fit, refit, "post_time", "slope_change", unit + " per year", n, df)
    if not guard:
        level = _est(fit, "post", "level_change", unit, n)
        slope = _est(fit, "post_time", "slope_change", unit + " per year", n)
        p_level_model = float(fit.params.set_index("term").loc["post", "p_value"])
        note = ""
    pre = _est(fit, "time_years", "pre_slope", unit + " per year", n)
    ratio = None
    if kind != "continuous":
        with np.errstate(over="ignore"):   # an unbounded ratio is reported, not warned
            ratio = Estimate("odds_ratio_at_date" if kind == "proportion" else
                             "rate_ratio_at_date", float(np.exp(level.value)),
                             float(np.exp(level.low)), float(np.exp(level.high)),
                             level.level, level.method, n, unit="ratio")
    X, t, postf = _design(s, at)
    mean, lo, hi = fit.predict(X)
    cf, _, _ = fit.predict(X * np.array([1.0, 1.0, 0.0, 0.0]))
    fitted = pd.DataFrame({"period": s["period"], "period_start": s["period_start"],
                           "time_years": t, "post": post,
                           "observed": fit.residuals["observed"].to_numpy(),
                           "fitted": mean, "fit_low": lo, "fit_high": hi,
                           "counterfactual": np.where(post, cf, np.nan),
                           "extrapolated": post})[FITTED_COLUMNS]
    placebo = _placebos(s, kind, at, post, placebo_shifts, alpha, dispersion_threshold, hac)
    p_level = None
    if len(placebo):
        p_level = float((1 + (placebo["level_change"].abs() >= abs(level.value)).sum())
                        / (1 + len(placebo)))
    c_level = c_slope = None
    if control_subsystem is not None:
        cs, _ = _series(table, metric, control_subsystem, kind, at)
        try:
            cfit = _fit(cs, kind, at, alpha, dispersion_threshold, hac)
            cn = int(cs["n"].sum())
            c_level = _est(cfit, "post", "control_level_change", unit, cn)
            c_slope = _est(cfit, "post_time", "control_slope_change", unit + " per year", cn)
        except InsufficientData:
            c_level = c_slope = None
    cavs = list(fit.caveats)
    if _not_estimable(kind, level):
        cavs.append(caveat("diagnostic_failed", "the level change is not estimable: its "
                           "interval is unbounded (a share of 0 or 1, or no events, on one "
                           "side of the date)", "fail"))
    if min(n_before, n_after) < MIN_PERIODS_PER_SEGMENT:
        cavs.append(caveat("too_few_observations",
                           f"{n_before} periods before and {n_after} after the date; "
                           f"segmented regression wants >= {MIN_PERIODS_PER_SEGMENT} per segment"))
    if (level.low <= 0 <= level.high) and (slope.low <= 0 <= slope.high):
        cavs.append(caveat("absence_of_evidence",
                           "the intervals for the level and slope change include 0: no "
                           "evidence of a change, which is not evidence of no change", "info"))
    cavs.append(caveat("extrapolation", "the counterfactual after the date continues the "
                       "pre-date trend beyond the data it was fitted on", "info"))
    if (c_level is not None and c_level.low is not None and np.sign(c_level.value)
            == np.sign(level.value) and not (c_level.low <= 0 <= c_level.high)):
        cavs.append(caveat("not_identifiable",
                           f"the control series {control_subsystem!r} changed at the same "
                           "date in the same direction: the change cannot be attributed to "
                           "the policy alone"))
    if control_subsystem is not None and c_level is None:
        cavs.append(caveat("too_few_observations",
                           f"control series {control_subsystem!r} could not be fitted"))
    return ITSResult(metric=metric, subsystem=subsystem, kind=kind, at=at, model=fit.model,
                     cov_type=fit.cov_type, level_change=level, slope_change=slope,
                     level_ratio=ratio, pre_slope=pre, n_before=n_before, n_after=n_after,
                     n_transition=n_trans, n=n, fitted=fitted, fit=fit, placebo=placebo,
                     placebo_p_level=p_level, control_subsystem=control_subsystem,
                     control_level_change=c_level, control_slope_change=c_slope,
                     diagnostics=fit.diagnostics, caveats=tuple(cavs),
                     level_p_value=p_level_model, guard_note=note)


def _placebos(s, kind, at, post, k_max, alpha, thr, hac) -> pd.DataFrame:
    rows = []
    idx_first_post = int(np.argmax(post))
    for k in [*range(-k_max, 0), *range(1, k_max + 1)]:
        side = (s[~post] if k < 0 else s[post]).reset_index(drop=True)
        pos = idx_first_post + k if k < 0 else k  # placebo's first "post" row in side
        if pos < PLACEBO_MIN_SIDE or len(side) - pos < PLACEBO_MIN_SIDE:
            continue
        pdate = side["period_start"].iloc[pos]
        try:
            f = _fit(side, kind, pdate, alpha, thr, hac)
        except (InsufficientData, np.linalg.LinAlgError, ValueError):
            continue
        p = f.params.set_index("term")
        rows.append((k, pdate, "before" if k < 0 else "after",
                     float(p.loc["post", "estimate"]), float(p.loc["post_time", "estimate"]),
                     float(p.loc["post", "p_value"]), float(p.loc["post_time", "p_value"])))
    return pd.DataFrame(rows, columns=PLACEBO_COLUMNS)


@dataclass(frozen=True)
class ChangeVsDate:
    """Where detected change points lie relative to a declared policy date."""

    status: str  # "at declared date", "elsewhere", "none"
    declared: pd.Timestamp
    tolerance_periods: int
    nearest_period: str | None
    distance_periods: int | None
    table: pd.DataFrame  # period, date, distance_periods, within_tolerance

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def relate_changes_to_date(result, at: pd.Timestamp | str, *,
                           tolerance_periods: int = 2) -> ChangeVsDate:
    """Classify detected change points relative to a declared date.

    ``status`` is ``"at declared date"`` when a change's first period is within
    ``tolerance_periods`` of the first period starting on or after ``at``,
    ``"elsewhere"`` when there are changes but none that close, and ``"none"``.
    ``result`` is a :class:`~procmetrics.analyse.change.changepoints.ChangePointResult`
    computed on a dated series.
    """
    at = _utc(at)
    dates = pd.Series(pd.to_datetime(list(result.period_dates), utc=True))
    after = np.flatnonzero((dates >= at).to_numpy())
    ref = int(after[0]) if len(after) else len(dates)
    rows = [(c.period, c.date, c.index - ref, abs(c.index - ref) <= tolerance_periods)
            for c in result.changes]
    table = pd.DataFrame(rows, columns=["period", "date", "distance_periods",
                                        "within_tolerance"])
    if table.empty:
        return ChangeVsDate("none", at, tolerance_periods, None, None, table)
    best = table.loc[table["distance_periods"].abs().idxmin()]
    status = "at declared date" if bool(table["within_tolerance"].any()) else "elsewhere"
    return ChangeVsDate(status, at, tolerance_periods, str(best["period"]),
                        int(best["distance_periods"]), table)
