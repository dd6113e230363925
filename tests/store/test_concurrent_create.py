"""Two processes creating the same new SQLite store: the one whose CREATE collides with
the other's waits for the other to finish the schema instead of giving up (seen as
'table file_change already exists', exit 5, in a concurrent-mining test)."""
from __future__ import annotations

import sqlite3
import threading
import time

import pytest

from procmetrics.errors import StoreError
from procmetrics.store import engine as eng
from procmetrics.store import open_store, schema


def test_a_colliding_creator_waits_for_the_other_ones_schema(tmp_path, monkeypatch) -> None:
    store = tmp_path / "s.sqlite"
    done = threading.Event()

    def other_process() -> None:          # finishes the schema 0.5 s later
        time.sleep(0.5)
        other = open_store(store)
        other.dispose()
        done.set()

    calls = []

    def colliding_create_all(conn, *args, **kwargs):
        calls.append(1)
        if not done.is_set():
            raise StoreError("table file_change already exists")
        return original(conn, *args, **kwargs)
    original = schema.metadata.create_all
    t = threading.Thread(target=other_process)
    with monkeypatch.context() as m:
        # this creator collides every time until the other one (the thread, which runs
        # the real create_all) has finished the schema
        m.setattr(schema.metadata, "create_all",
                  lambda conn, *a, **k: (original(conn, *a, **k)
                                         if threading.current_thread() is t
                                         else colliding_create_all(conn, *a, **k)))
        sqlite3.connect(store).close()            # the file exists, the schema does not
        t.start()
        engine = open_store(store)
    t.join()
    try:
        with engine.connect() as conn:
            assert eng._schema_version(conn)[0] == str(schema.SCHEMA_VERSION)
    finally:
        engine.dispose()
    assert calls, "the collision path was not exercised"


def test_a_creator_that_never_sees_a_schema_still_fails(tmp_path, monkeypatch) -> None:
    monkeypatch.setattr(eng, "CREATE_WAIT_S", 0.05)

    def always(conn, *args, **kwargs):
        raise StoreError("table file_change already exists")

    monkeypatch.setattr(schema.metadata, "create_all", always)
    with pytest.raises(StoreError):
        open_store(tmp_path / "s.sqlite")


@pytest.mark.parametrize("message, waits", [
    ("OperationalError: disk I/O error", False),             # --store=/dev/null
    ("attempt to write a readonly database (the store file ...)", False),
    ("the store is full (database or disk is full); ...", False),
    ("DatabaseError: file is not a database", False),
    ("OperationalError: table file_change already exists", True),
    ("OperationalError: index ix_commit_date already exists", True),
    ("IntegrityError: UNIQUE constraint failed: meta.key", True),
    ('IntegrityError: duplicate key value violates unique constraint "pg_type_typname_nsp_index"',
     True),
])
def test_only_a_collision_is_waited_for(tmp_path, monkeypatch, message, waits) -> None:
    """An error no other creator can cause fails at once (it took 25 s of waiting for
    ``mine --store=/dev/null`` to say 'disk I/O error'); a collision is waited for."""
    waited = []
    monkeypatch.setattr(eng, "_wait_for_schema",
                        lambda engine, seconds: waited.append(seconds) or None)

    def failing(conn, *args, **kwargs):
        raise StoreError(message)

    monkeypatch.setattr(schema.metadata, "create_all", failing)
    with pytest.raises(StoreError):
        open_store(tmp_path / "s.sqlite")
    assert len(waited) == (eng.CREATE_ATTEMPTS if waits else 0)
