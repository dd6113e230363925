"""Read the tidy tables a report needs and fingerprint them.

The store checksum is a SHA-256 over a canonical text dump of the tidy tables
that carry mined data (every table of ``COLUMNS`` except ``mining_runs`` and
``repositories``, whose run times, ids and local paths differ between two
stores that hold the same history). Each row becomes one line (values in one
fixed format, tab-separated); each table contributes its name, row count,
column names and the sum modulo 2**256 of the SHA-256 of its lines (a
multiset hash: independent of row order, so it can be computed in batches in
whatever order the database returns them, in constant memory). A SQLite and a
PostgreSQL store with the same data agree.

The report does not hold ``file_changes`` in memory (millions of rows at
kernel scale; churn comes from ``commits.lines_added``/``lines_deleted``): its
lines are built by the database and hashed batch by batch. Because the sum is
additive, the store keeps the count and digest of ``file_changes``,
``trailers`` and ``unparsed_references`` up to date as mining runs complete
(:mod:`procmetrics.store.digests`); the report uses those and computes the
other tables (and a maintained table whose digest is not stored) in full.

References
----------
Clarke, D. et al. (2003). Incremental multiset hash functions and their
application to memory integrity checking. ASIACRYPT 2003 (the additive
multiset hash).
"""
from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Mapping

import numpy as np
import pandas as pd
from sqlalchemy.engine import Engine

from procmetrics.errors import ConfigError, InsufficientData
from procmetrics.store.digests import MAINTAINED, count_and_digest, full_digest, stored_digests
from procmetrics.store.tables import COLUMNS, read_table, snapshot

CHECKSUM_TABLES: tuple[str, ...] = tuple(
    sorted(t for t in COLUMNS if t not in ("mining_runs", "repositories")))
#: the tables the report reads into memory (file_changes is only fingerprinted)
REPORT_TABLES: tuple[str, ...] = tuple(t for t in COLUMNS if t != "file_changes")


@dataclass(frozen=True)
class StoreData:
    """The tidy tables of one repository, read in one go."""

    repo: str
    tables: Mapping[str, pd.DataFrame]
    #: checksum computed while loading (same snapshot); "" = compute from ``tables``
    checksum: str = ""
    #: when a scope or window cut the tables: its summary, and the whole-tree tables
    scope: Any = None
    whole_tree: Mapping[str, pd.DataFrame] | None = None
    #: scopes claims name: name -> (tables cut from the whole tree, summary)
    named_scopes: Mapping[str, Any] | None = None

    def __getitem__(self, name: str) -> pd.DataFrame:
        return self.tables[name]

    def get(self, name: str, default: Any = None) -> Any:
        return self.tables.get(name, default)


def choose_repo(engine: Engine, repo: str | None) -> str:
    """The repository to report on: the one named, or the only one in the store."""
    repos = read_table(engine, "repositories")
    names = sorted(repos["repo"].astype(str))
    if repo is not None:
        if repo not in names:
            known = ", ".join(names) or "none"
            raise ConfigError(f"repository {repo!r} is not in the store (stored: {known})",
                              key="--repo")
        return repo
    if not names:
        raise InsufficientData("the store holds no mined repository; run 'procmetrics mine' "
                               "first")
    if len(names) > 1:
        raise ConfigError("the store holds several repositories (" + ", ".join(names)
                               + "); choose one with --repo")
    return names[0]


def load_store_data(engine: Engine, repo: str, within: Callable[..., Any] | None = None,
                    *, trailer_keys: Iterable[str] | None = None) -> StoreData:
    """The tidy tables the report needs for ``repo`` and the store checksum.

    One snapshot: a miner writing at the same time is never seen half-way, and
    the checksum describes exactly the data the report was built from (the whole
    store; a scope names its own file checksum). ``within(conn, repo, tables)``, when
    given (a :class:`procmetrics.scope.apply.ScopeRequest`), returns the tables cut to a
    scope and window and its summary, computed in the same snapshot.

    ``trailer_keys``: read only the trailer lines with these keys (case-blind), for a
    caller that looks at no other (the report and the claims read the review trailers;
    Signed-off-by lines alone are about two thirds of a kernel-style history). The
    checksum does not change: the trailers' part comes from the stored digest, or from
    every row in SQL (:func:`~procmetrics.store.digests.full_digest`), never from the
    rows read here.
    """
    keys = None if trailer_keys is None else tuple(trailer_keys)
    with snapshot(engine) as conn:
        tables = {name: read_table(conn, name, repo, **(
            {"keys": keys} if name == "trailers" and keys is not None else {}))
            for name in REPORT_TABLES}
        parts = {name: (len(tables[name]), multiset_digest([canonical_column_lines(
            tables[name], COLUMNS[name])])) for name in CHECKSUM_TABLES
            if name not in MAINTAINED}
        stored = stored_digests(conn, repo)
        for name in MAINTAINED:
            parts[name] = stored[name] if name in stored else full_digest(conn, name, repo)
        if within is not None and getattr(within, "active", True):
            scoped, summary = within(conn, repo, tables)
            named = within.variants(conn, repo, tables) if hasattr(within, "variants") else {}
            return StoreData(repo, scoped, checksum=_combine(parts), scope=summary,
                             whole_tree=tables, named_scopes=named)
    return StoreData(repo, tables, checksum=_combine(parts))


