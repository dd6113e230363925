"""Assign commits to reporting periods: calendar month, quarter, year, or release.

Calendar periods use the UTC date of the chosen timestamp (by default the
committer date: when a change landed). A calendar period covers
``[period_start, period_end)``.

Release periods come from the ``tags`` table: a commit belongs to the **first tag
whose ``tag_date`` is >= the commit's date**, i.e. to the release that first
shipped it, judged by dates (not by ancestry: a commit on a side branch merged
after a tag goes to the next tag by date). A release period covers
``(previous tag_date, tag_date]``; the first release starts at the earliest
commit. Commits newer than the last tag form the period ``"(unreleased)"``
ending at the newest commit. Tags with the same date are ordered by name and
the later ones get empty periods, which are dropped.
"""
from __future__ import annotations

import datetime as dt
import re
from typing import Literal, Mapping

import numpy as np
import pandas as pd

from procmetrics.errors import ConfigError, InsufficientData

Period = Literal["month", "quarter", "year", "release"]
PERIODS: tuple[str, ...] = ("month", "quarter", "year", "release")
#: the one default period of every command, the report, the claims and the
#: library: per-month review and fix shares rest on too few commits in most
#: histories (README, "Periods")
DEFAULT_PERIOD = "quarter"
UNRELEASED = "(unreleased)"

_FREQ = {"month": "M", "quarter": "Q", "year": "Y"}


def utc_times(dates):
    """``pd.to_datetime(dates, utc=True)``, without pandas' parse cache when the values
    are times already: the cache only saves re-parsing text, and deciding whether to use
    it iterates values one by one (8 ms a call on a few hundred rows). Same result."""
    dtype = getattr(dates, "dtype", None)
    parsed = isinstance(dtype, pd.DatetimeTZDtype) or (isinstance(dtype, np.dtype)
                                                        and dtype.kind == "M")
    return pd.to_datetime(dates, utc=True, cache=not parsed)


def _as_utc(dates: pd.Series) -> pd.Series:
    return utc_times(dates)


def _label(p: pd.Period, period: str) -> str:
    if period == "month":
        return f"{p.year:04d}-{p.month:02d}"
    if period == "quarter":
        return f"{p.year:04d}Q{p.quarter}"
    return f"{p.year:04d}"


def calendar_frame(start: pd.Timestamp, end: pd.Timestamp, period: str) -> pd.DataFrame:
    """Every calendar period from the one holding ``start`` to the one holding ``end``.

    Columns: ``period`` (label such as ``2024-03``, ``2024Q1``, ``2024``),
    ``period_start``, ``period_end`` (exclusive), both UTC.
    """
    if period not in _FREQ:
        raise ValueError(f"unknown calendar period {period!r}")
    freq = _FREQ[period]
    s = pd.Timestamp(start).tz_convert("UTC").tz_localize(None).to_period(freq)
    e = pd.Timestamp(end).tz_convert("UTC").tz_localize(None).to_period(freq)
    rng = pd.period_range(s, e, freq=freq)
    return pd.DataFrame({
        "period": [_label(p, period) for p in rng],
        "period_start": [p.start_time.tz_localize("UTC") for p in rng],
        "period_end": [(p + 1).start_time.tz_localize("UTC") for p in rng],
    })


def release_frame(tags: pd.DataFrame, first: pd.Timestamp, last: pd.Timestamp) -> pd.DataFrame:
    """Release periods from the ``tags`` table (see the module docstring)."""
    if tags is None or len(tags) == 0:
        raise InsufficientData("release periods need tags, and the store has none")
    t = tags.dropna(subset=["tag_date"]).copy()
    t["tag_date"] = _as_utc(t["tag_date"])
    t = t.sort_values(["tag_date", "name"], kind="mergesort")
    t = t.drop_duplicates(subset=["tag_date"], keep="first")
    rows = []
    prev = min(pd.Timestamp(first), t["tag_date"].iloc[0])
    for name, date in zip(t["name"], t["tag_date"]):
        rows.append((str(name), prev, date))
        prev = date
    if pd.Timestamp(last) > prev:
        rows.append((UNRELEASED, prev, pd.Timestamp(last)))
    return pd.DataFrame(rows, columns=["period", "period_start", "period_end"])


