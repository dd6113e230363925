"""The report's CSV writer formats text and time columns once per distinct value: the
file must be the one a cell-by-cell pass writes (``csvout._cell`` on every value, the
rule the module states), whatever mix of missing markers, formula-like text, equal
numbers of different types and time zones a column holds. Times are also checked
against Python's own ``datetime.isoformat``."""
from __future__ import annotations

import csv
import io
from datetime import datetime, timezone

import numpy as np
import pandas as pd
import pytest

from procmetrics.report import csvout


def cell_by_cell(df: pd.DataFrame, raw: bool) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    w.writerow([str(c) for c in df.columns])
    for row in df.astype(object).itertuples(index=False):
        w.writerow([csvout._cell(v, raw) for v in row])
    return buf.getvalue()


def frame() -> pd.DataFrame:
    stamps = ["2020-01-01T00:00:00.5Z", None, "2021-03-04T10:00:00Z", "2020-01-01T00:00:00.5Z",
              None, "2022-01-01T00:00:00Z", "2022-01-01T00:00:00Z", "1999-12-31T23:59:59Z",
              "2022-01-01T00:00:00Z"]
    return pd.DataFrame({
        "text": ["x", None, "=1+1", np.nan, "x", pd.NA, "-2", "", 'é\n"q,'],
        "utc": pd.to_datetime(stamps, utc=True, format="ISO8601"),
        "naive": pd.to_datetime(stamps, utc=True, format="ISO8601").tz_localize(None),
        "berlin": pd.to_datetime(stamps, utc=True, format="ISO8601").tz_convert("Europe/Berlin"),
        # equal as numbers but not as cells: must not be collapsed into one value
        "mixed": ["x", 1, 1.0, True, None, "a", 2.5, np.nan, "=x"],
        "zones": [pd.Timestamp("2020-01-01T01:00:00+01:00"), pd.Timestamp("2020-01-01T00:00:00Z"),
                  None, "t", 3, pd.NaT, np.nan, pd.Timestamp("2020-01-01"), "t"],
        "none": [None] * 9,
        # flags looked up where some rows have none: Python and numpy booleans, missing
        "flag": [True, np.nan, False, np.True_, None, pd.NA, np.False_, True, False],
    })


@pytest.mark.parametrize("raw", [False, True])
def test_column_passes_write_the_cell_by_cell_file(raw):
    df = frame()
    assert csvout.frame_to_csv(df, raw=raw) == cell_by_cell(df, raw)


def test_formula_text_is_neutralised_once_per_value_and_times_read_as_isoformat():
    df = frame()
    rows = list(csv.reader(io.StringIO(csvout.frame_to_csv(df))))
    col = rows[0].index
    assert [r[col("text")] for r in rows[1:]] == ["x", "", "'=1+1", "", "x", "", "'-2", "",
                                                   'é\n"q,']
    want = datetime(2021, 3, 4, 10, tzinfo=timezone.utc).isoformat()    # Python's own
    assert rows[3][col("utc")] == want == "2021-03-04T10:00:00+00:00"
    assert rows[3][col("berlin")] == datetime(2021, 3, 4, 11, tzinfo=timezone.utc).replace(
        tzinfo=None).isoformat() + "+01:00"
    assert rows[1][col("naive")] == "2020-01-01T00:00:00.500000"
    assert [r[col("mixed")] for r in rows[1:5]] == ["x", "1", "1", "true"]
    assert {r[col("none")] for r in rows[1:]} == {""}


def test_an_empty_frame_and_an_all_missing_column_keep_their_header():
    empty = frame().iloc[:0]
    assert csvout.frame_to_csv(empty) == cell_by_cell(empty, False)


def test_numpy_paths_for_utc_seconds_and_nullable_columns_write_the_cell_by_cell_file():
    """UTC times to the second (written by numpy's datetime_as_string), nullable integers
    and booleans: the file is the cell-by-cell one, and the times are Python's own
    ``datetime.isoformat``; a column with a sub-second time or another zone keeps the
    per-value path."""
    rng = np.random.default_rng(20261203)
    secs = rng.integers(-2_000_000_000, 4_000_000_000, 500)
    utc = pd.Series(pd.to_datetime(secs, unit="s", utc=True))
    utc[::7] = pd.NaT
    df = pd.DataFrame({
        "utc": utc,
        "utc_sub": utc + pd.to_timedelta(np.where(np.arange(500) == 3, 1, 0), unit="ms"),
        "count": pd.array(np.where(np.arange(500) % 5 == 0, None, secs % 1000), dtype="Int64"),
        "flag": pd.array(np.where(np.arange(500) % 4 == 0, None, secs % 2 == 0),
                         dtype="boolean"),
    })
    assert csvout.iso_seconds(df["utc"]) is not None
    assert csvout.iso_seconds(df["utc_sub"]) is None
    assert csvout.iso_seconds(df["utc"].dt.tz_convert("Europe/Berlin")) is None
    for raw in (False, True):
        assert csvout.frame_to_csv(df, raw=raw) == cell_by_cell(df, raw)
    rows = list(csv.reader(io.StringIO(csvout.frame_to_csv(df))))[1:]
    for r, s, missing in zip(rows, secs, df["utc"].isna()):
        want = "" if missing else datetime.fromtimestamp(int(s), timezone.utc).isoformat()
        assert r[0] == want


@pytest.mark.parametrize("chunk", [1, 2, 3, 4, 1000])
def test_file_written_in_chunks_is_the_cell_by_cell_file(tmp_path, chunk):
    """Tables go to their files a chunk of rows at a time (the formatting of a column may
    take another path in each chunk: text in one, mixed in the next); the file is the
    cell-by-cell text, with and without rows or columns."""
    df = frame()
    for case in (df, df.iloc[:0], df.iloc[:, :0], df[["text", "mixed"]]):
        for raw in (False, True):
            path = tmp_path / "t.csv"
            csvout.write_frame_csv(case, path, raw=raw, chunk=chunk)
            text = path.read_bytes().decode("utf-8")
            assert text == cell_by_cell(case, raw) == csvout.frame_to_csv(case, raw=raw)


@pytest.mark.parametrize("n", [3, 50, 2000])
def test_repeating_numbers_are_formatted_once_each_with_the_same_text(n):
    """Numeric columns whose values repeat (the per-commit columns behind an ECDF) take
    the once-per-distinct-value path: the file is still the cell-by-cell one, with -0.0
    apart from 0.0, NaN and infinities in place, and integers of every width."""
    rng = np.random.default_rng(n)
    pool = np.array([0.0, -0.0, 1.5, 1 / 3, np.nan, np.inf, -np.inf, 1e-300, 2527079.0])
    df = pd.DataFrame({
        "f": pool[rng.integers(0, len(pool), n)],
        "f32": pool[rng.integers(0, len(pool), n)].astype(np.float32),
        "i": rng.integers(-3, 3, n),
        "u": rng.integers(0, 3, n).astype(np.uint64) + np.uint64(2 ** 63),
        "distinct": rng.normal(size=n),
    })
    for raw in (False, True):
        assert csvout.frame_to_csv(df, raw=raw) == cell_by_cell(df, raw)
