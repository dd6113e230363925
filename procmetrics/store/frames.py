"""Rows fetched from the store into pandas, the machinery under the tidy readers of
:mod:`procmetrics.store.tables`: the SQLite driver's tuples a chunk at a time and typed as
one read would type them, rows ordered in numpy as SQLite's ``ORDER BY`` orders them,
repository and people's names looked up from ids, equal strings shared, epoch seconds
made UTC timestamps. See DEVELOPERS.md, "Reading the store"; the tests are
``tests/store/test_read_order.py``, ``test_shared_reads.py`` and ``test_date_columns.py``.
"""
from __future__ import annotations

from typing import Any, Iterable, Iterator

import numpy as np
import pandas as pd
from sqlalchemy import select
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.sql import Select

from procmetrics.distinct import factorize
from procmetrics.errors import StoreError
from procmetrics.store import schema as s
from procmetrics.store.readsql import snapshot


def share_equal_values(df: pd.DataFrame, columns: Iterable[str]) -> None:
    """Equal values of each object column become one object (values unchanged).

    The equal values are found by :func:`procmetrics.distinct.factorize` (pandas' hash
    table; a Python dict over a million cells took seconds); a missing value (None or
    NaN) stays as it was.
    """
    for c in columns:
        if c in df.columns and df[c].dtype == object and len(df):
            values = df[c].to_numpy()
            codes, uniques = factorize(values)
            shared = uniques[np.maximum(codes, 0)] if len(uniques) else values.copy()
            missing = codes < 0
            if missing.any():
                shared[missing] = values[missing]
            df[c] = shared


# seconds pandas can hold as a Timestamp (about 1677-09-22 .. 2262-04-11)
MIN_SECONDS = int(pd.Timestamp.min.timestamp()) + 1
MAX_SECONDS = int(pd.Timestamp.max.timestamp()) - 1


def to_utc(seconds: pd.Series) -> pd.Series:
    """Epoch seconds -> UTC timestamps; a date pandas cannot hold (git keeps up to
    2**63 - 1 seconds) becomes NaT instead of failing the whole read.

    The store keeps whole seconds (``BigInteger``), so the nanoseconds are built in
    integer arithmetic. pandas' own ``to_datetime(unit="s")`` casts through floats under
    ``np.errstate(over="raise")``, and one report at 300,000 commits stopped there
    once with a ``FloatingPointError`` that did not come back in five reruns.
    """
    v = pd.to_numeric(seconds, errors="coerce")
    ok = (v.notna() & (v >= MIN_SECONDS) & (v <= MAX_SECONDS)).to_numpy(dtype=bool)
    ns = np.full(len(v), np.iinfo(np.int64).min, dtype=np.int64)   # NaT everywhere
    ns[ok] = v.to_numpy()[ok].astype(np.int64) * 1_000_000_000
    out = pd.Series(ns.view("datetime64[ns]"), index=seconds.index, name=seconds.name)
    return out.dt.tz_localize("UTC")


def sort_key(col: pd.Series) -> np.ndarray:
    """One column of a row order as an array ``numpy.lexsort`` orders as SQLite's
    BINARY collation would: numbers as they are, text by code point. ASCII text
    without NUL characters is compared as bytes (a million hashes in a fifth of a
    second; numpy's byte strings drop trailing NULs, hence that condition); other
    text through its sorted distinct values (seconds at that size)."""
    values = col.to_numpy()
    if values.dtype != object:
        return values
    items = values.tolist()
    try:
        joined = "".join(items)             # raises unless every value is text
    except TypeError:
        joined = "\x00"
    if joined.isascii() and "\x00" not in joined:
        return np.array(items, dtype="S")
    codes, uniques = factorize(values)
    # Python's own sort of the distinct values (pandas' sorted factorize goes through
    # numpy text, which drops trailing NULs too)
    rank = np.empty(len(uniques), dtype=np.int64)
    rank[sorted(range(len(uniques)), key=list(uniques).__getitem__)] = np.arange(len(uniques))
    return rank[codes]


def row_order(df: pd.DataFrame, order: list[str]) -> np.ndarray:
    """Positions that sort ``df`` by the ``order`` columns (the first most significant;
    ties keep the fetched order, as the stable sort did)."""
    return np.lexsort([sort_key(df[c]) for c in reversed(order)])


#: rows converted at a time on SQLite: the driver's tuples of one chunk are freed before
#: the next is fetched (all at once, they were about half the peak of reading the
#: commits at a million commits)
FETCH_ROWS = 100_000


