"""Open a store (SQLite file by default, any SQLAlchemy URL otherwise)."""
from __future__ import annotations

import os
from pathlib import Path

from sqlalchemy import create_engine, event, inspect, select
from sqlalchemy.engine import Engine
from sqlalchemy.exc import SQLAlchemyError

from procmetrics.errors import SchemaError, StoreError
from procmetrics.store import schema

DEFAULT_STORE_NAME = "procmetrics.sqlite"


def resolve_url(store: str | os.PathLike[str] | None) -> str:
    """Turn a path or URL into an SQLAlchemy URL. ``None`` -> ``./procmetrics.sqlite``."""
    if store is None:
        store = DEFAULT_STORE_NAME
    text = os.fspath(store)
    if "://" in text:
        return text
    return "sqlite:///" + str(Path(text).expanduser().resolve())


def _sqlite_pragmas(dbapi_conn, _record) -> None:  # pragma: no cover - trivial
    cur = dbapi_conn.cursor()
    cur.execute("PRAGMA foreign_keys=ON")
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute("PRAGMA synchronous=NORMAL")
    cur.execute("PRAGMA busy_timeout=30000")
    cur.close()


def open_store(store: str | os.PathLike[str] | None = None, *, create: bool = True,
               readonly: bool = False) -> Engine:
    """Open (and with ``create`` initialise) a store; check its schema version.

    Raises :class:`StoreError` when it cannot be reached and :class:`SchemaError`
    when it was written by another schema version.
    """
    url = resolve_url(store)
    if url.startswith("sqlite:///"):
        path = Path(url[len("sqlite:///"):])
        if not path.exists():
            if not create or readonly:
                raise StoreError(f"store not found: {path}")
            if not path.parent.exists():
                raise StoreError(f"cannot create store: folder {path.parent} does not exist")
        elif path.is_dir():
            raise StoreError(f"store path is a folder, not a file: {path}")
    try:
        engine = create_engine(url, future=True)
    except (SQLAlchemyError, ImportError, ValueError) as exc:
        raise StoreError(f"cannot open store {url!r}: {exc}") from exc
    if engine.dialect.name == "sqlite":
        event.listen(engine, "connect", _sqlite_pragmas)
    try:
        _ensure_schema(engine, create=create and not readonly)
    except SchemaError:
        engine.dispose()
        raise
    except SQLAlchemyError as exc:
        engine.dispose()
        raise StoreError(f"cannot use store {_safe(url)}: {exc.__class__.__name__}: "
                         f"{str(exc).splitlines()[0]}") from exc
    return engine


def _safe(url: str) -> str:
    """Hide a password in a URL before printing it."""
    if "@" in url and "://" in url:
        head, tail = url.split("://", 1)
        cred, host = tail.rsplit("@", 1)
        user = cred.split(":", 1)[0]
        return f"{head}://{user}:***@{host}"
    return url


def _ensure_schema(engine: Engine, *, create: bool) -> None:
    from procmetrics.store.migrate import migrate  # local: migrate imports schema only

    insp = inspect(engine)
    if not insp.has_table(schema.meta.name):
        if not create:
            raise SchemaError("store has no procmetrics schema")
        with engine.begin() as conn:
            schema.metadata.create_all(conn)
            for ix in schema.INDEXES:
                ix.create(conn, checkfirst=True)
            conn.execute(schema.meta.insert(), [
                {"key": "schema_version", "value": str(schema.SCHEMA_VERSION)},
            ])
        return
    with engine.connect() as conn:
        row = conn.execute(select(schema.meta.c.value)
                           .where(schema.meta.c.key == "schema_version")).first()
    if row is None:
        raise SchemaError("store has no schema version")
    found = int(row[0])
    if found > schema.SCHEMA_VERSION:
        raise SchemaError(
            f"store was written by a newer procmetrics (schema {found}, this one knows "
            f"up to {schema.SCHEMA_VERSION}); upgrade procmetrics")
    if found < schema.SCHEMA_VERSION:
        if not create:
            raise SchemaError(f"store schema {found} is older than {schema.SCHEMA_VERSION}; "
                              "open it writable once to migrate")
        migrate(engine, found)
