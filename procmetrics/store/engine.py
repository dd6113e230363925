"""Open a store (SQLite file by default, any SQLAlchemy URL otherwise)."""
from __future__ import annotations

import os
import re
from pathlib import Path
from typing import Any

from sqlalchemy import create_engine, event, inspect, select
from sqlalchemy.engine import Engine
from sqlalchemy.exc import SQLAlchemyError

from procmetrics.errors import SchemaError, StoreBusy, StoreError
from procmetrics.store import schema
from procmetrics.textsafe import mask_url, scrub_secrets

DEFAULT_STORE_NAME = "procmetrics.sqlite"
#: seconds a PostgreSQL connection attempt may take (unless the URL sets connect_timeout)
CONNECT_TIMEOUT = 10
_LIBPQ_SCHEMES = ("postgresql", "postgresql+psycopg", "postgresql+psycopg2")


def resolve_url(store: str | os.PathLike[str] | None) -> str:
    """Turn a path or URL into an SQLAlchemy URL. ``None`` -> ``./procmetrics.sqlite``."""
    if store is None:
        store = DEFAULT_STORE_NAME
    text = os.fspath(store)
    if "://" in text:
        return text
    return "sqlite:///" + str(Path(text).expanduser().resolve())


BUSY_TIMEOUT_MS = 30000    # how long a SQLite write waits for another writer's lock


def _sqlite_pragmas(dbapi_conn, _record) -> None:  # pragma: no cover - trivial
    cur = dbapi_conn.cursor()
    cur.execute("PRAGMA foreign_keys=ON")
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute("PRAGMA synchronous=NORMAL")
    cur.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
    cur.close()


def _sqlite_read_pragmas(dbapi_conn, _record) -> None:  # pragma: no cover - trivial
    cur = dbapi_conn.cursor()
    cur.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")
    cur.close()


def _readonly_sqlite(path: Path):
    """A connection factory for a SQLite file opened read-only (URI ``mode=ro``).

    A WAL store whose folder is write-protected and which has no ``-shm`` file
    cannot be opened with ``mode=ro`` alone (SQLite must create the shared-memory
    file); then it is opened ``immutable=1``: nobody can be writing it, since a
    writer would have to create the ``-wal`` file in that same folder.
    """
    import sqlite3
    from urllib.parse import quote

    uri = "file:" + quote(str(path), safe="/")

    def connect():
        try:
            conn = sqlite3.connect(f"{uri}?mode=ro", uri=True, check_same_thread=False)
            conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
            return conn
        except sqlite3.OperationalError as exc:
            if "unable to open" not in str(exc) and "readonly" not in str(exc):
                raise
            if os.access(path.parent, os.W_OK):
                raise
        return sqlite3.connect(f"{uri}?mode=ro&immutable=1", uri=True,
                               check_same_thread=False)
    return connect


def open_store(store: str | os.PathLike[str] | None = None, *, create: bool = True,
               readonly: bool = False) -> Engine:
    """Open (and with ``create`` initialise) a store; check its schema version.

    Raises :class:`StoreError` when it cannot be reached and :class:`SchemaError`
    when it was written by another schema version.
    """
    url = resolve_url(store)
    if url.startswith("sqlite:///"):
        path = Path(url[len("sqlite:///"):].split("?", 1)[0])
        if not path.exists():
            if not create or readonly:
                raise StoreError(f"store not found: {path}")
            if not path.parent.exists():
                raise StoreError(f"cannot create store: folder {path.parent} does not exist")
        elif path.is_dir():
            raise StoreError(f"store path is a folder, not a file: {path}")
    extra: dict = {}
    if readonly and url.startswith("sqlite:///"):
        # reading commands never write: SQLite opened read-only, so an archived,
        # write-protected store (file and folder) can be read
        extra["creator"] = _readonly_sqlite(Path(url[len("sqlite:///"):].split("?", 1)[0]))
    if url.split("://", 1)[0] in _LIBPQ_SCHEMES and "connect_timeout" not in url:
        extra["connect_args"] = {"connect_timeout": CONNECT_TIMEOUT}
    try:
        engine = create_engine(url, future=True, **extra)
    except (SQLAlchemyError, ImportError, ValueError) as exc:
        raise StoreError(f"cannot open store {_safe(url)}: {_scrub(str(exc), url)}") from exc
    if engine.dialect.name == "sqlite":
        event.listen(engine, "connect", _sqlite_read_pragmas if "creator" in extra
                     else _sqlite_pragmas)
    event.listen(engine, "handle_error", _as_store_error)
    try:
        _ensure_schema(engine, create=create and not readonly)
    except SchemaError:
        engine.dispose()
        raise
    except StoreError as exc:       # from _as_store_error
        engine.dispose()
        raise exc.__class__(f"cannot use store {_safe(url)}: {_scrub(str(exc), url)}") from exc
    except SQLAlchemyError as exc:
        engine.dispose()
        raise StoreError(f"cannot use store {_safe(url)}: {exc.__class__.__name__}: "
                         f"{_scrub(str(exc).splitlines()[0], url)}") from exc
    return engine


def _release_sqlite_lock(ctx) -> None:
    """Roll back a SQLite connection that Ctrl-C (or another exit exception)
    interrupted inside a statement.

    SQLAlchemy then only invalidates the connection, without rolling back
    (it cannot know the driver's state), so the interrupted write transaction
    kept the database's write lock until the object was garbage-collected: the
    next write of the same process (marking the run failed) waited the whole
    busy timeout. SQLite's own rollback is local and safe here; nothing is
    done for servers, whose drivers cancel the statement themselves.
    """
    if ctx.engine is None or ctx.engine.dialect.name != "sqlite":
        return
    cursor = getattr(ctx.execution_context, "cursor", None)   # ctx.cursor is never set
    dbapi = getattr(cursor, "connection", None)
    if dbapi is None:
        return
    try:
        dbapi.rollback()
    except Exception:  # noqa: BLE001 - best effort on the way out; the run is re-done
        pass


