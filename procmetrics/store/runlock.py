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
* PostgreSQL: a session advisory lock ``(PG_LOCK_CLASS, repo_id)`` held on a
  connection of its own for the whole run.
* Other databases and in-memory SQLite: no lock.
"""
from __future__ import annotations

import contextlib
import os
from typing import Iterator

from sqlalchemy import text
from sqlalchemy.engine import Engine

from procmetrics.errors import StoreBusy, StoreError

PG_LOCK_CLASS = 0x706D696E      # "pmin"
LOCK_SUFFIX = "-mining.lock"


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
            got = conn.execute(text("SELECT pg_try_advisory_lock(:c, :r)"),
                               {"c": PG_LOCK_CLASS, "r": repo_id}).scalar()
            conn.commit()
            if not got:
                raise _busy(name)
            try:
                yield
            finally:
                with contextlib.suppress(Exception):    # a lost session dropped it already
                    conn.execute(text("SELECT pg_advisory_unlock(:c, :r)"),
                                 {"c": PG_LOCK_CLASS, "r": repo_id})
                    conn.commit()
        return
    yield
