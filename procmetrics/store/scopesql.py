"""The SQL of scopes: the distinct stored paths, and the commits touching a set of them.

Path globs are matched in Python once per distinct path (``procmetrics.scope``);
the commits are then selected by the database: the matched paths go into a
temporary table (primary key = an index) and ``file_change`` is joined against
it in one pass, on SQLite and PostgreSQL alike. Nothing is written to the store
(a temporary table lives in the connection and is dropped when done).

A commit *touches* a path when a stored change of the commit adds, modifies,
deletes or changes the type of it, or renames a file from or to it (the old path
of a rename counts; the source of a copy does not, as it is left unchanged).
Merge commits have stored changes only when the miner was asked for them
(``merge_files="first-parent"``); they then touch what that diff shows.
"""
from __future__ import annotations

import pandas as pd
from sqlalchemy import Column, MetaData, Table, Text, and_, insert, or_, select, union
from sqlalchemy.engine import Connection

from procmetrics.store import schema as s
from procmetrics.store.tables import _complete_runs

_BATCH = 10_000


def _base(repo: str):
    g = s.commit
    return (g.c.run_id.in_(_complete_runs()),
            g.c.repo_id == select(s.repository.c.repo_id)
            .where(s.repository.c.name == repo).scalar_subquery())


def distinct_paths(conn: Connection, repo: str) -> list[str]:
    """Every distinct path a stored change of ``repo`` touched (sorted)."""
    g, fc = s.commit, s.file_change
    cond = _base(repo)
    new = select(fc.c.path.label("p")).join(g, g.c.commit_id == fc.c.commit_id).where(*cond)
    old = (select(fc.c.old_path.label("p")).join(g, g.c.commit_id == fc.c.commit_id)
           .where(*cond, fc.c.change_type == "R", fc.c.old_path.is_not(None)))
    rows = conn.execute(union(new, old)).scalars().all()
    return sorted(str(p) for p in rows)


def commits_touching(conn: Connection, repo: str, paths: list[str]) -> pd.DataFrame:
    """One row per commit touching one of ``paths``: ``hash``, ``is_merge`` and
    ``scope_lines`` (lines added + deleted in the touched in-scope files; missing when
    line counts were not mined or a file is binary)."""
    cols = ["hash", "is_merge", "scope_lines"]
    if not paths:
        return pd.DataFrame({"hash": pd.Series(dtype=str), "is_merge": pd.Series(dtype=bool),
                             "scope_lines": pd.Series(dtype="Int64")}, columns=cols)
    # a connection left streaming (server-side cursors, e.g. by canonlines.canonical_line_batches)
    # cannot run DDL on PostgreSQL; SQLAlchemy sets execution options in place
    conn = conn.execution_options(stream_results=False)
    tmp = Table("pm_scope_path", MetaData(), Column("path", Text, primary_key=True),
                prefixes=["TEMPORARY"])
    tmp.create(conn, checkfirst=True)
    try:
        for k in range(0, len(paths), _BATCH):
            conn.execute(insert(tmp), [{"path": p} for p in paths[k:k + _BATCH]])
        g, fc = s.commit, s.file_change
        inset = select(tmp.c.path)
        stmt = (select(g.c.hash, g.c.is_merge, fc.c.lines_added, fc.c.lines_deleted)
                .join(g, g.c.commit_id == fc.c.commit_id)
                .where(*_base(repo), or_(fc.c.path.in_(inset),
                                         and_(fc.c.change_type == "R", fc.c.old_path.in_(inset)))))
        df = pd.DataFrame(conn.execute(stmt).all(),
                          columns=["hash", "is_merge", "lines_added", "lines_deleted"])
    finally:
        tmp.drop(conn, checkfirst=True)
    if df.empty:
        return commits_touching(conn, repo, [])
    df["n"] = (pd.to_numeric(df["lines_added"]).astype("Int64")
               + pd.to_numeric(df["lines_deleted"]).astype("Int64"))
    df["na"] = df["n"].isna()
    out = (df.groupby("hash", sort=True)
           .agg(is_merge=("is_merge", "first"), total=("n", "sum"), na=("na", "any"))
           .reset_index())
    out["is_merge"] = out["is_merge"].astype(bool)
    out["scope_lines"] = out["total"].astype("Int64").mask(out["na"].astype(bool))
    return out[cols]