def _as_store_error(ctx) -> None:
    """``handle_error`` hook: a database failure becomes one line of our own.

    A lock held too long becomes :class:`StoreBusy`; everything else (full
    disk, read-only file, lost server, constraint broken by a concurrent
    writer) :class:`StoreError`. The transaction has been rolled back.
    """
    orig = ctx.original_exception
    if not isinstance(orig, Exception):
        _release_sqlite_lock(ctx)
        return None             # KeyboardInterrupt and the like pass through
    if ctx.sqlalchemy_exception is None:
        return None             # non-database errors pass through
    lines = str(orig).strip().splitlines()
    text = lines[0] if lines else orig.__class__.__name__
    low = text.lower()
    state = getattr(orig, "sqlstate", None) or getattr(getattr(orig, "diag", None),
                                                        "sqlstate", None)
    if "database is locked" in low or "database table is locked" in low \
            or state in ("55P03", "40P01"):
        raise StoreBusy(f"the store is busy: another process holds its lock ({text}); "
                        "run again when it has finished")
    if "database or disk is full" in low or "no space left" in low or state == "53100":
        raise StoreError(f"the store is full ({text}); the unfinished transaction was "
                         "rolled back: free space and run again")
    if "readonly database" in low or "unable to open database file" in low:
        raise StoreError(f"{text} (the store file and its folder must be readable and "
                         "writable: SQLite keeps -wal and -shm files beside the store)")
    raise StoreError(f"{orig.__class__.__name__}: {text}")


def _scrub(text: str, url: str) -> str:
    """``text`` without any credential of ``url`` (see :func:`procmetrics.textsafe.scrub_secrets`)."""
    return scrub_secrets(text, url)


def _safe(url: str) -> str:
    """``url`` with its credentials masked (user-info password, secret query parameters)."""
    return mask_url(url)


def _schema_version(bind) -> tuple | None:
    """The ``schema_version`` row, or None when the store has no (complete) schema."""
    if not inspect(bind).has_table(schema.meta.name):
        return None
    if isinstance(bind, Engine):
        with bind.connect() as conn:
            return _schema_version(conn)
    return bind.execute(select(schema.meta.c.value)
                        .where(schema.meta.c.key == "schema_version")).first()


#: tries at creating a store's schema while another process may be creating it, and the
#: seconds to wait for the other one's version row after a collision
CREATE_ATTEMPTS = 5
CREATE_WAIT_S = 5.0


def _wait_for_schema(engine: Engine, seconds: float) -> Any:
    import time

    end = time.monotonic() + seconds
    while True:
        try:
            row = _schema_version(engine)
        except (StoreError, SQLAlchemyError):
            row = None
        if row is not None or time.monotonic() >= end:
            return row
        time.sleep(0.05)


#: what a failed CREATE says when another process is creating the same schema (SQLite:
#: a lock, a table or index that now exists, the version row's key; PostgreSQL: the
#: catalogue's unique keys, a lock or deadlock)
_COLLISION_WORDS = ("already exists", "duplicate", "unique", "locked", "deadlock")


def _collision(exc: StoreError) -> bool:
    """True when ``exc`` may come from another process creating the schema at the same
    time (worth waiting for), False for errors that retrying cannot mend (an I/O error,
    a read-only or full device, a file that is not a database)."""
    return isinstance(exc, StoreBusy) or any(w in str(exc).lower() for w in _COLLISION_WORDS)


def _ensure_schema(engine: Engine, *, create: bool) -> None:
    from procmetrics.store.migrate import migrate  # local: migrate imports schema only

    row = _schema_version(engine)
    if row is None:
        if not create:
            raise SchemaError("store has no procmetrics schema")
        for _attempt in range(CREATE_ATTEMPTS):
            # Creating is idempotent (every step checks first) because it is not atomic
            # on SQLite (its driver commits DDL at once): another process may be creating
            # the same store right now, or a first run died half-way through creating it.
            try:
                with engine.begin() as conn:
                    schema.metadata.create_all(conn)
                    for ix in schema.INDEXES:
                        ix.create(conn, checkfirst=True)
                    if _schema_version(conn) is None:
                        conn.execute(schema.meta.insert(), [
                            {"key": "schema_version", "value": str(schema.SCHEMA_VERSION)},
                        ])
            except StoreError as exc:
                if not _collision(exc):
                    raise           # a broken device or file: waiting would not mend it
                # another process created a table between our check and our CREATE: give
                # it time to finish (its version row comes last) before trying again
                row = _wait_for_schema(engine, CREATE_WAIT_S)
                if row is None and _attempt == CREATE_ATTEMPTS - 1:
                    raise
            row = _schema_version(engine)
            if row is not None:
                break
    if row is None:
        raise SchemaError("store has no schema version")
    try:
        found = int(str(row[0]).strip())
    except ValueError:
        raise SchemaError(f"the store's schema version {str(row[0])[:40]!r} is not a number: "
                          "not a procmetrics store, or a damaged one") from None
    if found > schema.SCHEMA_VERSION:
        raise SchemaError(
            f"store was written by a newer procmetrics (schema {found}, this one knows "
            f"up to {schema.SCHEMA_VERSION}); upgrade procmetrics")
    if found < schema.SCHEMA_VERSION:
        if not create:
            raise SchemaError(f"store schema {found} is older than {schema.SCHEMA_VERSION} "
                              "(written by an earlier procmetrics): run 'procmetrics mine' "
                              "on its repository with this store once; that migrates it "
                              "and mines only what is new")
        migrate(engine, found)
