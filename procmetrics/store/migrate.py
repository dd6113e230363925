"""Schema migrations: one function per version step, applied in order."""
from __future__ import annotations

from typing import Callable

from sqlalchemy import inspect, text, update
from sqlalchemy.engine import Connection, Engine

from procmetrics.errors import SchemaError
from procmetrics.store import schema

# MIGRATIONS[n] upgrades a store from schema n to n + 1.
def _add_upstream_tables(conn: Connection) -> None:
    """1 -> 2: the upstream-reference, patch-id and backport-line tables."""
    schema.metadata.create_all(conn, tables=list(schema.UPSTREAM_TABLES))
    for ix in schema.INDEXES:
        if ix.table in schema.UPSTREAM_TABLES:
            ix.create(conn, checkfirst=True)


def _add_path_map(conn: Connection) -> None:
    """2 -> 3: the path map of an upstream reference (a mirrored subtree). A store that
    came from schema 1 got the table with the column already (step 1 creates the
    current table)."""
    have = {c["name"] for c in inspect(conn).get_columns("upstream_reference")}
    if "path_map" not in have:
        conn.execute(text("ALTER TABLE upstream_reference ADD COLUMN path_map TEXT"))


def _add_table_digests(conn: Connection) -> None:
    """3 -> 4: the table digests. Left empty: an older store's checksum is computed in
    full until a mining run of the repository completes and stores its digests (see
    :mod:`procmetrics.store.digests`)."""
    schema.metadata.create_all(conn, tables=[schema.table_digest])


def _add_link_check_tips(conn: Connection) -> None:
    """4 -> 5: the tips the link statuses were resolved against. Left empty: the next
    mining run of each repository checks every unsettled link, as before, and records
    them (see :func:`procmetrics.mine.relink.resolve_links`)."""
    schema.metadata.create_all(conn, tables=[schema.link_check_tip])


def _add_commit_sums(conn: Connection) -> None:
    """5 -> 6: each commit's file count and line sums, computed from its stored
    ``file_change`` rows with the aggregates the commits reader used before (a commit
    without rows keeps 0 and NULL). Correlated subqueries rather than ``UPDATE ...
    FROM``, which SQLite only has since 3.33; about 10 s at a million commits. A store
    that came from an older schema may have the columns already (step 1 creates the
    current tables): they are then filled all the same."""
    have = {c["name"] for c in inspect(conn).get_columns("git_commit")}
    for column, kind in (("n_files", "INTEGER NOT NULL DEFAULT 0"),
                         ("lines_added", "BIGINT"), ("lines_deleted", "BIGINT")):
        if column not in have:
            conn.execute(text(f"ALTER TABLE git_commit ADD COLUMN {column} {kind}"))
    rows = "FROM file_change f WHERE f.commit_id = git_commit.commit_id"
    conn.execute(text(
        f"UPDATE git_commit SET n_files = (SELECT COUNT(*) {rows}), "
        f"lines_added = (SELECT SUM(f.lines_added) {rows}), "
        f"lines_deleted = (SELECT SUM(f.lines_deleted) {rows}) "
        f"WHERE EXISTS (SELECT 1 {rows})"))


MIGRATIONS: dict[int, Callable[[Connection], None]] = {1: _add_upstream_tables,
                                                       2: _add_path_map,
                                                       3: _add_table_digests,
                                                       4: _add_link_check_tips,
                                                       5: _add_commit_sums}


def migrate(engine: Engine, found: int) -> None:
    """Upgrade a store from schema ``found`` to :data:`schema.SCHEMA_VERSION`."""
    with engine.begin() as conn:
        for version in range(found, schema.SCHEMA_VERSION):
            step = MIGRATIONS.get(version)
            if step is None:
                raise SchemaError(f"no migration from schema {version} to {version + 1}")
            step(conn)
        conn.execute(update(schema.meta).where(schema.meta.c.key == "schema_version")
                     .values(value=str(schema.SCHEMA_VERSION)))
