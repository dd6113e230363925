"""Reliability growth from fix times: trend tests first, NHPP models only if earned.

The event process is the stream of *fixing commits* (a commit that fixes
several introducers counts once; only a defect's first fix counts), measured
in days from an origin: the start of observation (by default the earliest
introduction date; the ``growth`` command uses the start of the fix-linking
era, because before it no fix can appear in the stream), or a release tag's
date when looking at one release's fixes after its tag. Observation ends at the end of
the history (time-truncated).

Order of work in :func:`analyse_growth`:

1. Laplace and power-law (MIL-HDBK-189) trend tests; their disagreement is
   reported.
2. A model is fitted only when there is evidence of growth. With the default
   rule ``require="own"`` each model needs its own test: Goel–Okumoto needs
   the Laplace test (its MLE exists only when fixes crowd early), the power
   law needs the MIL-HDBK-189 test. Otherwise the model is refused
   (``model_refused`` caveat with the reason).
3. Fitted models get goodness-of-fit (CvM/KS on transformed times), a
   prequential u-plot, a hold-out check and predictions with intervals
   (``extrapolated=True``), each refused with a reason where not supported.
   A failed CvM, KS or u-plot check withholds every prediction (the u-plot
   fails when the model's own one-step predictions were wrong on this
   history); a failed hold-out check is reported but, its interval ignoring
   parameter uncertainty, does not withhold them.

What commit data is not (recorded as caveats on every result): fixes are not
field failures; calendar time is not usage or test exposure; the code base
grows, so the pool of defects is not fixed; tagging and linking practice
changes over time.

``GrowthResult.curve`` columns (:data:`CURVE_COLUMNS`): ``model``, ``time``,
``observed`` (cumulative fixes, NaN beyond the end), ``fitted``, ``low``,
``high`` (bootstrap band), ``extrapolated``.
``GrowthResult.events`` columns (:data:`EVENT_COLUMNS`): ``fix_hash``,
``fix_date``, ``time_days``, ``n_defects``.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal, Sequence

import numpy as np
import pandas as pd

from procmetrics.analyse.growth.checks import (
    Prediction, holdout_check, predictions, u_plot_check, uniformity_checks,
)
from procmetrics.analyse.growth.nhpp import FITTERS, NHPPFit, mean_value
from procmetrics.analyse.result import Caveat, Diagnostic, caveat, to_plain
from procmetrics.analyse.growth.trendtests import TrendTests, trend_tests
from procmetrics.errors import InsufficientData

#: what one fix event is, in words; printed beside every count of fix events
FIX_EVENTS_DEFINITION = ("fix events (commits that are the first resolved Fixes: fix of at "
                         "least one defect, each commit counted once, dated after the start "
                         "of observation: by default the month from which Fixes: linking "
                         "has settled, the lifetimes' rule)")
CURVE_COLUMNS = ["model", "time", "observed", "fitted", "low", "high", "extrapolated"]
EVENT_COLUMNS = ["fix_hash", "fix_date", "time_days", "n_defects"]
MODELS = ("goel_okumoto", "power_law")
_OWN_TEST = {"goel_okumoto": "laplace", "power_law": "power_law"}


def commit_data_caveats() -> tuple[Caveat, ...]:
    """What fix data from commits is not; attached to every growth result."""
    return (
        caveat("not_identifiable", "fixes are not field failures: a fix records a defect "
               "found and linked, not a failure in service", "info"),
        caveat("not_identifiable", "calendar time is not exposure: usage and testing effort "
               "are unknown and change over time", "info"),
        caveat("not_identifiable", "the code base grows: new code adds defects, so the pool "
               "of defects is not fixed as the models assume", "info"),
        caveat("tag_adoption_rising", "tagging and Fixes:-linking practice changes over time; "
               "a changing fix rate can be a changing habit", "info"),
    )


@dataclass(frozen=True)
class FixTimes:
    """The fix events of one scope, in days from ``origin`` up to ``end_days``."""

    events: pd.DataFrame
    origin: pd.Timestamp
    end_date: pd.Timestamp
    end_days: float
    scope: str
    n_dropped: int
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)

    @property
    def times(self) -> np.ndarray:
        return self.events["time_days"].to_numpy(float)

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class ModelResult:
    """One growth model: fitted or refused, with diagnostics and predictions."""

    model: str
    fitted: bool
    refused_reason: str
    fit: NHPPFit | None
    diagnostics: tuple[Diagnostic, ...]
    u_values: tuple[float, ...]
    predictions: tuple[Prediction, ...]

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class GrowthResult:
    """Trend tests, growth models and the curve data for one scope."""

    scope: str
    unit: str
    origin: pd.Timestamp
    end_date: pd.Timestamp
    n: int
    trend: TrendTests | None
    models: tuple[ModelResult, ...]
    curve: pd.DataFrame
    events: pd.DataFrame
    refused: bool
    refused_reason: str
    population: str
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)

    def model(self, name: str) -> ModelResult:
        return next(m for m in self.models if m.model == name)


def _utc(x: Any) -> pd.Timestamp:
    ts = pd.Timestamp(x)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def select_fix_times(defects: pd.DataFrame, *, end: Any, origin: Any = None,
                     subsystem: str | None = None, after_tag: str | None = None,
                     tags: pd.DataFrame | None = None,
                     tag_containment: pd.DataFrame | None = None,
                     batch_hours: float = 0.0) -> FixTimes:
    """Fix events for the whole project, one subsystem, or one release after its tag.

    Parameters
    ----------
    defects : ``DefectTable.defects``.
    end : end of observation (``DefectTable.end_date``).
    origin : start of observation; default the earliest introduction date.
    subsystem : keep defects whose introducer touched this subsystem.
    after_tag : keep defects shipped in this release tag (introducer contained
        in the tag) fixed after the tag's date; the origin becomes the tag date.
    tags : tidy ``tags`` table (needed with ``after_tag``).
    tag_containment : ``tag, commit_hash, contains``; without it an introducer
        dated before the tag is taken as shipped (a heuristic, flagged).
    batch_hours : fixing commits within this many hours of the first commit of
        a batch count as one fix event (its ``fix_hash`` is the batch's first
        commit, ``n_defects`` the batch total). Patch series applied together
        otherwise give near-simultaneous events, which NHPP models do not
        expect; 0 (default) keeps every commit and records a caveat when more
        than 5 % of gaps are under an hour.
    """
    d = defects
    cav: list[Caveat] = []
    scope = "whole history"
    end_ts = _utc(end)
    origin_ts = _utc(origin) if origin is not None else (
        d["intro_date"].min() if len(d) else end_ts)
    if subsystem is not None:
        names = d["subsystems"].astype(object).where(d["subsystems"].notna(), "").astype(str)
        d = d[names.str.split(";").apply(lambda s: subsystem in s).astype(bool)]
        scope = f"subsystem {subsystem}"
    if after_tag is not None:
        if tags is None or not (tags["name"] == after_tag).any():
            raise InsufficientData(f"tag {after_tag!r} not found in the tags table")
        row = tags[tags["name"] == after_tag].iloc[0]
        origin_ts = _utc(row["tag_date"])
        if tag_containment is not None:
            tc = tag_containment[(tag_containment["tag"] == after_tag)
                                 & tag_containment["contains"].astype(bool)]
            shipped = d["introducer_hash"].isin(set(tc["commit_hash"]))
        else:
            shipped = d["intro_date"] <= origin_ts
            cav.append(caveat("heuristic_classification", "without tag ancestry, an "
                              "introducer dated before the tag is taken as shipped in it"))
        d = d[shipped]
        early = d["fix_date"] <= origin_ts
        n_before = int(early.sum())
        d = d[~early]
        scope += f"{'' if scope == 'whole history' else ','} fixes of release {after_tag} " \
                 "after its tag"
        scope = scope.replace("whole history", "").strip(", ")
        scope += f" ({n_before} shipped defect(s) fixed before the tag left out)"
    d = d[~d["negative"].astype(bool)]
    ev = (d.groupby("fix_hash").agg(fix_date=("fix_date", "min"),
                                    n_defects=("introducer_hash", "size")).reset_index())
    ev["time_days"] = (ev["fix_date"] - origin_ts).dt.total_seconds() / 86400.0
    early, late = ev["time_days"] <= 0, ev["fix_date"] > end_ts
    keep = ~early & ~late
    n_drop = int((~keep).sum())
    if early.any():
        cav.append(caveat("too_few_observations", f"{int(early.sum())} fix(es) dated at or "
                          f"before the origin {origin_ts:%Y-%m-%d} were left out (observation "
                          "starts at the origin)", "info"))
    if late.any():
        cav.append(caveat("clock_skew", f"{int(late.sum())} fix(es) dated after the end of "
                          "the history were left out", "info"))
    ev = ev[keep].sort_values(["time_days", "fix_hash"]).reset_index(drop=True)
    if batch_hours > 0 and len(ev):
        ev = _batches(ev, batch_hours / 24.0)
        scope += f" (fixes within {batch_hours:g} h batched)"
    gaps = np.diff(ev["time_days"].to_numpy(float))
    n_close = int((gaps < 1 / 24).sum())
    if len(gaps) and n_close / len(gaps) > 0.05:
        cav.append(caveat("tuning_sensitive", f"{n_close} of {len(gaps)} gaps between fix "
                          "events are under an hour (patch series applied together): growth "
                          "models assume one event at a time and their u-plot and fit checks "
                          "suffer; consider batching (batch_hours, CLI --batch-hours)"))
    end_days = float((end_ts - origin_ts).total_seconds() / 86400.0)
    return FixTimes(ev[EVENT_COLUMNS], origin_ts, end_ts, end_days, scope, n_drop, tuple(cav))


def _batches(ev: pd.DataFrame, window_days: float) -> pd.DataFrame:
    """Merge events closer than ``window_days`` to the first event of their batch."""
    t = ev["time_days"].to_numpy(float)
    batch, start, k = np.zeros(len(t), int), t[0], 0
    for i in range(1, len(t)):
        if t[i] - start >= window_days:
            k, start = k + 1, t[i]
        batch[i] = k
    g = ev.assign(_b=batch).groupby("_b", sort=True)
    return pd.DataFrame({"fix_hash": g["fix_hash"].first(), "fix_date": g["fix_date"].first(),
                         "time_days": g["time_days"].first(),
                         "n_defects": g["n_defects"].sum()}).reset_index(drop=True)


def _refused(model: str, reason: str) -> ModelResult:
    return ModelResult(model, False, reason, None, (), (), ())


def analyse_growth(fix_times: FixTimes, *, models: Sequence[str] = MODELS, alpha: float = 0.05,
                   require: Literal["own", "both", "either"] = "own", level: float = 0.95,
                   ahead: float = 90.0, n_boot: int = 200, min_events: int = 10,
                   rng: np.random.Generator | None = None) -> GrowthResult:
    """Trend tests, then (if earned) NHPP growth models with checks and predictions.

    Parameters
    ----------
    fix_times : from :func:`select_fix_times`.
    models : any of ``"goel_okumoto"``, ``"power_law"``.
    alpha : level of the trend tests and goodness-of-fit checks.
    require : ``"own"`` (each model needs its own trend test), ``"both"`` or
        ``"either"`` test showing growth.
    ahead : days ahead for the expected-fixes prediction and the band.
    n_boot : parametric bootstrap refits for prediction intervals and band.
    min_events : fewer fix events -> no tests, no models.

    References
    ----------
    Goel & Okumoto (1979); Crow (1974); MIL-HDBK-189C (2011); Abdel-Ghaly,
    Chan & Littlewood (1986); Cox & Lewis (1966).
    """
    rng = rng if rng is not None else np.random.default_rng(20240603)
    t, T = fix_times.times, fix_times.end_days
    cav = list(fix_times.caveats) + list(commit_data_caveats())
    pop = (f"{FIX_EVENTS_DEFINITION} ({fix_times.scope}), in days since "
           f"{fix_times.origin:%Y-%m-%d}, observed to {fix_times.end_date:%Y-%m-%d}")
    obs_curve = pd.DataFrame({"model": "observed", "time": np.concatenate([[0.0], t]),
                              "observed": np.arange(len(t) + 1, dtype=float),
                              "fitted": np.nan, "low": np.nan, "high": np.nan,
                              "extrapolated": False})[CURVE_COLUMNS]

    def done(trend: TrendTests | None, results: list[ModelResult], curves: list[pd.DataFrame],
             reason: str) -> GrowthResult:
        refused = not any(m.fitted for m in results)
        for m in results:
            if not m.fitted:
                cav.append(caveat("model_refused", f"{m.model}: {m.refused_reason}"))
            for p in m.predictions:
                if p.estimate is None:
                    cav.append(caveat("model_refused", f"{m.model} {p.name}: {p.refused_reason}"))
            if any(dg.verdict == "fail" for dg in m.diagnostics):
                cav.append(caveat("diagnostic_failed", f"{m.model}: " + ", ".join(
                    dg.name for dg in m.diagnostics if dg.verdict == "fail")))
        if any(m.fitted for m in results):
            cav.append(caveat("extrapolation", "predictions extrapolate the fitted fix curve "
                              "beyond the observed history"))
        curve = pd.concat([obs_curve] + curves, ignore_index=True)[CURVE_COLUMNS]
        return GrowthResult(fix_times.scope, "days", fix_times.origin, fix_times.end_date,
                            len(t), trend, tuple(results), curve, fix_times.events, refused,
                            reason if refused else "", pop, tuple(cav))

    if len(t) < min_events or T <= 0:
        cav.append(caveat("too_few_observations", f"{len(t)} fix events; at least "
                          f"{min_events} are needed for trend tests and growth models"))
        return done(None, [_refused(m, "too few fix events") for m in models], [],
                    f"too few fix events ({len(t)} < {min_events})")
    trend = trend_tests(t, T, alpha=alpha, require="either" if require == "own" else require)
    if not trend.agree:
        cav.append(caveat("tuning_sensitive", trend.message))
    results: list[ModelResult] = []
    curves: list[pd.DataFrame] = []
    grid = np.linspace(0.0, T + ahead, 121)
    for name in models:
        test = trend.laplace if _OWN_TEST[name] == "laplace" else trend.power_law
        if require == "own" and test.direction != "growth":
            results.append(_refused(name, f"its trend test ({test.name}) shows "
                                    f"{test.direction} (p_growth={test.p_growth:.3g})"))
            continue
        if require != "own" and not trend.evidence_of_growth:
            results.append(_refused(name, f"no evidence of growth: {trend.message}"))
            continue
        try:
            fit = FITTERS[name](t, T, level=level)
        except InsufficientData as exc:
            results.append(_refused(name, f"fit failed: {exc}"))
            continue
        diags = uniformity_checks(fit, t, alpha) + [holdout_check(name, t, T, level=level)]
        up, u = u_plot_check(name, t, alpha)
        diags.append(up)
        preds, thetas = predictions(fit, t, ahead=ahead, level=level, n_boot=n_boot, rng=rng)
        gof_fail = [dg.name for dg in diags if dg.verdict == "fail" and dg.name in
                    ("cramer_von_mises", "kolmogorov_smirnov", "u_plot_distance")]
        if gof_fail:
            # a failed u-plot means the model's one-step predictions were already wrong
            # on this history: no forecast from it either
            preds = [Prediction(p.name, None, "goodness of fit failed ("
                                + ", ".join(gof_fail) + "); no prediction from a model the "
                                "data reject") for p in preds]
        band = np.array([mean_value(name, tuple(th), grid) for th in thetas]) \
            if len(thetas) else np.full((1, len(grid)), np.nan)
        a = (1 - level) / 2
        curves.append(pd.DataFrame({
            "model": name, "time": grid, "observed": np.nan,
            "fitted": fit.mean_value(grid), "low": np.quantile(band, a, axis=0),
            "high": np.quantile(band, 1 - a, axis=0), "extrapolated": grid > T}))
        results.append(ModelResult(name, True, "", fit, tuple(diags), tuple(map(float, u)),
                                   tuple(preds)))
    return done(trend, results, curves, "no model earned a fit: " + "; ".join(
        m.refused_reason for m in results))
