"""The readers sort fetched rows in numpy (``frames.row_order``) instead of an SQL
``ORDER BY``; the oracle is SQLite's own ``ORDER BY`` over the same rows (BINARY
collation: text by its UTF-8 bytes, which is code-point order), ties kept in insertion
order as a stable sort keeps them. Text mixes ASCII (the fast byte path), other
characters, empty strings and trailing NUL characters (which numpy's byte strings
would drop)."""
from __future__ import annotations

import sqlite3

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from procmetrics.store import frames as F

TEXT = st.one_of(
    st.text(alphabet="0123456789abcdef", max_size=6),
    st.text(alphabet=st.sampled_from(["a", "b", "\x00", "é", "ß", "Z", "\U0001f600"]),
            max_size=4),
)


def _sqlite_order(rows: list[tuple]) -> list[int]:
    con = sqlite3.connect(":memory:")
    con.execute("CREATE TABLE r (i INTEGER, a TEXT, b INTEGER, c TEXT)")
    con.executemany("INSERT INTO r VALUES (?, ?, ?, ?)",
                    [(i, *row) for i, row in enumerate(rows)])
    return [i for (i,) in con.execute("SELECT i FROM r ORDER BY a, b, c, i")]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(TEXT, st.integers(-3, 3), TEXT), max_size=40), st.booleans())
def test_row_order_is_sqlites_order_by(rows, ascii_only) -> None:
    if ascii_only:      # the byte path only
        rows = [(a.encode("ascii", "ignore").decode().replace("\x00", ""), b,
                 c.encode("ascii", "ignore").decode().replace("\x00", "")) for a, b, c in rows]
    df = pd.DataFrame(rows, columns=["a", "b", "c"]).astype({"a": object, "c": object})
    got = F.row_order(df, ["a", "b", "c"]) if len(df) else np.array([], dtype=int)
    assert list(got) == _sqlite_order(rows)


def test_hashes_take_the_byte_path_and_nul_endings_do_not() -> None:
    hashes = pd.Series(["ab12", "ab1", "0f"], dtype=object)
    assert F.sort_key(hashes).dtype.kind == "S"
    assert F.sort_key(pd.Series(["a\x00", "a"], dtype=object)).dtype.kind == "i"
    assert F.sort_key(pd.Series(["é", "e"], dtype=object)).dtype.kind == "i"
    assert list(F.row_order(pd.DataFrame({"x": ["a\x00", "a"]}, dtype=object), ["x"])) \
        == [1, 0]


def test_shared_values_are_equal_and_missing_values_stay() -> None:
    # equal strings built apart, so they start as distinct objects
    values = ["".join(["x1", "x2"]), None, "".join(["y1", "y2"]), float("nan"), "".join(["x1", "x2"]),
              "".join(["y1", "y2"])]
    df = pd.DataFrame({"v": pd.Series(values, dtype=object)})
    assert df["v"][0] is not df["v"][4]
    F.share_equal_values(df, ["v"])
    got = df["v"].tolist()
    assert got[0] == "x1x2" and got[2] == "y1y2" and got[1] is None and got[3] != got[3]
    assert got[0] is got[4] and got[2] is got[5]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.one_of(TEXT, st.none()), max_size=30))
def test_factorize_keeps_values_that_differ_after_a_nul(values) -> None:
    """Oracle: Python's own equality (a dict of first appearances)."""
    from procmetrics.distinct import factorize

    codes, uniques = factorize(pd.Series(values, dtype=object))
    firsts: dict[str, int] = {}
    for v in values:
        if v is not None:
            firsts.setdefault(v, len(firsts))
    assert list(uniques) == list(firsts)
    assert list(codes) == [-1 if v is None else firsts[v] for v in values]


@settings(max_examples=200, deadline=None)
@given(st.lists(TEXT, max_size=20, unique=True), st.lists(TEXT, max_size=30))
def test_index_lookups_are_exact(keys, values) -> None:
    """``pandas.Index.get_indexer`` on text (what ``tables.commit_subsystems`` looks paths
    up with) compares with Python's own equality, NUL characters included, unlike
    ``pandas.factorize``. Oracle: a Python dict of the keys' positions."""
    at = {k: i for i, k in enumerate(keys)}
    index = pd.Index(np.asarray(keys, dtype=object))
    assert index.get_indexer(np.asarray(values, dtype=object)).tolist() == [
        at.get(v, -1) for v in values]


def test_pandas_alone_would_merge_them() -> None:
    """Why :mod:`procmetrics.distinct` exists (pandas 2.x; if this ever fails, pandas
    compares whole strings now and the guard could go)."""
    assert len(pd.factorize(np.array(["", "\x00"], dtype=object))[1]) == 1
    df = pd.DataFrame({"v": pd.Series(["", "\x00", "a\x00b", "a"], dtype=object)})
    F.share_equal_values(df, ["v"])
    assert df["v"].tolist() == ["", "\x00", "a\x00b", "a"]


@settings(max_examples=200, deadline=None)
@given(st.data(), st.integers(1, 5))
def test_chunked_reads_type_columns_as_one_read(data, chunk) -> None:
    """Oracle: ``DataFrame.from_records(coerce_float=True)`` over all rows at once (the
    read before it was chunked). Each column draws its cells from one kind mix, as a
    typed store column does (integers with NULLs, text with NULLs, ...), in chunks that
    may be all NULL."""
    kinds = data.draw(st.lists(st.sampled_from(["int", "int_null", "real_null", "text_null",
                                                "null", "bytes_null", "int_real"]),
                               min_size=1, max_size=4))
    cell = {"int": st.integers(-2**40, 2**40),
            "int_null": st.one_of(st.none(), st.integers(-5, 5)),
            "real_null": st.one_of(st.none(), st.floats(allow_nan=False, allow_infinity=False)),
            "text_null": st.one_of(st.none(), st.text(max_size=3)),
            "null": st.none(), "bytes_null": st.one_of(st.none(), st.binary(max_size=2)),
            "int_real": st.one_of(st.integers(-5, 5), st.floats(allow_nan=False,
                                                               allow_infinity=False))}
    n = data.draw(st.integers(0, 12))
    rows = [tuple(data.draw(cell[k]) for k in kinds) for _ in range(n)]
    columns = [f"c{i}" for i in range(len(kinds))]
    parts = [pd.DataFrame.from_records(rows[i:i + chunk], columns=columns, coerce_float=True)
             for i in range(0, max(n, 1), chunk)]
    want = pd.DataFrame.from_records(rows, columns=columns, coerce_float=True)
    got = F.join_chunks(parts, columns)
    pd.testing.assert_frame_equal(got, want, check_exact=True, check_index_type=False)
    for c in columns:
        assert [type(v) for v in got[c]] == [type(v) for v in want[c]], c
