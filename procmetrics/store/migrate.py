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


MIGRATIONS: dict[int, Callable[[Connection], None]] = {1: _add_upstream_tables,
                                                       2: _add_path_map,
                                                       3: _add_table_digests,
                                                       4: _add_link_check_tips}


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
