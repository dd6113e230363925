"""Process-health metrics per period and subsystem, as one tidy table.

Input: the tidy ``commits`` and ``trailers`` tables (and optionally
``commit_subsystems`` and ``tags``) from :mod:`procmetrics.store.tables`.
Output: :class:`PeriodMetrics` whose ``table`` has one row per
(period, subsystem, metric) with the columns in :data:`METRIC_COLUMNS`.

Definitions (non-merge commits unless ``include_merges``; a commit touching
several subsystems counts in each, and every commit counts in ``"(all)"``):

==========================  ====================================================
``commits``                 number of commits (count; exact Poisson interval)
``active_authors``          distinct author e-mails, case-insensitive (count)
``review_coverage``         share with >= 1 review-type trailer (``review_keys``)
``independent_review``      share with a review trailer whose e-mail differs
                            (case-insensitively) from the author's
``unreviewed_self_commits`` share with author e-mail == committer e-mail and no
                            review trailer
``fix_ratio``               share with a resolved ``Fixes:`` link
                            (``n_resolved_fixes > 0``)
``fix_ratio_heuristic``     share whose subject matches a keyword (optional;
                            caveat ``heuristic_classification``)
``revert_ratio``            share that revert another commit
``stable_request_share``    among commits with any ``Fixes:`` reference, share
                            that request a stable backport
``fixes_tag_adoption``      share with any ``Fixes:`` reference, resolved or not
``applied_by_other``        share whose committer e-mail differs (case-insensitively,
                            after the .mailmap git applied) from the author's: the
                            review evidence a maintainer-driven project leaves
``churn_lines``             lines added + deleted (total; no interval: lines are
                            not independent events)
``churn_median``            median lines added + deleted per commit
                            (order-statistic interval)
==========================  ====================================================

Proportions carry Wilson intervals, counts exact Poisson intervals.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.analyse.measures import intervals as iv
from procmetrics.analyse.memo import memoised, table_id
from procmetrics.analyse.measures.periods import (DEFAULT_PERIOD, assign_periods, period_midpoints,
                                               years_since)
from procmetrics.analyse.result import Caveat, caveat, to_plain
from procmetrics.analyse.measures.selection import (SubsystemSelection, select_subsystems,
                                           subsystem_counts)
from procmetrics.distinct import factorize
from procmetrics.errors import InsufficientData

from procmetrics.analyse.measures.vocabulary import (  # noqa: E402 - re-exported names
    ALL, DEFAULT_FIX_KEYWORDS, DEFAULT_REVIEW_KEYS, METRIC_COLUMNS, METRICS,
)

_EMAIL = re.compile(r"<([^<>\s]+@[^<>\s]+)>")


@dataclass(frozen=True)
class MetricConfig:
    """Options for :func:`compute_period_metrics` (frozen; pass explicitly)."""

    period: str = DEFAULT_PERIOD
    review_keys: tuple[str, ...] = DEFAULT_REVIEW_KEYS
    include_merges: bool = False
    date_column: str = "committer_date"
    heuristic_keywords: tuple[str, ...] | None = None
    subsystems: tuple[str, ...] | None = None
    metrics: tuple[str, ...] | None = None
    alpha: float = 0.05
    adoption_window_share: float = 0.5
    #: subsystems on their own when none are named (see analyse/selection.py):
    #: all when at most ``subsystem_all_up_to``, else the ``subsystem_limit``
    #: largest with >= ``subsystem_min_commits`` commits in every segment
    subsystem_limit: int = 12
    subsystem_min_commits: int = 30
    subsystem_all_up_to: int = 20
    #: one "(all)" series per repository and subsystems keyed by (repo, subsystem);
    #: the table then has a leading ``repo`` column
    by_repo: bool = False

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


@dataclass(frozen=True)
class PeriodMetrics:
    """The tidy per-period metric table plus what an auditor needs about it."""

    table: pd.DataFrame
    config: MetricConfig
    n_commits: int
    n_merges_excluded: int
    periods: pd.DataFrame
    caveats: tuple[Caveat, ...] = field(default=())
    #: which subsystems have rows (None when no commit_subsystems were given)
    selection: SubsystemSelection | None = None

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)

    def series(self, metric: str, subsystem: str = ALL, repo: str | None = None
               ) -> pd.DataFrame:
        """Rows of one metric for one subsystem (and repository when ``by_repo``)."""
        t = self.table
        keep = (t["metric"] == metric) & (t["subsystem"] == subsystem)
        if repo is not None:
            keep &= t["repo"] == repo
        return t[keep].reset_index(drop=True)


def _true(s: pd.Series) -> np.ndarray:
    """Boolean array with missing values read as False (any dtype)."""
    obj = s.astype(object)
    return np.asarray(obj.where(s.notna(), False), dtype=bool)


def _lower(s: pd.Series) -> pd.Series:
    """Stripped and case-folded text (``string`` dtype, missing stays missing). Each
    distinct value is folded once: e-mail columns repeat a few thousand people over a
    million rows."""
    codes, uniques = factorize(s)
    folded = pd.Series(uniques, dtype=object).astype("string").str.strip().str.casefold()
    return pd.Series(folded.array.take(codes, allow_fill=True), index=s.index, name=s.name)


def _commit_keys(commits: pd.DataFrame, lines: pd.DataFrame
                 ) -> tuple[np.ndarray, np.ndarray]:
    """One integer per (repo, hash) for the rows of both frames, equal exactly when the
    pair is equal (:func:`procmetrics.distinct.factorize` over both frames' values): a
    lookup on integers instead of a join on two text columns."""
    n = len(commits)
    repo, repos = factorize(np.concatenate([commits["repo"].to_numpy(dtype=object),
                                            lines["repo"].to_numpy(dtype=object)]))
    hashes, uniques = factorize(np.concatenate([commits["hash"].to_numpy(dtype=object),
                                                lines["hash"].to_numpy(dtype=object)]))
    key = repo.astype(np.int64) * (len(uniques) + 1) + hashes
    return key[:n], key[n:]


def _flags_key(commits: pd.DataFrame, trailers: pd.DataFrame,
               config: MetricConfig = MetricConfig()) -> Any:
    """What :func:`commit_flags` reads: the tables and four of the options."""
    return (table_id(commits), table_id(trailers), config.include_merges,
            tuple(config.review_keys), config.date_column,
            tuple(config.heuristic_keywords or ()))


@memoised(_flags_key)
def commit_flags(commits: pd.DataFrame, trailers: pd.DataFrame,
                 config: MetricConfig = MetricConfig()) -> pd.DataFrame:
    """One row per commit with the boolean flags the metrics count.

    Columns: ``hash``, ``date``, ``author``, ``reviewed``, ``independent``,
    ``unreviewed_self``, ``fix``, ``fix_ref``, ``fix_heuristic``, ``revert``,
    ``stable_request``, ``applied_other`` (committer e-mail is not the author's),
    ``churn`` (float, NaN when line counts were not mined),
    ``n_reviewers`` (distinct review-trailer e-mails).
    """
    c = commits
    if not config.include_merges:
        c = c[~_true(c["is_merge"])]
    keys = {k.casefold() for k in config.review_keys}
    t = trailers[["repo", "hash", "key", "value", "person_email"]]
    t = t[_lower(t["key"]).isin(keys).fillna(False).to_numpy()].reset_index(drop=True)
    commit_key, line_key = _commit_keys(c, t)
    first = ~pd.Series(commit_key).duplicated().to_numpy()      # one row per (repo, hash)
    if not first.all():
        c, commit_key = c[first], commit_key[first]
    c = c.reset_index(drop=True)
    email = _lower(t["person_email"])
    # the address in the value where the miner kept no person (only those rows parsed)
    bare = email.isna().to_numpy()
    fallback = _lower(t.loc[bare, "value"].astype("string").str.extract(_EMAIL, expand=False))
    email = email.fillna(fallback)
    # each review line's commit by position (an inner join on (repo, hash): lines of
    # commits not counted here drop out); per-commit figures are then counts by position
    at = pd.Index(commit_key).get_indexer(line_key)
    seen = at >= 0
    at, email = at[seen], email[seen].reset_index(drop=True)
    author_low, committer = _lower(c["author_email"]), _lower(c["committer_email"])
    indep = (email.notna() & (email != pd.Series(author_low.array.take(at)))).fillna(False)
    n = len(c)
    reviewed = np.bincount(at, minlength=n) > 0
    independent = np.bincount(at, weights=indep.to_numpy(dtype=float), minlength=n) > 0
    code, uniques = factorize(email)            # exact: see procmetrics.distinct
    pairs = pd.unique(at[code >= 0] * (len(uniques) + 1) + code[code >= 0])
    n_reviewers = np.bincount(pairs // (len(uniques) + 1), minlength=n)
    out = pd.DataFrame({"repo": c["repo"], "hash": c["hash"],
                        "date": pd.to_datetime(c[config.date_column], utc=True)})
    out["author"] = author_low.to_numpy()
    out["reviewed"] = reviewed
    out["independent"] = independent
    out["n_reviewers"] = n_reviewers.astype(int)
    self_commit = (author_low == committer).fillna(False)
    out["unreviewed_self"] = self_commit.to_numpy(dtype=bool) & ~out["reviewed"].to_numpy()
    other = author_low != committer
    out["applied_other"] = other.fillna(False).to_numpy(dtype=bool)
    out["fix"] = (c["n_resolved_fixes"].fillna(0) > 0).to_numpy()
    out["fix_ref"] = (c["n_fix_refs"].fillna(0) > 0).to_numpy()
    out["revert"] = _true(c["is_revert"])
    out["stable_request"] = _true(c["stable_request"])
    if config.heuristic_keywords:
        pat = r"\b(?:" + "|".join(re.escape(k) for k in config.heuristic_keywords) + r")"
        out["fix_heuristic"] = c["subject"].astype("string").str.contains(
            pat, case=False, regex=True).fillna(False).to_numpy(dtype=bool)
    else:
        out["fix_heuristic"] = False
    churn = (pd.to_numeric(c["lines_added"], errors="coerce").astype(float)
             + pd.to_numeric(c["lines_deleted"], errors="coerce").astype(float))
    out["churn"] = churn.to_numpy()
    return out.reset_index(drop=True)


def _expand_subsystems(flags: pd.DataFrame, commit_subsystems: pd.DataFrame | None,
                       config: MetricConfig, split_at: pd.Timestamp | None,
                       extra: tuple[str, ...] = ()
                       ) -> tuple[pd.DataFrame, SubsystemSelection | None]:
    """Long table: every commit under "(all)" plus one row per chosen subsystem it touched.

    Subsystems are chosen once (:func:`select_subsystems`) and joined in one
    merge, so the cost follows the subsystems shown, not those in the store.
    """
    parts = [flags.assign(subsystem=ALL)]
    selection = None
    if commit_subsystems is not None and len(commit_subsystems):
        counts = subsystem_counts(flags, commit_subsystems, split_at=split_at,
                                  by_repo=config.by_repo)
        selection = select_subsystems(counts, named=config.subsystems,
                                      limit=config.subsystem_limit,
                                      min_commits=config.subsystem_min_commits,
                                      all_up_to=config.subsystem_all_up_to)
        chosen = selection.counts.loc[selection.counts["chosen"], ["repo", "subsystem"]
                                      if config.by_repo else ["subsystem"]]
        cs = commit_subsystems[["repo", "hash", "subsystem"]]
        names = set(chosen["subsystem"]) | set(extra)
        cs = cs[cs["subsystem"].isin(names)].drop_duplicates()
        if config.by_repo:
            cs = cs.merge(pd.concat([chosen, cs.loc[cs["subsystem"].isin(extra),
                                                    ["repo", "subsystem"]]]).drop_duplicates(),
                          on=["repo", "subsystem"], how="inner")
        parts.append(flags.merge(cs, on=["repo", "hash"], how="inner"))
    return pd.concat(parts, ignore_index=True), selection


def _rows(agg: pd.DataFrame, metric: str, num: str | None, den: str | None,
          alpha: float) -> pd.DataFrame:
    kind = METRICS[metric]
    lead = ["repo"] if "repo" in agg.columns else []
    out = agg[lead + ["period", "period_start", "period_end", "subsystem"]].copy()
    out["metric"] = metric
    n = agg["n"].to_numpy(dtype=float)
    if kind == "proportion":
        x = agg[num].to_numpy(dtype=float)
        d = agg[den].to_numpy(dtype=float)
        out["numerator"], out["denominator"] = x, d
        with np.errstate(invalid="ignore", divide="ignore"):
            out["value"] = np.where(d > 0, x / np.where(d > 0, d, 1), np.nan)
        out["ci_low"], out["ci_high"] = iv.wilson(x, d, alpha)
        out["ci_method"] = iv.WILSON
        out["n"] = d
    elif kind == "count":
        x = agg[num].to_numpy(dtype=float)
        out["numerator"], out["denominator"], out["value"] = x, np.nan, x
        out["ci_low"], out["ci_high"] = iv.poisson_exact(x, alpha)
        out["ci_method"] = iv.POISSON_EXACT
        out["n"] = n
    elif kind == "total":
        x = agg["churn_sum"].to_numpy(dtype=float)
        m = agg["churn_n"].to_numpy(dtype=float)
        out["numerator"], out["denominator"] = x, m
        out["value"] = np.where(m > 0, x, np.nan)
        out["ci_low"] = out["ci_high"] = np.nan
        out["ci_method"] = "none (lines are not independent events)"
        out["n"] = m
    else:  # median
        out["numerator"], out["denominator"] = np.nan, agg["churn_n"].to_numpy(dtype=float)
        out["value"] = agg["churn_med"].to_numpy(dtype=float)
        out["ci_low"] = agg["churn_lo"].to_numpy(dtype=float)
        out["ci_high"] = agg["churn_hi"].to_numpy(dtype=float)
        out["ci_method"] = iv.ORDER_STATISTIC
        out["n"] = agg["churn_n"].to_numpy(dtype=float)
    out["n"] = out["n"].astype("int64")
    return out


_SPEC: dict[str, tuple[str | None, str | None]] = {
    "commits": ("n", None), "active_authors": ("authors", None),
    "review_coverage": ("reviewed", "n"), "independent_review": ("independent", "n"),
    "unreviewed_self_commits": ("unreviewed_self", "n"), "fix_ratio": ("fix", "n"),
    "fix_ratio_heuristic": ("fix_heuristic", "n"), "revert_ratio": ("revert", "n"),
    "stable_request_share": ("stable_fix", "fix_ref"),
    "fixes_tag_adoption": ("fix_ref", "n"), "applied_by_other": ("applied_other", "n"),
    "churn_lines": (None, None),
    "churn_median": (None, None),
}


def _churn_stats(g, index: pd.Index, alpha: float) -> pd.DataFrame:
    """Churn total, count and median with its interval per group of ``g`` (a groupby
    of the long table), one vectorised pass (:func:`~procmetrics.analyse.measures.
    intervals.grouped_median_ci`) instead of one call per subsystem-period."""
    codes = g.ngroup().to_numpy()
    st = iv.grouped_median_ci(codes, g.obj["churn"].to_numpy(dtype=float), len(index),
                              alpha)
    return pd.DataFrame({"churn_sum": st["sum"], "churn_n": st["n"].astype(float),
                         "churn_med": st["median"], "churn_lo": st["low"],
                         "churn_hi": st["high"]}, index=index)


@memoised()
def compute_period_metrics(commits: pd.DataFrame, trailers: pd.DataFrame, *,
                           commit_subsystems: pd.DataFrame | None = None,
                           tags: pd.DataFrame | None = None,
                           config: MetricConfig = MetricConfig(),
                           split_at: pd.Timestamp | None = None,
                           extra_subsystems: tuple[str, ...] = (),
                           flags: pd.DataFrame | None = None) -> PeriodMetrics:
    """Compute every process metric per period and subsystem.

    Parameters
    ----------
    commits, trailers : tidy tables (columns as in ``store.tables.COLUMNS``).
    commit_subsystems : optional tidy table; without it only ``"(all)"`` is given.
        Which subsystems get rows follows :mod:`procmetrics.analyse.measures.selection`
        (the ones named in ``config.subsystems``, else all when there are at most
        ``config.subsystem_all_up_to``, else the ``config.subsystem_limit``
        largest with enough commits); ``selection`` on the result says which.
    tags : tidy ``tags`` table, needed for ``config.period == "release"``.
    config : :class:`MetricConfig`.
    split_at : a policy date; the minimum-commits rule then applies to each
        side of it (segments), not to the whole window.
    extra_subsystems : given rows whatever the rule says (e.g. a control series).
    flags : ``commit_flags(commits, trailers, config)`` when the caller already has it
        (it is the costly per-commit pass; callers needing it too compute it once).

    Returns
    -------
    PeriodMetrics
        ``table`` with :data:`METRIC_COLUMNS` (plus a leading ``repo`` column
        when ``config.by_repo``), sorted by (repo,) subsystem, metric and period
        start; every period in the observed range appears (proportions with a
        zero denominator have ``value`` NaN).

    Raises
    ------
    InsufficientData
        When no commit is left after excluding merges.

    References
    ----------
    Wilson (1927) score interval; Garwood (1936) exact Poisson interval;
    Conover (1999) order-statistic interval for the median.
    """
    if flags is None:
        flags = commit_flags(commits, trailers, config)
    n_merges = int(_true(commits["is_merge"]).sum()) \
        if not config.include_merges else 0
    flags = flags[flags["date"].notna()]
    if flags.empty:
        raise InsufficientData("no (non-merge) commits with a date to measure")
    labels, frame = assign_periods(flags["date"], config.period, tags)
    flags = flags.assign(period=labels.to_numpy())
    long, selection = _expand_subsystems(flags, commit_subsystems, config, split_at,
                                         tuple(extra_subsystems))
    long["stable_fix"] = long["stable_request"] & long["fix_ref"]
    keys = ["repo", "subsystem"] if config.by_repo else ["subsystem"]
    g = long.groupby(keys + ["period"], sort=False)
    sums = g[["reviewed", "independent", "unreviewed_self", "fix", "fix_ref",
              "fix_heuristic", "revert", "stable_fix", "applied_other"]].sum()
    sums["n"] = g.size()
    sums["authors"] = g["author"].nunique()
    churn = _churn_stats(g, sums.index, config.alpha)
    agg = sums.join(churn).reset_index()
    groups = long[keys].drop_duplicates()
    groups = groups.assign(_all=groups["subsystem"] != ALL).sort_values(
        (["repo"] if config.by_repo else []) + ["_all", "subsystem"], kind="mergesort")
    groups = groups.drop(columns="_all").reset_index(drop=True)
    order = groups.assign(_s=np.arange(len(groups)))
    grid = groups.merge(frame[["period"]], how="cross")
    agg = grid.merge(agg, on=keys + ["period"], how="left").merge(frame, on="period")
    agg = agg.fillna({c: 0 for c in agg.columns
                      if c not in ("churn_med", "churn_lo", "churn_hi", "period_start",
                                   "period_end", "subsystem", "period", "repo")})
    wanted = [m for m in METRICS if config.metrics is None or m in config.metrics]
    if not config.heuristic_keywords:
        wanted = [m for m in wanted if m != "fix_ratio_heuristic"]
    if flags["churn"].isna().all():
        wanted = [m for m in wanted if not m.startswith("churn")]
    table = pd.concat([_rows(agg, m, *_SPEC[m], config.alpha) for m in wanted],
                      ignore_index=True)
    table = table.merge(order, on=keys, how="left").assign(_m=table["metric"].map(
        {m: i for i, m in enumerate(METRICS)}).to_numpy())
    table = table.sort_values(["_s", "_m", "period_start"], kind="mergesort")
    columns = (["repo"] if config.by_repo else []) + METRIC_COLUMNS
    table = table.drop(columns=["_s", "_m"]).reset_index(drop=True)[columns]
    cavs: list[Caveat] = []
    if "fix_ratio_heuristic" in wanted:
        cavs.append(caveat("heuristic_classification",
                           "fix_ratio_heuristic classifies commits by subject keywords "
                           f"({', '.join(config.heuristic_keywords or ())}), not by an "
                           "explicit Fixes: link"))
    if config.by_repo:
        for repo, part in table[table["subsystem"] == ALL].groupby("repo", sort=True):
            adoption = fixes_adoption_rising(part, window_share=config.adoption_window_share)
            if adoption is not None:
                cavs.append(replace(adoption, message=f"{repo}: {adoption.message}"))
    else:
        adoption = fixes_adoption_rising(table, window_share=config.adoption_window_share)
        if adoption is not None:
            cavs.append(adoption)
    return PeriodMetrics(table=table, config=config, n_commits=len(flags),
                         n_merges_excluded=n_merges, periods=frame, caveats=tuple(cavs),
                         selection=selection)


def fixes_adoption_rising(table: pd.DataFrame, *, window_share: float = 0.5,
                          alpha: float = 0.05, min_periods: int = 4) -> Caveat | None:
    """Caveat ``tag_adoption_rising`` when Fixes: use still rises late in the window.

    Fits a binomial GLM (logit, quasi-binomial scale when overdispersed) of
    ``fixes_tag_adoption`` for ``"(all)"`` on time over the last ``window_share``
    of the periods; warns when the lower end of the slope's interval is > 0.
    Returns ``None`` when there is no rise or too few periods to judge.

    References
    ----------
    McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed.
    (quasi-likelihood scale from Pearson's X2).
    """
    from procmetrics.analyse.glmfit import fit_model  # local: glmfit is heavier

    s = table[(table["metric"] == "fixes_tag_adoption") & (table["subsystem"] == ALL)
              & (table["denominator"] > 0)].sort_values("period_start")
    if len(s) < 2 * min_periods:
        return None
    s = s.iloc[int(len(s) * (1 - window_share)):]
    if s["numerator"].sum() == 0 or (s["numerator"] == s["denominator"]).all():
        return None
    t = years_since(period_midpoints(s), s["period_start"].iloc[0])
    X = np.column_stack([np.ones(len(t)), t - t.mean()])
    fit = fit_model(s["numerator"].to_numpy(float), X, kind="proportion",
                    trials=s["denominator"].to_numpy(float), names=["const", "time"],
                    alpha=alpha, hac="never")
    row = fit.params.set_index("term").loc["time"]
    if row["ci_low"] > 0:
        return caveat("tag_adoption_rising",
                      f"use of Fixes: references still rises over the last {len(s)} periods "
                      f"(logit slope {row['estimate']:.2f}/year, {100 * (1 - alpha):.0f}% "
                      f"interval {row['ci_low']:.2f} to {row['ci_high']:.2f}); fix ratios "
                      "mix adoption of the trailer with real change")
    return None
