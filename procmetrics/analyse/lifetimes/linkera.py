"""Where the link era starts: the month from which `Fixes:` linking has settled.

Defects are seen only through fix links. When a project adopts the ``Fixes:``
trailer slowly, the defects fixed in the early years are rarely linked, so the
first linked fix is a poor start for the link era: the early introducers that
do show up are mostly the long-lived ones (their fixes came later, when
linking was common), and lifetime estimates drift upward.

The *settled* rule, stated once and used by default:

* per calendar month (UTC, on the chosen clock), the share of non-merge
  commits that carry at least one resolved fix link (the *linked-fix share*);
* the *later level* is the pooled share over the second half of the months
  from the first linked fix to the end of the history;
* the *rolling share* of a month is the pooled share over that month and the
  ``window_months - 1`` months before it (default 12: single months of a
  small project are too noisy, and a trailing window reaches the level only
  once linking has been there for most of a year);
* the link era starts at the first month whose rolling share reaches
  ``fraction`` (default 0.8) of the later level (later dips below it are
  counted in the rule text: on a real history linking rose for five years and
  then fell back a little, and a rule requiring the share to *stay* above the
  level then found no start at all).

Why 0.8 and 12 months: inside the era the chance that a fix is linked then
varies by at most a factor of about 1.25. Linking that still rises inside the
era biases even the horizon-conditional figures (long lifetimes end later,
when linking is more common): in the simulation of
``tests/analyse/test_lifetime_simulation.py`` (logistic adoption, 10-90 % in
1.4 years, 30 % of fixes never linked) a rule at one half of the later level
(6-month windows) gave 80-83 % coverage of nominal 95 % intervals, the rule at
0.8 (12-month trailing windows) gives coverage at the nominal level, and 0.9
is too sensitive to noise (the rule then often finds no settled start). What
remains is checked by the sensitivity table (later start dates), not assumed
away.

``LinkEra.monthly`` columns (:data:`MONTHLY_COLUMNS`): ``month`` (first day,
UTC), ``commits``, ``linked_fixes``, ``share``, ``rolling_share``,
``settled`` (month is at or after the start).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.analyse.measures.periods import utc_times
from procmetrics.analyse.result import Caveat, caveat, to_plain

MONTHLY_COLUMNS = ["month", "commits", "linked_fixes", "share", "rolling_share", "settled"]
SETTLED_FRACTION = 0.8
SETTLED_WINDOW_MONTHS = 12


@dataclass(frozen=True)
class LinkEra:
    """The start of the link era and how it was chosen."""

    start: pd.Timestamp | None
    rule: str
    first_link: pd.Timestamp | None
    reference_share: float | None
    fraction: float
    window_months: int
    monthly: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=MONTHLY_COLUMNS))

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def rule_text(fraction: float = SETTLED_FRACTION,
              window_months: int = SETTLED_WINDOW_MONTHS) -> str:
    return (f"settled: first month in which the share of non-merge commits carrying a "
            f"resolved fix link, pooled over it and the {window_months - 1} months before, "
            f"reaches "
            f"{fraction:g} x its later level (pooled share over the second half of the "
            "months since the first linked fix)")


def settled_link_start(fix_links: pd.DataFrame, commits: pd.DataFrame, *,
                       clock: str = "committer", fraction: float = SETTLED_FRACTION,
                       window_months: int = SETTLED_WINDOW_MONTHS) -> LinkEra:
    """Start of the link era by the *settled* rule (see module docstring).

    Falls back to the first linked fix (saying so in ``rule``) when the history
    after it is shorter than two windows.

    References
    ----------
    Kalbfleisch & Lawless (1989), JASA 84 (the observation window must be
    known for truncated data to be analysed); common practice for the
    pooled-window smoothing.
    """
    rule = rule_text(fraction, window_months)
    ok = fix_links[(fix_links["status"] == "resolved") & fix_links["introducer_hash"].notna()]
    fx = utc_times(ok.drop_duplicates("fix_hash")[f"fix_{clock}_date"]).dropna()
    if fx.empty or commits is None or not len(commits):
        return LinkEra(None, rule + "; no linked fix or no commits: no start found", None,
                       None, fraction, window_months)
    first = fx.min()
    c = commits
    if "is_merge" in c:
        c = c[~c["is_merge"].fillna(False).astype(bool)]
    cd = utc_times(c[f"{clock}_date"]).dropna()
    month = (lambda s: s.dt.tz_localize(None).dt.to_period("M"))
    p0, p1 = first.tz_localize(None).to_period("M"), cd.max().tz_localize(None).to_period("M")
    months = pd.period_range(p0, p1, freq="M")
    n_c = month(cd).value_counts().reindex(months, fill_value=0).to_numpy(float)
    n_f = month(fx).value_counts().reindex(months, fill_value=0).to_numpy(float)
    m = len(months)
    share = np.divide(n_f, n_c, out=np.full(m, np.nan), where=n_c > 0)
    w = window_months
    roll = np.full(m, np.nan)
    if m >= w:
        # trailing window: the share over month m and the w - 1 months before it
        cf, cc = np.cumsum(np.r_[0, n_f]), np.cumsum(np.r_[0, n_c])
        num, den = cf[w:] - cf[:-w], cc[w:] - cc[:-w]
        roll[w - 1:] = np.divide(num, den, out=np.full(len(num), np.nan), where=den > 0)
    half = m // 2
    ref = float(n_f[half:].sum() / n_c[half:].sum()) if n_c[half:].sum() else None
    start_i = 0
    if m < 2 * w or ref is None or ref <= 0:
        rule += f"; the history after the first linked fix is shorter than {2 * w} months: " \
                "the first linked fix starts the era"
        start = first
    else:
        full = np.isfinite(roll)
        above = full & (roll >= fraction * ref)
        if not above.any():           # never reaches the level within the history
            start_i = 0
            rule += "; linking never reached that level: the first linked fix starts the era"
            start = first
        else:
            start_i = int(np.flatnonzero(above)[0])
            start = max(first, pd.Timestamp(months[start_i].start_time, tz="UTC"))
            dips = int((full & ~above)[start_i:].sum())
            if dips:
                rule += (f"; after the start the share falls below that level in {dips} "
                         "month(s); the sensitivity table, where shown, re-estimates the figures "
                         "for later starts")
    monthly = pd.DataFrame({
        "month": [pd.Timestamp(p.start_time, tz="UTC") for p in months],
        "commits": n_c.astype(int), "linked_fixes": n_f.astype(int), "share": share,
        "rolling_share": roll, "settled": np.arange(m) >= start_i})
    return LinkEra(start, rule, first, ref, fraction, window_months, monthly[MONTHLY_COLUMNS])


def era_by_repository(first_by_repo: pd.Series, fix_links: pd.DataFrame,
                      commits: pd.DataFrame | None, *, clock: str = "committer",
                      settled: bool = True) -> tuple[pd.Series, str, LinkEra | None]:
    """Start of each repository's link era: its first linked fix, or by the settled rule.

    Returns the start per repository, the rule in words and (for one repository)
    the :class:`LinkEra` with its monthly shares.
    """
    rule = "first: the first linked fix starts the link era"
    if not settled:
        return first_by_repo, rule, None
    if commits is None or not len(commits):
        return first_by_repo, rule + " (the settled rule needs the commits table; none given)", None
    eras = {}
    for r in first_by_repo.index:
        eras[r] = settled_link_start(fix_links[fix_links["repo"].astype(str) == r],
                                     commits[commits["repo"].astype(str) == r], clock=clock)
    starts = pd.Series({r: e.start if e.start is not None else first_by_repo[r]
                        for r, e in eras.items()}, dtype=first_by_repo.dtype)
    info = eras[first_by_repo.index[0]] if len(eras) == 1 else None
    return starts, next(iter(eras.values())).rule if eras else rule, info


def adoption_caveat(fixes: pd.Series, commits: pd.DataFrame | None, start: pd.Timestamp,
                     tau: pd.Timestamp, clock: str) -> Caveat | None:
    """Warn when the first year after ``start`` has far fewer linked fixes per commit."""
    if commits is None or not len(commits) or pd.isna(tau) or (tau - start).days < 730:
        return None
    c = commits
    if "is_merge" in c:
        c = c[~c["is_merge"].fillna(False).astype(bool)]
    cd = utc_times(c[f"{clock}_date"])
    cut = start + pd.Timedelta(days=365)
    n1, n2 = int(((cd >= start) & (cd < cut)).sum()), int(((cd >= cut) & (cd <= tau)).sum())
    f1 = int(((fixes >= start) & (fixes < cut)).sum())
    f2 = int(((fixes >= cut) & (fixes <= tau)).sum())
    if not (n1 and n2 and f2):
        return None
    s1, s2 = f1 / n1, f2 / n2
    if s1 >= 0.5 * s2:
        return None
    return caveat("tag_adoption_rising", f"fix links were rare in the first year after "
                  f"{start:%Y-%m-%d} ({f1} linked fixes in {n1} commits, {s1:.1%}) compared "
                  f"with later ({s2:.1%}): defects fixed in that year are under-represented; "
                  "choose a later links_from date (CLI: --links-from) where linking had settled")
