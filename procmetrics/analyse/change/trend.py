"""Trend of one metric over time: a GLM of the per-period values on time.

Proportions: binomial GLM (logit) of numerator out of denominator per period,
quasi-binomial when overdispersed. Counts: Poisson GLM with offset
``log(exposure)`` (by default the period's denominator, i.e. commits),
negative binomial NB2 with alpha estimated by maximum likelihood when
overdispersed. Medians and totals: OLS. HAC (Newey-West) standard errors when
the residuals are autocorrelated. All of that is done by
:func:`procmetrics.analyse.glmfit.fit_model`.

Time is in years from the centre of the observed periods (each period's value
sits at its midpoint). Any prediction outside ``[first period_start, last
period_end]`` is flagged ``extrapolated=True`` with the ``extrapolation`` caveat.

References
----------
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed.
Cameron, A. C. & Trivedi, P. K. (2013). Regression Analysis of Count Data, 2nd ed.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.analyse.glmfit import ModelFit, fit_model
from procmetrics.analyse.measures.metrics import ALL, METRICS
from procmetrics.analyse.measures.periods import period_midpoints, years_since
from procmetrics.analyse.result import Caveat, Diagnostic, Estimate, caveat, to_plain
from procmetrics.errors import InsufficientData

FITTED_COLUMNS = ["period", "period_start", "period_end", "time_years", "observed",
                  "numerator", "denominator", "fitted", "fit_low", "fit_high",
                  "resid_pearson", "extrapolated"]
_KIND = {"proportion": "proportion", "count": "count", "total": "continuous",
         "median": "continuous"}


@dataclass(frozen=True)
class TrendResult:
    """A fitted trend of one metric for one subsystem.

    ``slope`` is the change per year on the link scale (log-odds, log-rate or
    the metric's own unit); ``ratio_per_year`` its exponential (odds ratio or
    rate ratio per year; ``None`` for OLS). ``fitted`` has :data:`FITTED_COLUMNS`.
    """

    metric: str
    subsystem: str
    kind: str
    model: str
    slope: Estimate
    ratio_per_year: Estimate | None
    time_origin: pd.Timestamp
    observed_start: pd.Timestamp
    observed_end: pd.Timestamp
    n_periods: int
    n: int
    fitted: pd.DataFrame
    fit: ModelFit
    diagnostics: tuple[Diagnostic, ...]
    caveats: tuple[Caveat, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class TrendPrediction:
    """Predicted values of a trend at given dates (columns ``date``, ``time_years``,
    ``fitted``, ``fit_low``, ``fit_high``, ``extrapolated``)."""

    table: pd.DataFrame
    level: float
    caveats: tuple[Caveat, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def metric_kind(metric: str) -> str:
    """Model kind for a metric name: ``proportion``, ``count`` or ``continuous``."""
    base = METRICS.get(metric)
    if base is None:
        raise ValueError(f"unknown metric {metric!r}; known: {', '.join(METRICS)}")
    return _KIND[base]


def select_series(table: pd.DataFrame, metric: str, subsystem: str = ALL,
                  kind: str | None = None) -> pd.DataFrame:
    """Usable rows of one metric/subsystem in time order (empty periods dropped
    for proportions and medians)."""
    return usable_rows(table[(table["metric"] == metric) & (table["subsystem"] == subsystem)],
                       metric, kind)


def usable_rows(s: pd.DataFrame, metric: str, kind: str | None = None) -> pd.DataFrame:
    """:func:`select_series` of rows already of one metric and subsystem (in table
    order, as a ``groupby`` keeps them): for callers that split the table once."""
    s = s.sort_values("period_start").reset_index(drop=True)
    kind = kind or metric_kind(metric)
    if kind == "proportion" or METRICS.get(metric) in ("median", "total"):
        s = s[(s["denominator"] > 0) & s["value"].notna()].reset_index(drop=True)
    return s


def fit_trend(table: pd.DataFrame, metric: str, subsystem: str = ALL, *,
              kind: str | None = None, alpha: float = 0.05,
              dispersion_threshold: float = 1.5, hac: str = "auto") -> TrendResult:
    """Fit a time trend to one metric of the tidy metric table.

    Parameters
    ----------
    table : the ``table`` of :func:`~procmetrics.analyse.measures.metrics.compute_period_metrics`.
    metric, subsystem : which series.
    kind : override the model kind; ``"count"`` on a proportion metric models
        the numerator as a count with offset ``log(denominator)``.
    alpha : 1 - interval level.
    dispersion_threshold : Pearson X2/df above which quasi-binomial / NB2 is used.
    hac : see :func:`~procmetrics.analyse.glmfit.fit_model`.

    Raises
    ------
    InsufficientData
        Fewer than 4 usable periods or no variation.

    References
    ----------
    McCullagh & Nelder (1989); Cameron & Trivedi (2013); Newey & West (1987).
    """
    kind = kind or metric_kind(metric)
    s = select_series(table, metric, subsystem, kind)
    if len(s) < 4:
        raise InsufficientData(f"{metric} for {subsystem}: {len(s)} usable periods, need >= 4")
    mid = period_midpoints(s)
    t_raw = years_since(mid, mid.iloc[0])
    origin = mid.iloc[0] + pd.Timedelta(days=365.25 * float(t_raw.mean()))
    t = years_since(mid, origin)
    X = np.column_stack([np.ones(len(t)), t])
    if kind == "proportion":
        y, trials, exposure = s["numerator"].to_numpy(float), s["denominator"].to_numpy(float), None
    elif kind == "count":
        y = s["numerator"].to_numpy(float)
        den = s["denominator"].to_numpy(float)
        trials = None
        exposure = den if np.all(np.isfinite(den)) and np.all(den > 0) else None
    else:
        y, trials, exposure = s["value"].to_numpy(float), None, None
    fit = fit_model(y, X, kind=kind, trials=trials, exposure=exposure,
                    names=["const", "time_years"], alpha=alpha,
                    dispersion_threshold=dispersion_threshold, hac=hac)
    row = fit.params.set_index("term").loc["time_years"]
    n = int(s["n"].sum())
    unit = {"proportion": "log-odds per year", "count": "log-rate per year"}.get(
        kind, "metric units per year")
    slope = Estimate("slope", float(row["estimate"]), float(row["ci_low"]),
                     float(row["ci_high"]), 1 - alpha, f"{fit.model}; {fit.cov_type} SE", n,
                     unit=unit)
    ratio = None
    if kind != "continuous":
        ratio = Estimate("odds_ratio_per_year" if kind == "proportion" else
                         "rate_ratio_per_year", float(np.exp(row["estimate"])),
                         float(np.exp(row["ci_low"])), float(np.exp(row["ci_high"])),
                         1 - alpha, slope.method, n, unit="ratio per year")
    mean, lo, hi = fit.predict(X)
    fitted = pd.DataFrame({"period": s["period"], "period_start": s["period_start"],
                           "period_end": s["period_end"], "time_years": t,
                           "observed": fit.residuals["observed"].to_numpy(),
                           "numerator": s["numerator"], "denominator": s["denominator"],
                           "fitted": mean, "fit_low": lo, "fit_high": hi,
                           "resid_pearson": fit.residuals["resid_pearson"].to_numpy(),
                           "extrapolated": False})[FITTED_COLUMNS]
    cavs = list(fit.caveats)
    if len(s) < 12:
        cavs.append(caveat("too_few_observations",
                           f"{len(s)} periods: a trend over so few points is fragile"))
    return TrendResult(metric=metric, subsystem=subsystem, kind=kind, model=fit.model,
                       slope=slope, ratio_per_year=ratio, time_origin=origin,
                       observed_start=s["period_start"].iloc[0],
                       observed_end=s["period_end"].iloc[-1], n_periods=len(s), n=n,
                       fitted=fitted, fit=fit, diagnostics=fit.diagnostics,
                       caveats=tuple(cavs))


def predict_trend(result: TrendResult, dates: pd.Series | list) -> TrendPrediction:
    """Trend value (per unit of exposure) with its interval at arbitrary dates.

    Dates before the first observed period or after the last one are flagged
    ``extrapolated=True`` and the prediction carries the ``extrapolation`` caveat:
    a fitted trend says nothing reliable outside the data (in particular, a
    declining fix curve never shows that no defects remain).
    """
    d = pd.Series(pd.to_datetime(list(dates), utc=True))
    t = years_since(d, result.time_origin)
    X = np.column_stack([np.ones(len(t)), t])
    mean, lo, hi = result.fit.predict(X)
    extra = ((d < result.observed_start) | (d > result.observed_end)).to_numpy()
    table = pd.DataFrame({"date": d, "time_years": t, "fitted": mean, "fit_low": lo,
                          "fit_high": hi, "extrapolated": extra})
    cavs: tuple[Caveat, ...] = ()
    if extra.any():
        cavs = (caveat("extrapolation",
                       f"{int(extra.sum())} of {len(d)} dates lie outside the observed range "
                       f"{result.observed_start:%Y-%m-%d} to {result.observed_end:%Y-%m-%d}"),)
    return TrendPrediction(table=table, level=result.fit.level, caveats=cavs)
