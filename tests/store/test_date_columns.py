"""Epoch seconds from the store become UTC timestamps exactly as pandas' own
``to_datetime(unit="s", utc=True)`` makes them (the oracle), without its float path."""
from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from procmetrics.store.frames import MAX_SECONDS as _MAX_SECONDS
from procmetrics.store.frames import MIN_SECONDS as _MIN_SECONDS
from procmetrics.store.frames import to_utc as _to_utc


def _oracle(values: list[object]) -> pd.Series:
    """pandas' conversion, value by value; what it cannot hold is NaT."""
    out = []
    for x in values:
        try:
            out.append(pd.to_datetime(int(x), unit="s", utc=True))
        except (TypeError, ValueError, OverflowError, pd.errors.OutOfBoundsDatetime):
            out.append(pd.NaT)
    return pd.Series(pd.DatetimeIndex(out, tz="UTC"))


def test_whole_seconds_match_pandas_and_the_calendar() -> None:
    rng = np.random.default_rng(20261203)
    seconds = [int(x) for x in rng.integers(_MIN_SECONDS, _MAX_SECONDS, 5000)]
    seconds += [0, -1, 1, _MIN_SECONDS, _MAX_SECONDS, 1_700_000_000]
    got = _to_utc(pd.Series(seconds, dtype="int64"))
    assert str(got.dtype) == "datetime64[ns, UTC]"
    pd.testing.assert_series_equal(got, _oracle(seconds), check_names=False)
    # the calendar as the standard library counts it
    assert got.iloc[-1] == pd.Timestamp(dt.datetime(2023, 11, 14, 22, 13, 20,
                                                    tzinfo=dt.timezone.utc))
    assert got.iloc[-5] == pd.Timestamp("1969-12-31T23:59:59Z")


def test_missing_and_unholdable_dates_become_nat() -> None:
    raw = pd.Series([None, 2**63 - 1, -(2**62), 86_400, _MAX_SECONDS + 1, _MIN_SECONDS - 1],
                    dtype="object", name="committer_date", index=[10, 11, 12, 13, 14, 15])
    got = _to_utc(raw)
    assert got.name == "committer_date" and list(got.index) == [10, 11, 12, 13, 14, 15]
    assert got.isna().tolist() == [True, True, True, False, True, True]
    assert got.loc[13] == pd.Timestamp("1970-01-02T00:00:00Z")


def test_a_float_column_with_gaps_reads_like_its_integers() -> None:
    """SQLite rows with NULLs arrive as floats; the values stay the whole seconds."""
    ints = [1_234_567_890, 1_600_000_001, 987_654_321]
    got = _to_utc(pd.Series([float(ints[0]), np.nan, float(ints[1]), float(ints[2])]))
    assert got.isna().tolist() == [False, True, False, False]
    assert [int(t.timestamp()) for t in got.dropna()] == ints
