"""Claim kind: defect lifetimes shortened *at* a date, beyond the trend before it.

``lifetimes_shorter_after`` compares the defects introduced before a date with
those introduced from it; lifetimes that were already getting shorter year by
year give the same answer whether or not anything happened at the date, and
that kind says so. This kind asks the question a policy change raises: did
lifetimes drop at the date beyond the trend they followed before?

Model: the common-horizon cohort of ``lifetimes_shorter_after`` (defects
introduced at least H before the end and fixed within H, so right truncation
cannot favour either side; every lifetime in it is observed, so its restricted
mean up to H is its plain mean) and the segmented regression of the share
claims, fitted to the lifetimes themselves::

    lifetime = b0 + b1 years + b2 after + b3 after * years + error

``lifetime`` is ``log(1 + days)`` (lifetimes are skewed and a trend in them is
multiplicative), ``years`` the introduction date in years from the claimed
date, and only defects introduced within ``window_years`` (default 3) of the
date take part: a local fit on each side, as in a regression discontinuity in
time, so that a trend that is not a straight line over a whole decade is not
read as a step. ``exp(b2)`` is the factor by which (geometric mean) lifetimes
within H changed at the date beyond the pre-date trend ``b1`` per year; ``b3``
lets the trend change after the date so that a new slope is not read as a step.
Least squares with heteroskedasticity-consistent (HC3) standard errors and
Student's t quantile: no distribution and no proportional hazards are assumed.
Supported only when the whole interval of ``exp(b2)`` lies below 1 (one-sided
at alpha/2). A Cox model with the same design is shown as evidence when
proportional hazards hold.

Measured (``tests/claims/test_calibration_lifetime_step.py``, 700 visible
defects, log-normal lifetimes): with the whole decade in the fit, a steady trend
of the log median of -0.3 a year (20-fold over ten years) and no step gave 19
false supports in 400 (0.048); with the three-year window 15 in 400 (0.038,
within the Monte-Carlo error of 0.025 at 400 replicates), at a power of 398 in
400 for a median of 120 -> 45 days.

References
----------
Cox, D. R. (1972). Regression models and life-tables. JRSS B 34:187-220.
Grambsch, P. M. & Therneau, T. M. (1994). Proportional hazards tests and
diagnostics based on weighted residuals. Biometrika 81:515-526.
Wagner, A. K. et al. (2002). Segmented regression analysis of interrupted time
series studies. J. Clin. Pharm. Ther. 27:299-309 (the segmented design).
Hausman, C. & Rapson, D. S. (2018). Regression discontinuity in time:
considerations for empirical applications. Annu. Rev. Resour. Econ.
10:533-552 (local fits on each side of a date).
MacKinnon, J. G. & White, H. (1985). Some heteroskedasticity-consistent
covariance matrix estimators. J. Econometrics 29:305-325 (HC3).
Kalbfleisch, J. D. & Lawless, J. F. (1989). Inference based on retrospective
ascertainment. JASA 84:360-372 (a common observation window under right
truncation).
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics import textfmt
from procmetrics.analyse.result import Diagnostic, Estimate
from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable
from procmetrics.claims.common import SUBSYSTEM
from procmetrics.claims.lifetimes import defect_table, horizon_cohort
from procmetrics.errors import InsufficientData

KIND = "lifetimes_shortened_at"
METHOD = ("within a common follow-up horizon H (defects introduced >= H before the end, "
          "fixed within H) and a window of W years either side of the date (default 3): "
          "segmented least-squares regression of log(1 + lifetime in days) on the "
          "introduction date, a step at the date and a slope change after it, HC3 standard "
          "errors, t quantile; the step's lifetime ratio decides")
#: default half-width of the local window, years either side of the date
WINDOW_YEARS = 3.0
SPECS: dict[str, KindSpec] = {
    KIND: KindSpec(
        "defects introduced from the date on are fixed sooner than the trend before the "
        "date predicts",
        {"date": Param("date", True), "horizon_days": Param("days"),
         "window_years": Param("years", help="years either side of the date (default 3)"),
         "subsystem": SUBSYSTEM},
        METHOD, "shorter at the date: lifetime ratio of the step < 1",
        ("section:lifetimes", "figure:lifetime-before-after")),
}

def eval_shortened_at(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    """Judge :data:`KIND` (see :func:`judge_shortened_at`)."""
    p = claim.params
    date = cl.resolve_date(p["date"], ctx, "date")
    # the same defects as lifetimes_shorter_after: every resolved link in the context's
    # link era and clock (the robustness panel varies both)
    table = defect_table("lifetimes_shorter_after", ctx)
    return judge_shortened_at(claim, table, date, horizon=p.get("horizon_days"),
                              window_years=p.get("window_years"),
                              subsystem=p.get("subsystem"), min_n=ctx.min_n)


def judge_shortened_at(claim: Claim, table, date: pd.Timestamp, *,
                       horizon: float | None = None, window_years: float | None = None,
                       subsystem: str | None = None, min_n: int = 20,
                       cox_evidence: bool = True) -> ClaimVerdict:
    """The verdict of :data:`KIND` on a defect table (module docstring).

    ``cox_evidence=False`` leaves out the Cox model shown beside the verdict (it never
    decides; the calibration simulations skip it to run faster).
    """
    import statsmodels.api as sm

    d, cohort, horizon = horizon_cohort(table, date, horizon=horizon, subsystem=subsystem,
                                        min_n=min_n)
    w = float(window_years or WINDOW_YEARS)
    years_all = (d["intro_date"] - date).dt.total_seconds().to_numpy() / (365.25 * 86400)
    inside = np.abs(years_all) <= w
    n_outside = int((~inside).sum())
    d, years = d[inside], years_all[inside]
    after = d["after"].to_numpy(float)
    n_b, n_a = int((after == 0).sum()), int((after == 1).sum())
    if min(n_b, n_a) < min_n:
        raise Undecidable(f"within {w:g} years of {date:%Y-%m-%d} and a follow-up of "
                          f"{horizon:.0f} days there are {n_b} defects introduced before and "
                          f"{n_a} after the date (at least {min_n} each are needed)")
    days = d["lifetime"].to_numpy(float)
    y = np.log1p(days)
    X = np.column_stack([np.ones(len(y)), years, after, after * years])
    if np.linalg.matrix_rank(X - np.r_[0.0, X[:, 1:].mean(axis=0)]) < X.shape[1]:
        raise Undecidable("the segmented design is not of full rank: the step at the date "
                          "cannot be told apart from the trend")
    fit = sm.OLS(y, X).fit(cov_type="HC3")
    dfree = int(fit.df_resid)
    q = float(stats.t.ppf(0.5 + claim.level / 2, dfree))
    b, se = np.asarray(fit.params, float), np.asarray(fit.bse, float)

    def est(i: int, name: str, unit: str) -> Estimate:
        return Estimate(name, float(b[i]), float(b[i] - q * se[i]), float(b[i] + q * se[i]),
                        claim.level, f"least squares, HC3 SE, t quantile ({dfree} df)",
                        len(y), unit=unit)

    step = _ratio(est(2, "lifetime ratio at the date beyond the pre-date trend", "ratio"))
    pre = _ratio(est(1, "pre-date trend of lifetimes, ratio per year", "ratio per year"))
    slope = _ratio(est(3, "change of that trend after the date, ratio per year",
                       "ratio per year"))
    resid = np.asarray(fit.resid, float)
    diags = (
        Diagnostic("design_rank", 4.0, "full column rank", "pass",
                   "numpy.linalg.matrix_rank of the centred design"),
        Diagnostic("residual_spread_ratio", _spread_ratio(resid, after), "informative",
                   "pass", "sd of residuals after / before the date (HC3 allows unequal "
                   "spread)"),
    )
    extra = [f"compared: {cohort.population}, introduced within {w:g} years of the date; "
             f"{n_b} defects introduced before {date:%Y-%m-%d} and {n_a} from it (median "
             f"lifetime {np.median(days[after == 0]):.0f} and "
             f"{np.median(days[after == 1]):.0f} days); {cohort.n_too_recent} introduced "
             f"less than {horizon:.0f} days before the end, {cohort.n_beyond_horizon} fixed "
             f"later than that and {n_outside} introduced further from the date are not "
             "compared",
             f"pre-date trend: lifetimes ×{_ci(pre)} per year (a ratio below 1 means they "
             "were already getting shorter before the date)",
             f"trend change after the date ×{_ci(slope)} per year (evidence only: the step "
             "decides)"]
    cox = _cox_step(years, after, days, claim.level) if cox_evidence else ""
    if cox:
        extra.append(cox)
    tval = float(b[2] / se[2]) if se[2] > 0 else float("-inf")
    test = {"name": "t statistic of the step (HC3), one-sided (shorter at the date)",
            "p_value": float(stats.t.cdf(tval, dfree))}
    v = cl.decide(claim, step, side="below", threshold=1.0,
                  what="lifetime ratio at the date beyond the pre-date trend",
                  method=METHOD, n=len(y), test=test, diagnostics=diags, caveats=(),
                  fmt=lambda x: f"×{x:.3g}", extra=extra)
    reasons = list(v.reasons)
    if v.verdict == cl.NOT_SUPPORTED and pre.high is not None and pre.high < 1:
        reasons.insert(0, "lifetimes were already getting shorter before the date "
                          f"(×{_ci(pre)} per year); the data show no change at the date "
                          "beyond that trend")
    return replace(v, reasons=tuple(reasons))


def _ratio(e: Estimate) -> Estimate:
    """A coefficient on the log(1 + days) scale as a lifetime ratio."""
    return Estimate(e.name, float(np.exp(e.value)), float(np.exp(e.low)),
                    float(np.exp(e.high)), e.level, e.method + "; exponentiated", e.n,
                    unit=e.unit)


def _spread_ratio(resid: np.ndarray, after: np.ndarray) -> float:
    sb, sa = np.std(resid[after == 0]), np.std(resid[after == 1])
    return float(sa / sb) if sb > 0 else float("nan")


def _cox_step(years: np.ndarray, after: np.ndarray, y: np.ndarray, level: float) -> str:
    """The same design as a Cox model (evidence only, when proportional hazards hold)."""
    from procmetrics.analyse.lifetimes.cox import fit_cox

    data = pd.DataFrame({"lifetime": y, "event": True, "years": years, "after": after,
                         "after_years": after * years})
    try:
        res = fit_cox(data, "lifetime", "event", level=level, fallback=False)
    except InsufficientData:
        return ""
    if not res.ph_holds or res.dropped_terms:
        return ("Cox model with the same design not shown: proportional hazards do not "
                "hold (Schoenfeld test)" if not res.ph_holds else "")
    r = res.summary.set_index("term").loc["after"]
    return (f"Cox model with the same design: hazard ratio of fixing at the date "
            f"{textfmt.interval(r['hazard_ratio'], r['hr_low'], r['hr_high'])} (evidence "
            "only; above 1 means faster fixing)")


def _ci(e: Estimate) -> str:
    return textfmt.interval(e.value, e.low, e.high)


EVALUATORS = {KIND: eval_shortened_at}
