"""Ctrl-C inside a SQLite statement must not leave the store's write lock held.

SQLAlchemy only invalidates a connection that an exit exception (KeyboardInterrupt)
interrupted inside the driver, without rolling back; the lock then stayed until
garbage collection, and marking the run failed waited the whole busy timeout (a
CI run hung past 120 s). Oracle: a plain ``sqlite3`` connection of the standard
library that must get the write lock at once (``BEGIN IMMEDIATE``, 0.5 s timeout).
The interruption is made deterministic with a parameter adapter that raises
KeyboardInterrupt while the driver binds the second row of an ``executemany``.
"""
from __future__ import annotations

import sqlite3
import time

import pytest

from procmetrics.store import open_store
from procmetrics.store.writer import StoreWriter


class _Interrupting:
    """A parameter whose adaptation raises KeyboardInterrupt (as Ctrl-C would)."""


def _raise_interrupt(_value):
    raise KeyboardInterrupt


@pytest.fixture
def interrupting_adapter():
    sqlite3.register_adapter(_Interrupting, _raise_interrupt)
    yield
    sqlite3.adapters.pop((_Interrupting, sqlite3.PrepareProtocol), None)


def _lock_is_free(path) -> bool:
    con = sqlite3.connect(path, timeout=0.5)
    try:
        con.execute("BEGIN IMMEDIATE")
        con.rollback()
        return True
    except sqlite3.OperationalError:
        return False
    finally:
        con.close()


def test_ctrl_c_inside_a_statement_releases_the_write_lock(tmp_path, interrupting_adapter):
    path = tmp_path / "s.sqlite"
    engine = open_store(path)
    with pytest.raises(KeyboardInterrupt):
        with engine.begin() as conn:
            conn.exec_driver_sql("INSERT INTO person(name, email) VALUES ('a', 'a@x')")
            conn.exec_driver_sql("INSERT INTO person(name, email) VALUES (?, ?)",
                                 [("b", "b@x"), ("c", _Interrupting())])
    assert _lock_is_free(path)
    con = sqlite3.connect(path)
    assert con.execute("SELECT count(*) FROM person").fetchone()[0] == 0   # rolled back
    con.close()


def test_marking_the_run_failed_does_not_wait_out_the_busy_timeout(tmp_path):
    """Another process holding the lock: fail_run gives up within seconds (the next
    run repairs a run left 'running'), instead of the 30 s busy timeout."""
    path = tmp_path / "s.sqlite"
    engine = open_store(path)
    book = StoreWriter(engine)
    repo_id = book.ensure_repository("r", str(tmp_path))
    run_id = book.start_run(repo_id, ref="HEAD", head_hash="0" * 40, base_hash=None,
                            is_shallow=False, options_json="{}", versions_json="{}")
    holder = sqlite3.connect(path, timeout=0.5)
    holder.execute("BEGIN IMMEDIATE")
    try:
        t0 = time.monotonic()
        with pytest.raises(Exception):
            book.fail_run(run_id, "KeyboardInterrupt: ")
        waited = time.monotonic() - t0
    finally:
        holder.rollback()
        holder.close()
    assert waited < 15, waited          # the busy timeout is 30 s
    book.fail_run(run_id, "KeyboardInterrupt: ")   # and the pool's connection still works
    con = sqlite3.connect(path)
    assert con.execute("SELECT status FROM mining_run WHERE run_id=?",
                       (run_id,)).fetchone()[0] == "failed"
    con.close()
