"""The segmented-regression fit shared by the interrupted time series and the
per-subsystem level changes (see :mod:`procmetrics.analyse.change.its` for the model,
the guarded intervals and the references).

``design`` builds ``[1, t, post, post * t]`` with ``t`` in years from the date;
``fit_and_refit`` gives the fit and the model-based refit; ``guarded`` reads a term's
estimate with the widest of their intervals and its two-sided p-value.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.change.trend import select_series, usable_rows
from procmetrics.analyse.glmfit import ModelFit, fit_model
from procmetrics.analyse.measures.periods import period_midpoints, years_since
from procmetrics.analyse.memo import memoised
from procmetrics.analyse.result import Estimate
from procmetrics.errors import InsufficientData

#: names of the design's columns
TERMS = ["const", "time_years", "post", "post_time"]


def _grid_key(s: pd.DataFrame, at: pd.Timestamp) -> tuple:
    """The design's key: the period grid's bounds and the date, by value."""
    start, end = s["period_start"].values, s["period_end"].values
    return (start.dtype.str, start.tobytes(), end.dtype.str, end.tobytes(), at.value)


@memoised(key=_grid_key)
def design(s: pd.DataFrame, at: pd.Timestamp) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Design matrix, time in years and post indicator of the series' periods.

    It depends only on the period grid and the date, which the subsystems of one
    table share: inside :func:`~procmetrics.analyse.memo.kept_results` it is computed
    once per grid (the pandas time arithmetic was a tenth of a per-subsystem test).
    """
    t = years_since(period_midpoints(s), at)
    post = (s["period_start"] >= at).to_numpy(dtype=float)
    X = np.column_stack([np.ones(len(t)), t, post, post * t])
    return X, t, post


def series_rows(table: pd.DataFrame, metric: str, subsystem: str, kind: str, at: pd.Timestamp,
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


def fit_series(s, kind, at, alpha, dispersion_threshold, hac="auto", detail=True):
    X, _, _ = design(s, at)
    y, trials, exposure = _endog(s, kind)
    return fit_model(y, X, kind=kind, trials=trials, exposure=exposure, names=TERMS,
                     alpha=alpha, dispersion_threshold=dispersion_threshold, hac=hac,
                     detail=detail)


def to_utc(at: pd.Timestamp | str) -> pd.Timestamp:
    at = pd.Timestamp(at)
    return at.tz_localize("UTC") if at.tzinfo is None else at.tz_convert("UTC")


def sides(s: pd.DataFrame, metric: str, subsystem: str, at: pd.Timestamp
           ) -> tuple[np.ndarray, int, int]:
    post = (s["period_start"] >= at).to_numpy()
    n_before, n_after = int((~post).sum()), int(post.sum())
    if n_before < 3 or n_after < 3:
        raise InsufficientData(f"{metric} for {subsystem}: {n_before} periods before and "
                               f"{n_after} after {at:%Y-%m-%d}; need >= 3 on each side")
    return post, n_before, n_after


def fit_and_refit(s, kind, at, alpha, dispersion_threshold, hac, guard, detail=True):
    """The fit and, for the guarded interval, the model-based refit (whose diagnostics
    are never shown, so it skips them).

    The refit is the fit itself when it would repeat it: no HAC errors in the fit and
    the same choice of model at both dispersion thresholds (the fit is deterministic,
    so the same call gives the same coefficients and intervals)."""
    fit = fit_series(s, kind, at, alpha, dispersion_threshold, hac, detail)
    refit = None
    phi0 = fit.dispersion_initial
    if (guard and kind != "continuous" and fit.cov_type == "nonrobust" and phi0 is not None
            and (phi0 > dispersion_threshold) == (phi0 > 1.0)):
        refit = fit
    elif guard and kind != "continuous":
        try:
            refit = fit_series(s, kind, at, alpha, 1.0, "never", detail=False)
        except InsufficientData:
            refit = None
    return fit, refit


def not_estimable(kind: str, level: Estimate) -> bool:
    """A share or count whose level change has an unbounded interval (a share of 0 or 1,
    or no events, on one side of the date)."""
    bounds = [x if x is not None else np.nan for x in (level.value, level.low, level.high)]
    return kind != "continuous" and (not np.all(np.isfinite(bounds))
                                     or max(abs(bounds[1]), abs(bounds[2])) > 50)


def estimate_of(fit: ModelFit, term: str, name: str, unit: str, n: int) -> Estimate:
    p = fit.params          # by position: no index built per call (one per subsystem)
    i = list(p["term"]).index(term)
    return Estimate(name, float(p["estimate"].iat[i]), float(p["ci_low"].iat[i]),
                    float(p["ci_high"].iat[i]), fit.level, f"{fit.model}; {fit.cov_type} SE",
                    n, unit=unit)


def guarded(fit: ModelFit, refit: ModelFit | None, term: str, name: str, unit: str,
             n: int, df: int) -> tuple[Estimate, float | None, str]:
    """The estimate of ``term`` with the widest interval of ``fit`` and ``refit``
    (see the module docstring); also its two-sided p-value and which fit decided."""
    own = estimate_of(fit, term, name, unit, n)
    if own.low is None or own.high is None or not np.isfinite([own.low, own.high]).all():
        return own, None, ""
    z = float(stats.norm.ppf(0.5 + fit.level / 2))
    t = float(stats.t.ppf(0.5 + fit.level / 2, max(df, 1)))
    cands = []
    for label, f in (("fit", fit), ("refit", refit)):
        if f is None:
            continue
        e = estimate_of(f, term, name, unit, n)
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
