"""``to_plain`` of a DataFrame, converted a column at a time, equals the per-cell
conversion of ``DataFrame.to_dict(orient="records")`` (pandas' own row view, the
reference kept here) for every column kind the analyses' tables hold."""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from procmetrics.analyse.result import to_plain


def reference(df: pd.DataFrame) -> list[dict]:
    return [{str(k): to_plain(v) for k, v in row.items()}
            for row in df.to_dict(orient="records")]


def _same(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float):
        return (math.isnan(a) and math.isnan(b)) or a == b
    return type(a) is type(b) and a == b


def frame(n: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    f = rng.normal(size=n)
    f[rng.random(n) < 0.2] = np.nan
    f[rng.random(n) < 0.05] = np.inf
    f[rng.random(n) < 0.05] = -np.inf
    when = pd.Series(pd.to_datetime(rng.integers(0, 2 ** 31, n), unit="s", utc=True))
    when[rng.random(n) < 0.2] = pd.NaT
    return pd.DataFrame({
        "i": rng.integers(-5, 5, n),
        "u": rng.integers(0, 5, n).astype(np.uint8),
        "f": f,
        "f32": f.astype(np.float32),
        "b": rng.random(n) < 0.5,
        "I": pd.array([None if x < 0 else int(x) for x in rng.integers(-2, 9, n)], "Int64"),
        "B": pd.array([None if x == 2 else bool(x) for x in rng.integers(0, 3, n)], "boolean"),
        "when": when,
        "naive": when.dt.tz_localize(None),
        "subsecond": when + pd.to_timedelta(rng.integers(0, 2, n) * 250, unit="ms"),
        "berlin": when.dt.tz_convert("Europe/Berlin"),
        "seconds_unit": when.astype("datetime64[s, UTC]"),
        "obj": [[None, "x", 1, 2.5, np.int64(3), np.nan, pd.NaT][k]
                for k in rng.integers(0, 7, n)],
        "cat": pd.Categorical(rng.choice(["a", "b"], n)),
        "s": pd.array(rng.choice(["p", "q"], n), dtype="string"),
        7: rng.integers(0, 3, n),
    })


@pytest.mark.parametrize("n,seed", [(0, 0), (1, 1), (50, 2), (400, 3)])
def test_rows_equal_the_per_cell_reference(n, seed):
    df = frame(n, seed)
    got, want = to_plain(df), reference(df)
    assert len(got) == len(want)
    for g, w in zip(got, want):
        assert list(g) == list(w)
        assert all(_same(g[k], w[k]) for k in w), (g, w)


def test_duplicate_and_missing_columns():
    df = pd.DataFrame([[1, 2.0], [3, np.nan]], columns=["a", "a"])
    with pytest.warns(UserWarning):         # pandas warns that to_dict drops one
        want = reference(df)
    with pytest.warns(UserWarning):
        assert to_plain(df) == want
    empty = pd.DataFrame(index=range(3))
    assert to_plain(empty) == reference(empty) == []      # pandas gives no rows
