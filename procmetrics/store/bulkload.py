"""Bulk-load helpers of the store writer: plain-tuple ``executemany``, chunking, the
store-wide write lock, analysis indexes dropped around a first load, and the
SQLite settings of a bulk-load transaction.

Indexes (``schema.INDEXES``) are dropped before the first bulk load into an
empty store and rebuilt after it (``ensure_indexes`` also runs at the start of
every run, so an interrupted first load gets them back). The unique
(repo_id, hash) index stays: prefix look-ups need it.

During that first load, batches are written with SQLite's ``synchronous=OFF``
(no fsync when the write-ahead log is checkpointed); each batch's connection goes
back to ``synchronous=NORMAL`` when its transaction ends. A killed process loses
nothing that was committed (the operating system still writes it out); only an
operating-system crash or power loss during a first load could damage the new
store, and that store holds no completed run yet.
"""
from __future__ import annotations

from contextlib import contextmanager
from typing import Iterable, Iterator, Sequence

from sqlalchemy import insert, select, update
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.schema import CreateIndex, DropIndex

from procmetrics.store import schema as s

CHUNK = 500


def _bulk_insert(conn: Connection, table, columns: Sequence[str], rows: list[tuple]) -> None:
    """executemany of plain tuples straight to the driver (SQLAlchemy's per-row parameter
    processing costs more than SQLite's insert itself); other paramstyles use Core."""
    if not rows:
        return
    mark = {"qmark": "?", "format": "%s", "pyformat": "%s"}.get(conn.dialect.paramstyle)
    if mark is None:
        conn.execute(insert(table), [dict(zip(columns, r)) for r in rows])
        return
    q = conn.dialect.identifier_preparer.quote
    sql = (f"INSERT INTO {q(table.name)} ({', '.join(q(c) for c in columns)}) "
           f"VALUES ({', '.join([mark] * len(columns))})")
    conn.exec_driver_sql(sql, rows)


def _chunks(items: Sequence, size: int = CHUNK) -> Iterable[Sequence]:
    for i in range(0, len(items), size):
        yield items[i:i + size]


class BulkLoad:
    """Write lock and index handling."""

    engine: Engine

    @staticmethod
    def _write_lock(conn: Connection) -> None:
        """Serialise with other miners writing to the same store (other repositories).

        A no-op update of one row: SQLite takes its write lock (waiting up to the
        busy timeout), PostgreSQL a row lock, both held until the transaction ends.
        """
        conn.execute(update(s.meta).where(s.meta.c.key == "schema_version")
                     .values(value=s.meta.c.value))

    def ensure_indexes(self) -> None:
        with self.engine.begin() as conn:
            self._write_lock(conn)
            for ix in s.INDEXES:
                conn.execute(CreateIndex(ix, if_not_exists=True))

    def drop_indexes_if_empty(self) -> bool:
        """Drop the analysis indexes when the store holds no commit yet (fast first load)."""
        with self.engine.begin() as conn:
            self._write_lock(conn)
            if conn.execute(select(s.commit.c.commit_id).limit(1)).first() is not None:
                return False
            for ix in s.INDEXES:
                conn.execute(DropIndex(ix, if_exists=True))
        return True

    @contextmanager
    def _batch_transaction(self, durable: bool = True) -> Iterator[Connection]:
        """One transaction; ``durable=False`` (a first load): SQLite skips fsyncs in it."""
        if durable or self.engine.dialect.name != "sqlite":
            with self.engine.begin() as conn:
                yield conn
            return
        with self.engine.connect() as conn:
            conn.exec_driver_sql("PRAGMA synchronous=OFF")   # outside any transaction
            conn.commit()
            try:
                with conn.begin():
                    yield conn
            finally:
                try:
                    conn.exec_driver_sql("PRAGMA synchronous=NORMAL")
                    conn.commit()
                except Exception:  # noqa: BLE001 - keep the first error; never reuse it
                    conn.invalidate()
