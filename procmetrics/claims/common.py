"""Helpers the claim families share: parameters, windows, flags, per-period counts."""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np
import pandas as pd

from procmetrics.claims import base as cl
from procmetrics.claims.base import ClaimContext, Param, Undecidable
from procmetrics.analyse.result import Caveat
from procmetrics.errors import ConfigError, InsufficientData

SHARE_METRICS = ("review_coverage", "independent_review", "unreviewed_self_commits",
                 "fix_ratio", "revert_ratio", "stable_request_share", "fixes_tag_adoption")
FIX_METRICS = ("fix_ratio", "stable_request_share", "fixes_tag_adoption")

GLM_METHOD = ("binomial GLM (logit) on per-period counts, quasi-binomial when "
              "overdispersed, HAC errors when autocorrelated")

SUBSYSTEM = Param("text", help="only commits touching this subsystem")
AFTER = Param("date", help="only data on or after this date ('policy' or YYYY-MM-DD)")
BEFORE = Param("date", help="only data before this date")
METRIC = Param("metric", True, help="a share metric: " + ", ".join(SHARE_METRICS))



def window(ctx: ClaimContext, p: Mapping[str, Any]) -> tuple[pd.Timestamp | None,
                                                               pd.Timestamp | None]:
    after = cl.resolve_date(p["after"], ctx, "after") if "after" in p else None
    before = cl.resolve_date(p["before"], ctx, "before") if "before" in p else None
    if after is not None and before is not None and after >= before:
        raise Undecidable("the window is empty: 'after' is not earlier than 'before'")
    return after, before


def subsystem_commits(ctx: ClaimContext, subsystem: str | None) -> pd.DataFrame:
    c = ctx.commits
    if subsystem:
        cs = ctx.commit_subsystems
        if cs is None or not (cs["subsystem"] == subsystem).any():
            raise ConfigError(f"subsystem {subsystem!r} does not exist in the store")
        c = c[c["hash"].isin(cs.loc[cs["subsystem"] == subsystem, "hash"])]
    return c


def flag_column(metric: str) -> tuple[str, str | None]:
    """(numerator flag, denominator flag or None = all commits) in commit_flags."""
    return {"review_coverage": ("reviewed", None), "independent_review": ("independent", None),
            "unreviewed_self_commits": ("unreviewed_self", None), "fix_ratio": ("fix", None),
            "revert_ratio": ("revert", None), "stable_request_share": ("stable_request", "fix_ref"),
            "fixes_tag_adoption": ("fix_ref", None),
            "applied_by_other": ("applied_other", None)}[metric]


def share_flags(ctx: ClaimContext, metric: str, subsystem: str | None) -> pd.DataFrame:
    from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags

    f = commit_flags(subsystem_commits(ctx, subsystem), ctx.trailers,
                     MetricConfig(period=ctx.period, date_column=f"{ctx.date_basis}_date"))
    num, den = flag_column(metric)
    if den is not None:
        f = f[f[den]]
    f = f[f["date"].notna()]
    return f.assign(hit=f[num].astype(bool))


def adoption_caveat(ctx: ClaimContext, metric: str) -> list[Caveat]:
    if metric not in FIX_METRICS or metric == "fixes_tag_adoption":
        return []
    from procmetrics.analyse.measures.metrics import MetricConfig, compute_period_metrics

    pm = compute_period_metrics(ctx.commits, ctx.trailers, tags=ctx.tags, config=MetricConfig(
        period=ctx.period, metrics=("fixes_tag_adoption",)))
    return [c for c in pm.caveats if c.code == "tag_adoption_rising"]


def per_period(f: pd.DataFrame, ctx: ClaimContext, split: pd.Timestamp | None = None
                ) -> pd.DataFrame:
    """Successes and trials per period (and side of ``split``), in time order."""
    from procmetrics.analyse.measures.periods import assign_periods

    labels, frame = assign_periods(f["date"], ctx.period, ctx.tags)
    d = f.assign(period=labels.to_numpy(),
                 after=(f["date"] >= split).to_numpy() if split is not None else False)
    g = d.groupby(["period", "after"], sort=False)
    out = pd.DataFrame({"x": g["hit"].sum(), "n": g.size(), "t": g["date"].min()}).reset_index()
    return out.sort_values(["t", "after"]).reset_index(drop=True)


def fit_share_glm(y: np.ndarray, X: np.ndarray, trials: np.ndarray, names: list[str], level: float):
    from procmetrics.analyse.glmfit import fit_model

    try:
        return fit_model(y, X, kind="proportion", trials=trials, names=names,
                         alpha=round(1 - level, 10), hac="auto")
    except InsufficientData as exc:
        raise Undecidable(f"the model cannot be fitted: {exc}") from exc


def pct(x: float) -> str:
    return f"{100 * x:.1f}%"
