"""Comparing lifetime distributions: log-rank and stratified log-rank tests.

``TestResult.groups`` columns (:data:`LOGRANK_GROUP_COLUMNS`): ``stratum``,
``group``, ``n``, ``observed``, ``expected`` (events observed and expected
under equal hazards).

The Cox model and its fallbacks live in :mod:`procmetrics.analyse.lifetimes.cox`.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.result import Caveat, caveat, to_plain
from procmetrics.errors import InsufficientData

LOGRANK_GROUP_COLUMNS = ["stratum", "group", "n", "observed", "expected"]


@dataclass(frozen=True)
class TestResult:
    """A hypothesis test: statistic, degrees of freedom, p-value and the counts."""

    name: str
    statistic: float
    df: int
    p_value: float
    n: int
    n_events: int
    method: str
    groups: pd.DataFrame
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def _prepare(durations: Any, groups: Any, observed: Any, strata: Any = None) -> pd.DataFrame:
    t = np.asarray(durations, float)
    d = pd.DataFrame({
        "t": t,
        "e": np.ones(len(t), bool) if observed is None else np.asarray(observed, bool),
        "g": np.asarray(groups, object).astype(str),
        "s": "(all)" if strata is None else np.asarray(strata, object).astype(str),
    })
    if d["t"].isna().any() or (d["t"] < 0).any():
        raise ValueError("durations must be non-negative and not missing")
    if d["g"].nunique() < 2:
        raise InsufficientData("a comparison needs at least two groups")
    if d["e"].sum() == 0:
        raise InsufficientData("no events to compare")
    return d


def _components(d: pd.DataFrame, levels: list[str]) -> tuple[np.ndarray, np.ndarray,
                                                              np.ndarray, np.ndarray]:
    """O - E vector, its hypergeometric covariance, O and E for one stratum."""
    k = len(levels)
    gi = pd.Categorical(d["g"], categories=levels).codes
    t, e = d["t"].to_numpy(), d["e"].to_numpy()
    times = np.unique(t[e])
    # at every distinct event time s (rows) and group (columns): at risk #{t >= s} by a
    # binary search in the group's sorted times, events #{t = s, event} by counting
    n_all = np.empty((len(times), k))
    for g in range(k):
        tg = np.sort(t[gi == g])
        n_all[:, g] = len(tg) - np.searchsorted(tg, times, side="left")
    d_all = np.bincount(np.searchsorted(times, t[e]) * k + gi[e],
                        minlength=len(times) * k).reshape(len(times), k).astype(float)
    n, dd = n_all.sum(axis=1), d_all.sum(axis=1)
    # the per-time terms, each as the loop over times computed it, then added in time
    # order from zero (add.accumulate is sequential): the same sums, number for number
    zero = np.zeros((1, k))
    O = np.add.accumulate(np.concatenate([zero, d_all]))[-1]
    E = np.add.accumulate(np.concatenate([zero, dd[:, None] * n_all / n[:, None]]))[-1]
    many = n > 1
    f = dd[many] * (n[many] - dd[many]) / (n[many] - 1)
    p = n_all[many] / n[many, None]
    outer = p[:, :, None] * p[:, None, :]
    diag = np.zeros_like(outer)
    idx = np.arange(k)
    diag[:, idx, idx] = p
    V = np.add.accumulate(np.concatenate([np.zeros((1, k, k)),
                                          f[:, None, None] * (diag - outer)]))[-1]
    return O - E, V, O, E


def stratified_logrank(durations: Any, groups: Any, strata: Any = None,
                       observed: Any = None) -> TestResult:
    """(Stratified) log-rank test of equal hazards across groups.

    Per stratum, observed-minus-expected events and their hypergeometric
    covariance are summed over the distinct event times; the statistics are
    summed over strata and ``U' V^- U`` is referred to chi-square with
    ``k - 1`` degrees of freedom. Without strata it is the ordinary
    k-sample log-rank test.

    References
    ----------
    Peto & Peto (1972), JRSS A 135; Klein & Moeschberger (2003), Survival
    Analysis, sec. 7.3 and 7.5 (stratified tests).
    """
    d = _prepare(durations, groups, observed, strata)
    levels = sorted(d["g"].unique())
    k = len(levels)
    U, V = np.zeros(k), np.zeros((k, k))
    rows = []
    for s, part in d.groupby("s", sort=True):
        u, v, O, E = _components(part, levels)
        U += u
        V += v
        cnt = part["g"].value_counts()
        rows += [{"stratum": s, "group": g, "n": int(cnt.get(g, 0)), "observed": O[i],
                  "expected": E[i]} for i, g in enumerate(levels)]
    Vr = V[:-1, :-1]
    stat = float(U[:-1] @ np.linalg.pinv(Vr) @ U[:-1])
    dfree = int(np.linalg.matrix_rank(Vr))
    cav = []
    if d["e"].sum() < 10 * (k - 1):
        cav.append(caveat("too_few_observations", f"only {int(d['e'].sum())} events for "
                          f"{k} groups; the chi-square approximation may be poor"))
    n_strata = d["s"].nunique()
    name = "stratified log-rank" if n_strata > 1 else "log-rank"
    return TestResult(name, stat, dfree, float(stats.chi2.sf(stat, dfree)) if dfree else 1.0,
                      len(d), int(d["e"].sum()),
                      f"{name} test, {k} groups, {n_strata} strata; chi-square on k-1 df",
                      pd.DataFrame(rows, columns=LOGRANK_GROUP_COLUMNS), tuple(cav))


def logrank(durations: Any, groups: Any, observed: Any = None) -> TestResult:
    """Log-rank test across groups, computed by lifelines.

    Two groups use ``lifelines.statistics.logrank_test``; more use
    ``multivariate_logrank_test``. Observed/expected counts come from
    :func:`stratified_logrank` (one stratum).

    References
    ----------
    Peto & Peto (1972); Davidson-Pilon, lifelines (JOSS 2019).
    """
    from lifelines.statistics import logrank_test, multivariate_logrank_test

    d = _prepare(durations, groups, observed)
    levels = sorted(d["g"].unique())
    if len(levels) == 2:
        a, b = (d[d["g"] == lv] for lv in levels)
        r = logrank_test(a["t"], b["t"], a["e"], b["e"])
        dfree = 1
    else:
        r = multivariate_logrank_test(d["t"], d["g"], d["e"])
        dfree = len(levels) - 1
    own = stratified_logrank(d["t"], d["g"], observed=d["e"])
    return TestResult("log-rank", float(r.test_statistic), dfree, float(r.p_value), len(d),
                      int(d["e"].sum()), f"log-rank test (lifelines), {len(levels)} groups",
                      own.groups, own.caveats)