def _canon(value: Any) -> str:
    if value is None or value is pd.NA or value is pd.NaT:
        return "\\N"
    if isinstance(value, pd.Timestamp):
        return "\\N" if pd.isna(value) else str(int(value.timestamp()))
    if isinstance(value, bool):
        return "t" if value else "f"
    if isinstance(value, float):
        if math.isnan(value):
            return "\\N"
        if value.is_integer():
            return str(int(value))
        return repr(value)
    if hasattr(value, "item"):  # numpy scalar
        return _canon(value.item())
    text = str(value)
    return text.replace("\\", "\\\\").replace("\t", "\\t").replace("\n", "\\n")


def canonical_lines(df: pd.DataFrame, columns: Iterable[str]) -> list[str]:
    """One tab-separated line per row, values canonicalised, lines sorted."""
    cols = list(columns)
    lines = ["\t".join(_canon(v) for v in row)
             for row in df.reindex(columns=cols).astype(object).itertuples(index=False)]
    lines.sort()
    return lines


def _canon_column(col: pd.Series) -> pd.Series:
    """Vectorised :func:`_canon` for one column (falls back to it for mixed types)."""
    na = col.isna().to_numpy()
    dt = col.dtype
    if isinstance(dt, pd.DatetimeTZDtype) or pd.api.types.is_datetime64_any_dtype(dt):
        ns = pd.to_datetime(col, utc=True).array.asi8
        out = pd.Series(ns // 1_000_000_000, index=col.index).astype(str)
    elif pd.api.types.is_bool_dtype(dt):
        out = pd.Series(np.where(col.fillna(False).to_numpy(dtype=bool), "t", "f"),
                        index=col.index)
    elif pd.api.types.is_integer_dtype(dt):
        out = col.astype("Int64").astype(str)
    elif pd.api.types.infer_dtype(col, skipna=True) in ("string", "empty"):
        out = (col.astype(object).where(~na, "").astype(str).str.replace("\\", "\\\\", regex=False)
               .str.replace("\t", "\\t", regex=False).str.replace("\n", "\\n", regex=False))
    else:
        return col.astype(object).map(_canon)
    return out.where(~na, "\\N")


_ESCAPED = ("\\", "\t", "\n")
_STR_OR_NONE = {str, type(None)}


def _canon_values(col: pd.Series) -> list[str]:
    """:func:`_canon_column` as a list, with fast paths for the common column kinds:
    integers without gaps, and text in which no value needs escaping (checked on the
    joined text at C speed) skip the per-value pandas string passes."""
    dt = col.dtype
    if isinstance(dt, np.dtype) and dt.kind in "iu":
        return list(map(str, col.to_numpy().tolist()))
    if dt == object and len(col):
        vals = col.tolist()
        kinds = set(map(type, vals))
        if kinds <= _STR_OR_NONE:
            joined = "\x00".join(filter(None, vals))     # (drops None and "")
            if not any(ch in joined for ch in _ESCAPED):
                return vals if kinds == {str} else ["\\N" if v is None else v for v in vals]
            return ["\\N" if v is None else _escape(v) for v in vals]
    return _canon_column(col).tolist()


def _escape(text: str) -> str:
    return text.replace("\\", "\\\\").replace("\t", "\\t").replace("\n", "\\n")


def canonical_column_lines(df: pd.DataFrame, columns: Iterable[str]) -> list[str]:
    """The lines of :func:`canonical_lines`, built column-wise, in row order (not sorted)."""
    if not len(df):
        return []
    cols = [_canon_values(df[c]) if c in df.columns else ["\\N"] * len(df)
            for c in columns]
    return list(map("\t".join, zip(*cols))) if len(cols) > 1 else cols[0]


def multiset_digest(batches: Iterable[list[str]]) -> str:
    """Sum modulo 2**256 of the SHA-256 of each line, as 64 hex digits."""
    return count_and_digest(iter(batches))[1]


def _combine(parts: Mapping[str, tuple[int, str]]) -> str:
    h = hashlib.sha256()
    for name in CHECKSUM_TABLES:
        n, digest = parts[name]
        h.update(f"# {name}\t{n}\n".encode())
        h.update(("\t".join(COLUMNS[name]) + "\n").encode())
        h.update(f"{digest}\n".encode())
    return h.hexdigest()


def store_checksum(data: StoreData) -> str:
    """SHA-256 (hex) over the canonical dump of the mined-data tables.

    The value computed while loading when there is one; otherwise from the
    tables in ``data`` (which must then include ``file_changes``).
    """
    if data.checksum:
        return data.checksum
    return _combine({name: (len(data[name]), multiset_digest([canonical_column_lines(
        data[name], COLUMNS[name])])) for name in CHECKSUM_TABLES})
