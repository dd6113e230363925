"""One mining run per repository per store at a time.

Two runs mining the same repository into the same store would both clean up
the other's "incomplete" rows and write the same commits, so the loser fails
half-way and the winner can complete with rows missing. :func:`repository_lock`
makes the second run fail at once with :class:`~procmetrics.errors.StoreBusy`
instead. The lock is one the operating system or the database server drops
by itself when the holder dies (a killed run never blocks the next one):

* SQLite file: a POSIX record lock on byte ``repo_id`` of a small file beside
  the store (``<store>-mining.lock``, created once, never removed). POSIX
  record locks belong to a process, so two threads of one process are not kept
  apart; runs of different repositories lock different bytes and go on in
  parallel.
* PostgreSQL: a session advisory lock ``(class, repo_id)`` held on a connection
  of its own for the whole run. Advisory locks belong to the database, not to a
  schema, and every store numbers its repositories from 1: the class is
  :func:`lock_class` of the store's schema, so two stores in different schemas
  of one database never block each other (they did when the class was fixed).
* Other databases and in-memory SQLite: no lock.
"""
from __future__ import annotations

import contextlib
import os
import zlib
from typing import Iterator

from sqlalchemy import text
from sqlalchemy.engine import Engine

from procmetrics.errors import StoreBusy, StoreError

LOCK_SUFFIX = "-mining.lock"


def lock_class(schema: str) -> int:
    """The advisory lock class of the store in ``schema``: a signed 32-bit number from
    ``"pmin:" + schema`` (CRC-32; two schemas sharing one would only make their runs of
    one repository id wait for each other, never mix their rows)."""
    value = zlib.crc32(("pmin:" + schema).encode("utf-8"))
    return value - (1 << 32) if value >= 1 << 31 else value


def _busy(name: str) -> StoreBusy:
    return StoreBusy(f"another mining run of repository {name!r} is writing to this store; "
                     "run again when it has finished")


@contextlib.contextmanager
def repository_lock(engine: Engine, repo_id: int, name: str) -> Iterator[None]:
    """Hold the mining lock of repository ``repo_id`` (``name`` for the message)."""
    dialect = engine.dialect.name
    if dialect == "sqlite":
        db = engine.url.database
        if not db or db == ":memory:" or db.startswith("file:"):
            yield
            return
        import fcntl

        try:
            fd = os.open(db + LOCK_SUFFIX, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:
            raise StoreError(f"cannot open the lock file {db + LOCK_SUFFIX}: "
                             f"{exc.strerror}") from exc
        try:
            try:
                fcntl.lockf(fd, fcntl.LOCK_EX | fcntl.LOCK_NB, 1, repo_id)
            except OSError:
                raise _busy(name) from None
            yield
        finally:
            os.close(fd)            # drops the lock
        return
    if dialect == "postgresql":
        with engine.connect() as conn:
            cls = lock_class(str(conn.execute(text("SELECT current_schema()")).scalar()))
            got = conn.execute(text("SELECT pg_try_advisory_lock(:c, :r)"),
                               {"c": cls, "r": repo_id}).scalar()
            conn.commit()
            if not got:
                raise _busy(name)
            try:
                yield
            finally:
                with contextlib.suppress(Exception):    # a lost session dropped it already
                    conn.execute(text("SELECT pg_advisory_unlock(:c, :r)"),
                                 {"c": cls, "r": repo_id})
                    conn.commit()
        return
    yield
