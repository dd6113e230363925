"""Simulated defect tables with gradual `Fixes:` adoption (no git needed).

Known truth: introductions uniform over the history, log-normal lifetimes
(median ``median`` days, log-sd ``sigma``); a defect is seen only if fixed
before the end of the history and its fix is linked, with probability
``p_max / (1 + exp(-(fix - ramp_mid) / ramp_scale))`` (logistic adoption; a
share ``1 - p_max`` of fixes is never linked). Invented data for simulations.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

T0 = pd.Timestamp("2010-01-01", tz="UTC")


def simulate(rng: np.random.Generator, *, years: float = 10.0, n_defects: int = 3000,
             median: float = 120.0, sigma: float = 1.2, p_max: float = 0.7,
             ramp_mid: float = 3 * 365.0, ramp_scale: float = 120.0,
             commits_per_day: float = 2.5) -> tuple[pd.DataFrame, pd.DataFrame]:
    """``(fix_links, commits)`` tidy tables as the store would give them."""
    end = years * 365.0
    u = rng.uniform(0, end, n_defects)
    life = np.exp(np.log(median) + sigma * rng.normal(size=n_defects))
    fix = u + life
    p = p_max / (1.0 + np.exp(-(fix - ramp_mid) / ramp_scale))
    seen = (fix <= end) & (rng.uniform(size=n_defects) < p)
    i = np.flatnonzero(seen)
    fd = T0 + pd.to_timedelta(fix[i], unit="D")
    idt = T0 + pd.to_timedelta(u[i], unit="D")
    links = pd.DataFrame({
        "repo": "sim", "fix_hash": [f"f{k}" for k in i], "position": 0,
        "ref_hash": [f"i{k}" for k in i], "status": "resolved",
        "introducer_hash": [f"i{k}" for k in i], "cited_subject": None,
        "subject_match": None, "in_trailer_block": True, "raw_text": "",
        "fix_author_date": fd, "fix_committer_date": fd,
        "intro_author_date": idt, "intro_committer_date": idt})
    n_other = rng.poisson(commits_per_day * end)
    other = T0 + pd.to_timedelta(np.sort(rng.uniform(0, end, n_other)), unit="D")
    dates = pd.DatetimeIndex(other).append(pd.DatetimeIndex(fd)).append(
        pd.DatetimeIndex(idt))
    commits = pd.DataFrame({"repo": "sim", "hash": [f"c{k}" for k in range(len(dates))],
                            "committer_date": dates, "author_date": dates,
                            "is_merge": False, "lines_added": 1, "lines_deleted": 0,
                            "n_files": 1})
    commits.loc[commits.index[-len(fd) - len(idt):-len(idt)], "hash"] = [f"f{k}" for k in i]
    commits.loc[commits.index[-len(idt):], "hash"] = [f"i{k}" for k in i]
    return links, commits


def truth_probability(t: float, H: float, median: float = 120.0, sigma: float = 1.2) -> float:
    """P(L <= t | L <= H) for the log-normal truth."""
    F = (lambda x: stats.norm.cdf(np.log(x / median) / sigma))
    return float(F(t) / F(H))


def truth_quantile(q: float, H: float, median: float = 120.0, sigma: float = 1.2) -> float:
    """q-quantile of L given L <= H."""
    FH = stats.norm.cdf(np.log(H / median) / sigma)
    return float(median * np.exp(sigma * stats.norm.ppf(q * FH)))


def truth_median(median: float = 120.0) -> float:
    return median