def assign_periods(dates: pd.Series, period: str,
                   tags: pd.DataFrame | None = None) -> tuple[pd.Series, pd.DataFrame]:
    """Map each date to its period.

    Parameters
    ----------
    dates : Series of timezone-aware timestamps (one per commit).
    period : ``"month"``, ``"quarter"``, ``"year"`` or ``"release"``.
    tags : the tidy ``tags`` table; needed for ``"release"``.

    Returns
    -------
    labels : Series of period labels aligned with ``dates``.
    frame : one row per period in time order with ``period``, ``period_start``,
        ``period_end`` (every calendar period in the range, even empty ones).

    References
    ----------
    Calendar arithmetic: pandas ``Period``; release rule: see the module docstring.
    """
    if period not in PERIODS:
        raise ValueError(f"unknown period {period!r}; choose one of {', '.join(PERIODS)}")
    d = _as_utc(dates)
    if d.isna().all() or len(d) == 0:
        raise InsufficientData("no dated commits to assign to periods")
    first, last = d.min(), d.max()
    if period in _FREQ:
        frame = calendar_frame(first, last, period)
        freq = _FREQ[period]
        per = d.dt.tz_convert("UTC").dt.tz_localize(None).dt.to_period(freq)
        # one label per distinct period (a few hundred), not per commit
        codes, uniques = pd.factorize(per)
        names = np.array([_label(p, period) for p in uniques] + [None], dtype=object)
        labels = pd.Series(names[codes], index=d.index, dtype="object")
        return labels, frame
    frame = release_frame(tags if tags is not None else pd.DataFrame(), first, last)
    ends = frame["period_end"].to_numpy(dtype="datetime64[ns]")
    vals = d.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy(dtype="datetime64[ns]")
    # first tag whose date is >= the commit date (side='left' on the sorted ends)
    idx = np.searchsorted(ends, vals, side="left")
    idx = np.clip(idx, 0, len(frame) - 1)
    labels = pd.Series(frame["period"].to_numpy()[idx], index=d.index, dtype="object")
    labels[d.isna().to_numpy()] = None
    return labels, frame


def period_midpoints(frame: pd.DataFrame) -> pd.Series:
    """Midpoint of each period (UTC timestamps), used as the time of a period's value."""
    return frame["period_start"] + (frame["period_end"] - frame["period_start"]) / 2


def years_since(ts: pd.Series | pd.Timestamp, origin: pd.Timestamp) -> np.ndarray:
    """Time in years (365.25 days) from ``origin``."""
    delta = pd.to_datetime(ts, utc=True) - origin
    if isinstance(delta, pd.Timedelta):
        return np.asarray(delta / pd.Timedelta(days=365.25), dtype=float)
    return np.asarray(delta / pd.Timedelta(days=365.25), dtype=float)


_HEX = re.compile(r"^[0-9a-fA-F]{4,64}$")


def parse_date_text(text: str) -> pd.Timestamp | None:
    """An ISO 8601 date or date-time as a UTC timestamp (UTC when no zone is given);
    ``None`` when ``text`` is not one (``2016-13-01`` is not)."""
    text = text.strip()
    try:
        if len(text) <= 10:
            return pd.Timestamp(dt.date.fromisoformat(text).isoformat(), tz="UTC")
        ts = pd.Timestamp(dt.datetime.fromisoformat(text.replace("Z", "+00:00")))
    except (ValueError, OverflowError, pd.errors.OutOfBoundsDatetime):
        return None
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def resolve_when(value: object, *, commits: pd.DataFrame | None = None,
                 tags: pd.DataFrame | None = None, option: str = "date") -> pd.Timestamp:
    """The one parser for every date option (``--policy-date``, ``--at``,
    ``--change-date``, ``--links-from``): an ISO date or date-time (UTC unless a zone is
    given), else a tag name, else a commit hash prefix (at least 4 hex digits) in the
    store. A tag or commit gives its committer date (the day the change landed). A text
    that reads as an ISO date is a date. Anything else is a :class:`ConfigError` naming
    ``option`` (exit 2).
    """
    text = str(value).strip()
    day = parse_date_text(text)
    if day is not None:
        return day
    if tags is not None and len(tags):
        hit = tags[tags["name"] == text]
        if len(hit):
            commit = hit.iloc[0]["commit_hash"]
            row = commits[commits["hash"] == commit] if commits is not None else []
            ts = row.iloc[0]["committer_date"] if len(row) else hit.iloc[0]["tag_date"]
            return pd.Timestamp(ts).tz_convert("UTC")
    if _HEX.match(text) and commits is not None and len(commits):
        rows = commits[commits["hash"].astype(str).str.startswith(text.lower())]
        n = len(rows["hash"].unique())
        if n == 1:
            return pd.Timestamp(rows.iloc[0]["committer_date"]).tz_convert("UTC")
        if n > 1:
            raise ConfigError(f"{option} {text!r} matches {n} commits; give more digits",
                              key=option)
    what = "a date (YYYY-MM-DD)" + (", a tag or a commit in the store"
                                    if commits is not None else "")
    raise ConfigError(f"{option} {text!r} is not {what}", key=option)


def resolve_policy(data: Mapping[str, pd.DataFrame], policy: str | None) -> pd.Timestamp | None:
    """The policy date (see :func:`resolve_when`); ``None`` when none was given."""
    if policy is None:
        return None
    return resolve_when(policy, commits=data["commits"], tags=data["tags"],
                        option="--policy-date")