def fetch_frame(conn: Connection, stmt: Select) -> pd.DataFrame:
    """The rows of ``stmt`` as a DataFrame. On SQLite the tuples come straight from the
    driver's cursor (SQLAlchemy's row objects cost a third of the read at kernel scale),
    :data:`FETCH_ROWS` at a time, and the chunks' columns are joined as one read would
    have typed them (:func:`join_chunks`); booleans arrive as 0/1, which the tidy readers
    turn into the same ``boolean`` column. Other databases go through
    ``pandas.read_sql``."""
    if conn.dialect.name != "sqlite":
        return pd.read_sql(stmt, conn)
    result = conn.execute(stmt)
    parts = []
    try:
        cursor = result.cursor
        columns = [d[0] for d in cursor.description]
        while True:
            rows = cursor.fetchmany(FETCH_ROWS)
            if not rows and parts:
                break
            parts.append(pd.DataFrame.from_records(rows, columns=columns, coerce_float=True))
            if not rows:
                break
    finally:
        result.close()
    return join_chunks(parts, columns)


def fetch_rows(conn: Connection, stmt: Select) -> Iterator[list[tuple[Any, ...]]]:
    """The rows of ``stmt`` as lists of plain tuples, at most :data:`FETCH_ROWS` at a
    time, for a caller that reduces each chunk to arrays before the next is fetched
    (no DataFrame: pandas' typing of a chunk's columns is work such a caller does not
    need). On SQLite the tuples come straight from the driver's cursor."""
    result = conn.execute(stmt)
    try:
        cursor = result.cursor if conn.dialect.name == "sqlite" else None
        while True:
            rows = (cursor.fetchmany(FETCH_ROWS) if cursor is not None
                    else [tuple(row) for row in result.fetchmany(FETCH_ROWS)])
            if not rows:
                break
            yield rows
    finally:
        result.close()


def join_chunks(parts: list[pd.DataFrame], columns: list[str]) -> pd.DataFrame:
    """The chunks of one read as one frame, each column typed as
    ``DataFrame.from_records(coerce_float=True)`` types it over all rows: integers
    (int64), integers or reals with NULLs (float64, NaN), text or mixed (object),
    only NULLs (object None). A chunk sees only its own rows, so a column can come
    as int64 in one chunk, float64 in another and all-None object in a third."""
    if len(parts) == 1:
        return parts[0]
    out = {}
    for c in columns:
        cols = [p[c] for p in parts]
        kinds = {col.dtype for col in cols}
        if len(kinds) == 1:
            out[c] = np.concatenate([col.to_numpy() for col in cols])
        elif all(col.dtype.kind in "iuf" or (col.dtype == object and col.isna().all())
                 for col in cols):
            out[c] = np.concatenate([col.to_numpy(dtype=float, na_value=np.nan)
                                     for col in cols])
        else:
            out[c] = np.concatenate([col.astype(object).to_numpy() for col in cols])
    return pd.DataFrame(out, columns=columns)


def fetch_by_ids(engine: Engine | Connection, stmt: Select, repo_id: Any, repo: str | None,
                  *, people: bool = False) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """The rows of ``stmt`` (which selects ``repo_id`` first) for repository ``repo``
    (None: all), filtered by id, with the repository's name put in a leading ``repo``
    column from one read of the ``repository`` table; with ``people``, the ``person``
    table too, for the caller's lookups. All reads in one snapshot, so every id is found.
    """
    r, p = s.repository, s.person
    repos = select(r.c.repo_id, r.c.name)
    if repo is not None:
        wanted = select(r.c.repo_id).where(r.c.name == repo).scalar_subquery()
        stmt = stmt.where(repo_id == wanted)
        repos = repos.where(r.c.repo_id == wanted)
    queries = [stmt, repos] + ([select(p.c.person_id, p.c.name, p.c.email)] if people else [])

    def fetch(conn: Connection) -> list[pd.DataFrame]:
        return [fetch_frame(conn, q) for q in queries]

    if isinstance(engine, Connection):
        frames = fetch(engine)
    else:
        with snapshot(engine) as conn:
            frames = fetch(conn)
    df, repo_rows = frames[0], frames[1]
    df.insert(0, "repo", as_text(repo_rows["name"])[
        positions(repo_rows["repo_id"], df.pop("repo_id"))])
    return df, (frames[2] if people else None)


def positions(keys: pd.Series, wanted: pd.Series) -> np.ndarray:
    """Where each of ``wanted`` sits in ``keys`` (unique ids); an id not there is an
    inconsistent read, never a silent wrap-around to the last row."""
    at = pd.Index(keys).get_indexer(wanted)
    if len(at) and at.min() < 0:
        raise StoreError("the store changed while it was read (an id without its row); "
                         "read it again")
    return at


def as_text(col: pd.Series) -> np.ndarray:
    """A text column as an object array (empty stays object, never float)."""
    return np.asarray(col.to_numpy(), dtype=object)
