"""The checksum's canonical lines of the per-commit tables, built by the database.

The store checksum (:mod:`procmetrics.store.repodata`) hashes one canonical line per
row of every tidy table. For the tables whose rows are written with their commit and
never updated (:data:`SQL_LINE_TABLES`), the database builds those lines itself, in
the same format as ``repodata.canonical_column_lines`` builds them from a DataFrame,
so millions of rows are fingerprinted without holding them in pandas and the writer
can add a completing run's lines to the stored digests (:mod:`procmetrics.store.digests`).
"""
from __future__ import annotations

from typing import Iterator

from sqlalchemy import case, func, select
from sqlalchemy.engine import Connection

from procmetrics.errors import StoreError
from procmetrics.store import schema as s
from procmetrics.store.readsql import COLUMNS, _complete_runs, _repo_filter


def _canon_sql(expr, kind: str):
    """SQL for one value in the checksum's canonical text (same rules as
    ``report.data``): NULL -> ``\\N``, booleans ``t``/``f``, integers in decimal,
    text with backslash, tab and newline escaped."""
    from sqlalchemy import String, cast, literal

    null = literal("\\N")
    if kind == "bool":
        return case((expr.is_(None), null), (expr == True, literal("t")),  # noqa: E712
                    else_=literal("f"))
    text = cast(expr, String)
    if kind == "text":
        text = func.replace(func.replace(func.replace(
            text, "\\", "\\\\"), "\t", "\\t"), "\n", "\\n")
    return func.coalesce(text, null)


def _line_source(name: str):
    """(tidy column -> (SQL expression, canonical kind), FROM clause) of a table whose
    canonical lines the database builds (:data:`SQL_LINE_TABLES`): the same joins as
    its reader, without the visibility filter."""
    g, r = s.commit, s.repository
    base = {"repo": (r.c.name, "text"), "hash": (g.c.hash, "text")}
    if name == "file_changes":
        fc = s.file_change
        cols = {**base, "path": (fc.c.path, "text"), "old_path": (fc.c.old_path, "text"),
                "change_type": (fc.c.change_type, "text"),
                "lines_added": (fc.c.lines_added, "int"),
                "lines_deleted": (fc.c.lines_deleted, "int"),
                "is_binary": (fc.c.is_binary, "bool")}
        frm = fc.join(g, g.c.commit_id == fc.c.commit_id)
    elif name == "trailers":
        t, p = s.trailer, s.person
        cols = {**base, "position": (t.c.position, "int"), "key": (t.c.key, "text"),
                "raw_key": (t.c.raw_key, "text"), "value": (t.c.value, "text"),
                "person_name": (p.c.name, "text"), "person_email": (p.c.email, "text")}
        frm = t.join(g, g.c.commit_id == t.c.commit_id).outerjoin(
            p, p.c.person_id == t.c.person_id)
    elif name == "unparsed_references":
        u = s.unparsed_reference
        cols = {**base, "kind": (u.c.kind, "text"), "raw_text": (u.c.raw_text, "text")}
        frm = u.join(g, g.c.commit_id == u.c.commit_id)
    else:
        raise StoreError(f"no SQL canonical lines for table {name!r}")
    return cols, frm.join(r, r.c.repo_id == g.c.repo_id)


#: tables whose canonical lines come from :func:`canonical_line_batches`: per-commit rows
#: whose line depends only on their commit, its repository and the persons (never updated)
SQL_LINE_TABLES: tuple[str, ...] = ("file_changes", "trailers", "unparsed_references")


def canonical_line_batches(conn: Connection, name: str, repo: str | None = None, *,
                           repo_id: int | None = None, run_id: int | None = None,
                           first_id: int | None = None,
                           batch: int = 100_000) -> Iterator[list[str]]:
    """The tidy table ``name`` (one of :data:`SQL_LINE_TABLES`) as canonical
    tab-separated lines, in batches.

    The text is built by the database, so the report can fingerprint millions
    of rows without holding them as a DataFrame; the order of the batches is
    not part of the contract (the checksum sums a hash per line). Without
    ``run_id``: the rows readers see (commits of completed runs) of ``repo`` (a
    name) or ``repo_id``; with it: the rows of that run's commits, whatever its
    status (the writer adds them to the stored digest as the run completes).
    ``first_id`` (with ``run_id``): no commit of the run has a lower id, so the read
    starts there on the primary key instead of scanning every commit.
    """
    from sqlalchemy import literal

    cols, frm = _line_source(name)
    parts = [_canon_sql(*cols[c]) for c in COLUMNS[name]]
    line = parts[0]
    for p in parts[1:]:
        line = line.op("||")(literal("\t")).op("||")(p)
    g = s.commit
    stmt = select(line.label("line")).select_from(frm)
    if run_id is not None:
        stmt = stmt.where(g.c.run_id == run_id)
        if first_id is not None:
            stmt = stmt.where(g.c.commit_id >= first_id)
    else:
        stmt = stmt.where(g.c.run_id.in_(_complete_runs()))
    if repo_id is not None:
        stmt = stmt.where(g.c.repo_id == repo_id)
    # per statement: Connection.execution_options would leave the connection streaming
    result = conn.execute(_repo_filter(stmt, repo), execution_options={"stream_results": True})
    try:
        while True:
            rows = result.fetchmany(batch)
            if not rows:
                return
            yield [r[0] for r in rows]
    finally:
        result.close()
