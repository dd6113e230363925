"""Before/after a declared policy date: every comparison in one result.

:func:`compare_policy` runs, for a date (or a commit whose committer date is
used):

* an interrupted time series per metric for ``"(all)"`` (level and slope
  change, placebo dates, optional control subsystem);
* the same per subsystem, with Benjamini-Hochberg / Benjamini-Yekutieli
  adjusted p-values of the level change over the family of tests actually
  run; which subsystems are tested follows :mod:`procmetrics.analyse.measures.selection`
  with the minimum-commits rule applied to each side of the date (recorded in
  ``selection``);
* per-commit distributions before vs after (lines changed per commit, distinct
  reviewers per commit) and proportions before vs after (review coverage,
  independent review, fix ratio);
* change points detected in each metric, placed relative to the date.

References
----------
See :mod:`procmetrics.analyse.change.its`, :mod:`procmetrics.analyse.change.twosample`,
:mod:`procmetrics.analyse.change.multiplicity`, :mod:`procmetrics.analyse.change.changepoints`.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import pandas as pd

from procmetrics.analyse.change.changepoints import ChangePointConfig, changes_for_metric
from procmetrics.analyse.change.its import (ChangeVsDate, ITSResult, interrupted_time_series,
                                     relate_changes_to_date)
from procmetrics.analyse.change.levels import level_changes
from procmetrics.analyse.measures.metrics import ALL, MetricConfig, commit_flags, compute_period_metrics
from procmetrics.analyse.change.multiplicity import MultiplicityResult, adjust_pvalues
from procmetrics.analyse.result import Caveat, to_plain
from procmetrics.analyse.measures.selection import SubsystemSelection
from procmetrics.analyse.measures.periods import resolve_when
from procmetrics.analyse.change.twosample import (DistributionComparison, ProportionComparison,
                                           compare_distributions, compare_proportions)
from procmetrics.errors import InsufficientData

SUBSYSTEM_COLUMNS = ["subsystem", "metric", "level_change", "ci_low", "ci_high", "p_value",
                     "p_bh", "reject_bh", "p_by", "reject_by", "n_before", "n_after"]
DEFAULT_METRICS = ("review_coverage", "independent_review", "fix_ratio")
_PER_COMMIT = {"churn": "lines changed per commit", "n_reviewers": "reviewers per commit"}
_SHARES = {"reviewed": "review_coverage", "independent": "independent_review",
           "fix": "fix_ratio"}


@dataclass(frozen=True)
class PolicyComparison:
    """All before/after evidence for one declared date.

    ``samples`` (not in ``to_dict``) holds the per-commit values compared, long
    format: ``quantity``, ``side`` ("before"/"after"), ``value`` - for ECDF plots.
    """

    at: pd.Timestamp
    period: str
    its: tuple[ITSResult, ...]
    subsystems: pd.DataFrame
    multiplicity: MultiplicityResult | None
    distributions: tuple[DistributionComparison, ...]
    proportions: tuple[ProportionComparison, ...]
    change_points: tuple[tuple[str, ChangeVsDate], ...]
    samples: pd.DataFrame = field(default_factory=pd.DataFrame,
                                  metadata={"json": False})
    skipped: tuple[str, ...] = field(default=())
    caveats: tuple[Caveat, ...] = field(default=())
    #: which subsystems were tested on their own, and how many were left out
    selection: SubsystemSelection | None = None

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def resolve_date(at: str, commits: pd.DataFrame, tags: pd.DataFrame | None = None
                 ) -> pd.Timestamp:
    """``--at``: a date, a tag or a commit in the store (the one parser,
    :func:`procmetrics.analyse.measures.periods.resolve_when`)."""
    return resolve_when(at, commits=commits, tags=tags, option="--at")


def compare_policy(commits: pd.DataFrame, trailers: pd.DataFrame, *, at: pd.Timestamp,
                   commit_subsystems: pd.DataFrame | None = None,
                   tags: pd.DataFrame | None = None,
                   config: MetricConfig = MetricConfig(),
                   metrics: tuple[str, ...] = DEFAULT_METRICS,
                   control_subsystem: str | None = None, alpha: float = 0.05,
                   n_resamples: int = 999, n_boot: int = 1000,
                   cp_config: ChangePointConfig = ChangePointConfig(n_boot=100),
                   tolerance_periods: int = 2,
                   flags: pd.DataFrame | None = None) -> PolicyComparison:
    """Run every before/after comparison for the date ``at`` (see the module docstring).

    Analyses that the data cannot support (too few periods on a side) are
    listed in ``skipped`` with the reason instead of failing the whole run.

    References
    ----------
    Wagner et al. (2002); Benjamini & Hochberg (1995); Benjamini & Yekutieli (2001).
    """
    # the per-commit pass, once: for the per-period series and the distributions below
    # (``flags``: the caller's ``commit_flags(commits, trailers, config)``, if it has it)
    if flags is None:
        flags = commit_flags(commits, trailers, config)
    pm = compute_period_metrics(commits, trailers, commit_subsystems=commit_subsystems,
                                tags=tags, config=replace(config, alpha=alpha), split_at=at,
                                extra_subsystems=(control_subsystem,) if control_subsystem
                                else (), flags=flags)
    table = pm.table
    # one pass over the table: each subsystem's rows, kept apart once
    parts = dict(tuple(table.groupby("subsystem", sort=False)))
    skipped: list[str] = []
    its: list[ITSResult] = []
    main = parts.get(ALL, table.iloc[:0])
    if control_subsystem is not None and control_subsystem in parts:
        main = pd.concat([main, parts[control_subsystem]], ignore_index=True)
    for m in metrics:
        try:
            its.append(interrupted_time_series(main, m, at, control_subsystem=control_subsystem,
                                               alpha=alpha))
        except InsufficientData as exc:
            skipped.append(f"ITS {m}: {exc}")
    rows = []
    subs = [s for s in parts if s != ALL]
    # the level change only: its estimate and interval as in the ITS
    for s, m, r in level_changes(table, metrics, at, subs, alpha=alpha, parts=parts):
        if isinstance(r, InsufficientData):
            skipped.append(f"ITS {m} [{s}]: {r}")
            continue
        if not r.estimable:
            skipped.append(f"ITS {m} [{s}]: level change not estimable (a share of 0 "
                           "or 1, or no events, on one side of the date)")
            continue
        p = r.p_value     # from the interval shown (guarded, same quantile)
        rows.append((s, m, r.level_change.value, r.level_change.low, r.level_change.high,
                     p, r.n_before, r.n_after))
    sub = pd.DataFrame(rows, columns=["subsystem", "metric", "level_change", "ci_low",
                                      "ci_high", "p_value", "n_before", "n_after"])
    mult = None
    if len(sub):
        mult = adjust_pvalues(pd.Series(sub["p_value"].to_numpy(),
                                        index=sub["subsystem"] + ":" + sub["metric"]),
                              alpha=alpha)
        adj = mult.table
        for col in ("p_bh", "reject_bh", "p_by", "reject_by"):
            sub[col] = adj[col].to_numpy()
    sub = sub.reindex(columns=SUBSYSTEM_COLUMNS)
    before, after = flags[flags["date"] < at], flags[flags["date"] >= at]
    dists = []
    for col, label in _PER_COMMIT.items():
        try:
            dists.append(compare_distributions(before[col], after[col], quantity=label,
                                               alpha=alpha, n_resamples=n_resamples,
                                               n_boot=n_boot))
        except InsufficientData as exc:
            skipped.append(f"distribution {label}: {exc}")
    props = []
    for col, label in _SHARES.items():
        try:
            props.append(compare_proportions(int(before[col].sum()), len(before),
                                             int(after[col].sum()), len(after),
                                             quantity=label, alpha=alpha))
        except InsufficientData as exc:
            skipped.append(f"proportion {label}: {exc}")
    samples = pd.concat([pd.DataFrame({"quantity": label, "side": side,
                                       "value": part[col].to_numpy(float)})
                         for col, label in _PER_COMMIT.items()
                         for side, part in (("before", before), ("after", after))],
                        ignore_index=True)
    cps = []
    for m in metrics:
        try:
            cp = changes_for_metric(table, m, config=cp_config)
        except InsufficientData as exc:
            skipped.append(f"change points {m}: {exc}")
            continue
        cps.append((m, relate_changes_to_date(cp, at, tolerance_periods=tolerance_periods)))
    cavs = list(pm.caveats)
    for r in its:
        cavs.extend(r.caveats)
    for d in dists:
        cavs.extend(d.caveats)
    for p in props:
        cavs.extend(p.caveats)
    if mult is not None:
        cavs.extend(mult.caveats)
    return PolicyComparison(at=at, period=config.period, its=tuple(its), subsystems=sub,
                            multiplicity=mult, distributions=tuple(dists),
                            proportions=tuple(props), change_points=tuple(cps),
                            samples=samples, skipped=tuple(skipped), caveats=tuple(_dedupe(cavs)),
                            selection=pm.selection)


def _dedupe(cavs: list[Caveat]) -> list[Caveat]:
    seen, out = set(), []
    for c in cavs:
        key = (c.code, c.message)
        if key not in seen:
            seen.add(key)
            out.append(c)
    return out
