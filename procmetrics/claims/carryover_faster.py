"""Claim kind "carry-over got faster after DATE" (``carryover_faster_after``).

Carry-over latencies (upstream fix to its arrival in the tree) are right-censored
at the date the tree is judged at, not truncated: every upstream fix that
concerns the tree is seen whether or not it arrived. Kaplan–Meier and Cox
therefore apply directly (module :mod:`procmetrics.analyse.carryover.latency`).

The decision (one-sided at alpha/2 in the claimed direction, module
:mod:`procmetrics.claims.base`), on a common follow-up horizon H (latencies
censored at H for both cohorts, so both are compared over the same range):

* **Trend-aware Cox** when proportional hazards hold (Schoenfeld test): the
  hazard of arrival depends on a step at the date (fix landed upstream on or
  after it) *and* on the upstream fix date as a continuous covariate (a
  log-linear trend). Supported when the whole interval of the step's hazard
  ratio lies above 1: a speed-up at the date beyond the trend. A steady trend
  with no step at the date is not attributed to the date.
* **Restricted mean** otherwise: the difference in Kaplan–Meier restricted
  mean latency up to H, before minus after. Supported when its whole interval
  lies above 0. This compares cohorts and attributes nothing to the date (the
  verdict says so).

References
----------
Cox (1972); Grambsch & Therneau (1994); Royston & Parmar (2013); Kaplan &
Meier (1958).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.result import Estimate
from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Param, Undecidable
from procmetrics.errors import InsufficientData

DAY = 86400.0
KIND = "carryover_faster_after"
SPECS: dict[str, KindSpec] = {
    KIND: KindSpec(
        "upstream fixes landed on or after the date are carried over into the tree faster "
        "than those landed before",
        {"date": Param("date", True), "horizon_days": Param("days")},
        "within a common follow-up horizon H (latencies censored at H; fixes not yet carried "
        "censored at the tree's tip): when proportional hazards hold (Schoenfeld test), Cox "
        "hazard ratio of arrival for a step at the date, adjusted for a log-linear trend in "
        "the upstream fix date; else the difference in Kaplan-Meier restricted mean latency "
        "up to H, before minus after (a cohort comparison)",
        "faster after: step hazard ratio > 1, or restricted-mean difference > 0",
        ("section:carryover", "figure:carryover-curves", "table:carryover-missing")),
}
#: the cohort comparison's limit, stated in every verdict that rests on it
NO_ATTRIBUTION = ("this compares the fixes landed upstream before the date with those landed "
                  "from it and attributes nothing to the date itself: carry-over that was "
                  "already getting faster before the date gives the same result")
TREND_NOTE = ("the step at the date is tested over a log-linear trend in the upstream fix "
              "date: a steady speed-up with no change at the date does not support this claim")


def survival_frame(table: pd.DataFrame) -> pd.DataFrame:
    """``fix_date``, ``latency`` (days, >= 0) and ``carried`` of the due fixes that concern
    the tree (the population of :func:`procmetrics.analyse.carryover.latency.survival_data`)."""
    pop = table[table["status"].isin(["carried", "missing"])]
    carried = (pop["status"] == "carried").to_numpy()
    dur = np.where(carried, pop["latency_days"].to_numpy(float),
                   pop["gap_days"].to_numpy(float))
    return pd.DataFrame({"fix_date": pd.to_datetime(pop["fix_date"]).to_numpy(),
                         "latency": np.clip(dur, 0.0, None), "carried": carried})


def default_horizon(date: pd.Timestamp, end: pd.Timestamp) -> float:
    """Half the span from the date to the end, at most a year (as the lifetime comparison)."""
    return float(min(365.0, (end - date).days / 2))


def _identified_to(t: np.ndarray, event: np.ndarray, horizon: float) -> bool:
    """The Kaplan-Meier curve is known up to ``horizon``: someone is followed that far,
    or it reaches 0 before (no censoring at the longest time)."""
    last = float(t.max())
    return last >= horizon or not bool(np.any(~event[t == last]))


def judge_faster(claim: Claim, frame: pd.DataFrame, date: pd.Timestamp, end: pd.Timestamp, *,
                 horizon: float | None = None, min_n: int = 20) -> ClaimVerdict:
    """The decision on a :func:`survival_frame` (pure: the simulations call it).

    ``end`` is the date the tree is judged at (its tip); fixes are "after" when
    landed upstream on or after ``date``.
    """
    from procmetrics.analyse.lifetimes.cox import fit_cox
    from procmetrics.analyse.lifetimes.rmst import rmst_difference

    if pd.isna(end) or date >= end:
        raise Undecidable(f"the tree is judged at {end:%Y-%m-%d}, not after {date:%Y-%m-%d}")
    H = float(horizon or default_horizon(date, end))
    if not H > 0:
        raise Undecidable("the follow-up horizon is empty")
    lat = frame["latency"].to_numpy(float)
    event = frame["carried"].to_numpy(bool) & (lat <= H)
    t = np.minimum(lat, H)
    after = (frame["fix_date"] >= date).to_numpy()
    n_b, n_a = int((~after).sum()), int(after.sum())
    if min(n_b, n_a) < min_n:
        raise Undecidable(f"{n_b} upstream fixes landed before {date:%Y-%m-%d} and {n_a} from "
                          f"it concern the tree (at least {min_n} each are needed)")
    known = [_identified_to(t[g], event[g], H) for g in (~after, after)]
    rm = rmst_difference(t[~after], t[after], horizon=H, level=claim.level,
                         observed_before=event[~after], observed_after=event[after])
    rm = Estimate(f"restricted mean carry-over latency up to {H:.0f} days, before minus "
                  "after", rm.value, rm.low, rm.high, rm.level, rm.method, rm.n, "days")
    years = ((frame["fix_date"] - date).dt.total_seconds() / (365.25 * DAY)).to_numpy(float)
    d = pd.DataFrame({"t": t, "e": event, "after": after.astype(float), "trend": years})
    extra = [f"compared within a follow-up of {H:.0f} days: {n_b} upstream fixes landed "
             f"before {date:%Y-%m-%d} ({int(event[~after].sum())} carried within it) and "
             f"{n_a} from it ({int(event[after].sum())} carried within it); fixes not yet "
             "carried are censored at the tree's tip"]
    rm_text = (f"restricted mean carry-over latency up to {H:.0f} days, before minus after: "
               f"{rm.value:+.1f} days [{rm.low:+.1f}, {rm.high:+.1f}]")
    if not known[1]:
        rm_text += (" (the curve of the fixes landed from the date is held flat beyond their "
                    "longest follow-up, which can only make them look slower)")
    try:
        res = fit_cox(d, "t", "e", level=claim.level, fallback=False)
    except InsufficientData as exc:
        raise Undecidable(str(exc)) from exc
    summ = res.summary.set_index("term")
    if "after" not in summ.index or "trend" not in summ.index:
        raise Undecidable("the step at the date cannot be told apart from the trend "
                          "(a covariate was dropped as constant or aliased)")
    cav = [c for c in res.caveats if not c.message.startswith("proportional hazards")]
    method = SPECS[KIND].method
    step, trend = summ.loc["after"], summ.loc["trend"]
    if res.ph_holds:
        est = Estimate("hazard ratio of arrival at the date (step), after/before, "
                       "adjusted for the trend", float(step["hazard_ratio"]),
                       float(step["hr_low"]), float(step["hr_high"]), claim.level,
                       res.method, res.n)
        test = {"name": "Wald z of the step coefficient, one-sided (faster after)",
                "p_value": float(stats.norm.sf(float(step["z"])))}
        extra += ["proportional hazards hold (Schoenfeld test), so the trend-aware Cox "
                  "model decides; a step hazard ratio above 1 means faster carry-over from "
                  "the date on", TREND_NOTE,
                  f"trend: hazard ratio per year of upstream fix date "
                  f"{float(trend['hazard_ratio']):.3g} [{float(trend['hr_low']):.3g}, "
                  f"{float(trend['hr_high']):.3g}] (evidence)",
                  rm_text + " (evidence; a cohort comparison)"]
        return cl.decide(claim, est, side="above", threshold=1.0, what="step hazard ratio "
                         "of arrival (after/before, trend-adjusted)",
                         method=method + "; used: trend-aware Cox", n=res.n, test=test,
                         diagnostics=res.diagnostics, caveats=cav, extra=extra)
    if not known[0]:
        raise Undecidable(f"proportional hazards do not hold, and the follow-up of the fixes "
                          f"landed before {date:%Y-%m-%d} does not reach the horizon of "
                          f"{H:.0f} days: choose a shorter horizon_days")
    test = {"name": "Wald z of the restricted-mean difference, one-sided (faster after)",
            "p_value": cl.wald_p_above(rm)}
    extra += [f"proportional hazards do not hold (Schoenfeld test), so no single hazard "
              f"ratio describes the change; the restricted mean latency up to {H:.0f} days "
              "decides (a difference above 0 means faster carry-over after the date)",
              NO_ATTRIBUTION,
              f"trend-aware Cox step hazard ratio {float(step['hazard_ratio']):.3g} "
              f"[{float(step['hr_low']):.3g}, {float(step['hr_high']):.3g}] (evidence only: "
              "its assumption fails)"]
    return cl.decide(claim, rm, side="above", threshold=0.0,
                     what=f"restricted mean carry-over latency up to {H:.0f} days, before "
                     "minus after", method=method + "; used: restricted mean (cohorts)",
                     n=rm.n, test=test, diagnostics=res.diagnostics, caveats=cav,
                     fmt=lambda x: f"{x:+.1f} days" if x else "0 days", extra=extra)


def eval_faster(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    if ctx.carryover is None:
        raise Undecidable("no upstream reference is mined for this tree: run 'procmetrics "
                          "mine TREE --upstream UPSTREAM' first")
    date = cl.resolve_date(claim.params["date"], ctx, "date")
    frame = survival_frame(ctx.carryover)
    end = ctx.carryover_as_of
    if end is None:     # a table built without its date: the latest date it knows
        end = (frame["fix_date"] + pd.to_timedelta(frame["latency"], unit="D")).max()
    return judge_faster(claim, frame, date, pd.Timestamp(end),
                        horizon=claim.params.get("horizon_days"), min_n=ctx.min_n)


EVALUATORS = {KIND: eval_faster}
