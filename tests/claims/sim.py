"""Invented histories with a known truth for the calibration of claim verdicts.

Simulations only (no real project): tidy ``commits`` / ``trailers`` /
``fix_links`` frames with the columns of :mod:`procmetrics.store.tables`, built
vectorised so that hundreds of replicates run in seconds, and handed to the
evaluators in a :class:`~procmetrics.claims.base.ClaimContext`, exactly as
``procmetrics check`` does after reading a store.

Rates are printed and asserted with an exact (Clopper-Pearson) Monte-Carlo
interval on the count of replicates.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from procmetrics.analyse.measures.vocabulary import METRIC_COLUMNS
from procmetrics.claims.base import ClaimContext
from procmetrics.store.tables import COLUMNS

START = pd.Timestamp("2016-01-01", tz="UTC")
REPO = "simrepo"


def clopper_pearson(k: int, n: int, level: float = 0.95) -> tuple[float, float]:
    """Exact binomial interval for k successes in n (Clopper & Pearson 1934)."""
    a = 1 - level
    lo = 0.0 if k == 0 else float(stats.beta.ppf(a / 2, k, n - k + 1))
    hi = 1.0 if k == n else float(stats.beta.ppf(1 - a / 2, k + 1, n - k))
    return lo, hi


def rate_line(name: str, k: int, n: int) -> str:
    lo, hi = clopper_pearson(k, n)
    return f"{name}: {k}/{n} = {k / n:.3f} (95% Clopper-Pearson MC interval {lo:.3f} to {hi:.3f})"


def _commits(dates: pd.DatetimeIndex, hashes: np.ndarray) -> pd.DataFrame:
    n = len(dates)
    c = pd.DataFrame({
        "repo": REPO, "hash": hashes, "author_name": "Dev", "author_email": "dev@sim.invalid",
        "committer_name": "Int", "committer_email": "int@sim.invalid", "author_date": dates,
        "author_offset_min": 0, "committer_date": dates, "committer_offset_min": 0,
        "subject": "change", "n_parents": 1, "is_merge": np.zeros(n, bool),
        "stable_request": np.zeros(n, bool), "n_files": 1, "lines_added": 10,
        "lines_deleted": 2, "n_fix_refs": 0, "n_resolved_fixes": 0,
        "is_revert": np.zeros(n, bool)})
    return c[COLUMNS["commits"]]


def _empty(name: str) -> pd.DataFrame:
    return pd.DataFrame(columns=COLUMNS[name])


def _share_counts(rng, n_periods, per_period, intercept, slope_per_year, step, change_at, rho):
    months = pd.date_range(START, periods=n_periods + 1, freq="MS")
    at = months[change_at]
    m = rng.poisson(per_period, n_periods)
    mid = months[:-1] + (months[1:] - months[:-1]) / 2
    t = np.asarray((mid - at) / pd.Timedelta(days=365.25), float)
    p = 1 / (1 + np.exp(-(intercept + slope_per_year * t
                          + step * (np.arange(n_periods) >= change_at))))
    if rho > 0:
        ab = (1 - rho) / rho
        p = rng.beta(p * ab, (1 - p) * ab)
    return months, at, m, p


def share_table(rng: np.random.Generator, *, n_periods: int = 48, per_period: int = 120,
                intercept: float = -1.0, slope_per_year: float = 0.0, step: float = 0.0,
                change_at: int = 24, rho: float = 0.0) -> tuple[pd.DataFrame, pd.Timestamp]:
    """The per-month review-coverage table (columns of ``METRIC_COLUMNS``) that
    :func:`share_history` would give, drawn directly as binomial counts (fast)."""
    months, at, m, p = _share_counts(rng, n_periods, per_period, intercept, slope_per_year,
                                     step, change_at, rho)
    x = rng.binomial(m, p)
    tab = pd.DataFrame({"period": [f"{d:%Y-%m}" for d in months[:-1]],
                        "period_start": months[:-1], "period_end": months[1:],
                        "subsystem": "(all)", "metric": "review_coverage",
                        "numerator": x.astype(float), "denominator": m.astype(float),
                        "value": x / m, "ci_low": np.nan, "ci_high": np.nan,
                        "ci_method": "none", "n": m})
    return tab.reindex(columns=METRIC_COLUMNS), at


def share_history(rng: np.random.Generator, *, n_periods: int = 48, per_period: int = 120,
                  intercept: float = -1.0, slope_per_year: float = 0.0, step: float = 0.0,
                  change_at: int = 24, rho: float = 0.0) -> tuple[ClaimContext, pd.Timestamp]:
    """Monthly review coverage with logit p = intercept + slope * years + step * after.

    ``rho`` > 0 draws each month's p from a beta distribution with that
    intra-month correlation (beta-binomial overdispersion: Pearson dispersion
    about 1 + (m - 1) rho for m commits a month). Returns the context and the
    date of the change (first day of month ``change_at``).
    """
    months, at, m, p = _share_counts(rng, n_periods, per_period, intercept, slope_per_year,
                                     step, change_at, rho)
    month = np.repeat(np.arange(n_periods), m)
    span = np.asarray((months[1:] - months[:-1]).total_seconds(), float)[month]
    dates = months[:-1][month] + pd.to_timedelta(rng.uniform(0, 1, len(month)) * span, "s")
    order = np.argsort(np.asarray(dates), kind="stable")
    dates, month = dates[order], month[order]
    hashes = np.char.mod("%040x", np.arange(1, len(dates) + 1))
    reviewed = rng.random(len(dates)) < p[month]
    commits = _commits(pd.DatetimeIndex(dates), hashes)
    h = hashes[reviewed]
    trailers = pd.DataFrame({"repo": REPO, "hash": h, "position": 0, "key": "reviewed-by",
                             "raw_key": "Reviewed-by", "value": "R <rev@sim.invalid>",
                             "person_name": "R", "person_email": "rev@sim.invalid"}
                            )[COLUMNS["trailers"]]
    ctx = ClaimContext(commits=commits, trailers=trailers, fix_links=_empty("fix_links"),
                       period="month", placebo_shifts=0)
    return ctx, at


def lifetime_history(rng: np.random.Generator, *, n_visible: int, median_before: float = 120.0,
                     factor_after: float = 1.0, sigma: float = 1.0, years: float = 10.0,
                     trend_per_year: float = 0.0) -> tuple[ClaimContext, pd.Timestamp]:
    """Defects introduced uniformly over ``years``; log-normal lifetimes.

    ``trend_per_year`` adds a steady change of the log median with the
    introduction date (a pre-existing trend, no step at the date when
    ``factor_after`` is 1).

    Median ``median_before`` days for defects introduced before the midpoint,
    ``median_before * factor_after`` after it (a scale change, so lifetimes are
    ``factor_after`` times longer). Only defects fixed before the end of the
    history are visible (right truncation); ``n_visible`` is their expected
    number. Returns the context and the date of the change (the midpoint).
    """
    T = years * 365.25
    date_day = T / 2
    # share of introduced defects that are visible, by Monte Carlo on a large draw
    def log_median(u: np.ndarray) -> np.ndarray:
        return (np.log(median_before * np.where(u >= date_day, factor_after, 1.0))
                + trend_per_year * (u - date_day) / 365.25)

    u0 = rng.uniform(0, T, 20000)
    l0 = np.exp(log_median(u0) + sigma * rng.standard_normal(20000))
    vis = float(np.mean(u0 + l0 <= T))
    n = rng.poisson(n_visible / vis)
    u = rng.uniform(0, T, n)
    life = np.exp(log_median(u) + sigma * rng.standard_normal(n))
    keep = u + life <= T
    u, life = u[keep], life[keep]
    k = len(u)
    intro = START + pd.to_timedelta(np.round(u * 86400), "s")
    fix = START + pd.to_timedelta(np.round((u + life) * 86400), "s")
    end = START + pd.to_timedelta(T, "D")
    ih = np.char.mod("a%039x", np.arange(k))
    fh = np.char.mod("f%039x", np.arange(k))
    dates = pd.DatetimeIndex(intro).append(pd.DatetimeIndex(fix)).append(
        pd.DatetimeIndex([end]))
    commits = _commits(dates, np.concatenate([ih, fh, ["e" * 40]]))
    commits["n_fix_refs"] = np.r_[np.zeros(k, int), np.ones(k, int), 0]
    commits["n_resolved_fixes"] = commits["n_fix_refs"]
    links = pd.DataFrame({
        "repo": REPO, "fix_hash": fh, "position": 0, "ref_hash": ih,
        "status": "resolved", "introducer_hash": ih, "cited_subject": None,
        "subject_match": pd.NA, "in_trailer_block": True, "raw_text": "Fixes: x",
        "fix_author_date": fix, "fix_committer_date": fix, "intro_author_date": intro,
        "intro_committer_date": intro})[COLUMNS["fix_links"]]
    ctx = ClaimContext(commits=commits, trailers=_empty("trailers"), fix_links=links,
                       period="quarter")
    return ctx, START + pd.to_timedelta(date_day, "D")


def defect_table(rng: np.random.Generator, *, n_visible: int, median_before: float = 120.0,
                 factor_after: float = 1.0, sigma: float = 1.0, years: float = 10.0,
                 trend_per_year: float = 0.0):
    """The defect table :func:`lifetime_history` would give after ``build_defects``,
    drawn directly (fast), with dates at whole days (lifetimes in whole days, ties
    broken by Efron's method in the Cox fit). ``trend_per_year``: a steady change of
    the log median with the introduction date, as in :func:`lifetime_history`.
    Returns the table and the change date."""
    from procmetrics.analyse.lifetimes.defects import DEFECT_COLUMNS, DefectTable

    T = np.floor(years * 365.25)
    date_day = np.floor(T / 2)
    vis = _visible_share(rng, T, date_day, median_before, factor_after, sigma, trend_per_year)
    n = rng.poisson(n_visible / vis)
    u = np.floor(rng.uniform(0, T, n))
    life = np.ceil(np.exp(np.log(median_before * np.where(u >= date_day, factor_after, 1.0))
                          + trend_per_year * (u - date_day) / 365.25
                          + sigma * rng.standard_normal(n)))
    keep = u + life <= T
    u, life = u[keep], life[keep]
    intro = START + pd.to_timedelta(u, "D")
    d = pd.DataFrame({"repo": REPO, "introducer_hash": np.char.mod("a%039x", np.arange(len(u))),
                      "intro_date": intro, "fix_date": intro + pd.to_timedelta(life, "D"),
                      "lifetime_days": life, "lifetime": life, "window": T - u,
                      "negative": np.zeros(len(u), bool), "subsystem": "(none)",
                      "subsystems": "", "basis": "committer"}).reindex(columns=DEFECT_COLUMNS)
    end = START + pd.to_timedelta(T, "D")
    table = DefectTable(d, "committer", "days", end, {"resolved": len(d)}, 0, 0, 0,
                        "simulated defects")
    return table, START + pd.to_timedelta(date_day, "D")


def _visible_share(rng, T, date_day, median_before, factor_after, sigma,
                   trend_per_year=0.0) -> float:
    u0 = rng.uniform(0, T, 20000)
    l0 = np.exp(np.log(median_before * np.where(u0 >= date_day, factor_after, 1.0))
                + trend_per_year * (u0 - date_day) / 365.25
                + sigma * rng.standard_normal(20000))
    return float(np.mean(u0 + l0 <= T))
