"""PostgreSQL helpers for the tests (a plain module: ``from tests.pg_support import ...``).

``make test`` starts a throw-away server with ``.ci/pg`` and exports its URL as
``PROCMETRICS_TEST_PG_URL``. Tests that need it are marked
``@pytest.mark.postgres`` and skip only when the variable is unset (CI always
sets it). Every test gets its own PostgreSQL schema (selected through
``search_path`` in the URL), dropped afterwards, so tests never see each other's
rows and the URL can be handed to other processes (pool or Dask workers).
"""
from __future__ import annotations

import contextlib
import os
import uuid
from pathlib import Path
from typing import Iterator
from urllib.parse import quote

import pytest
from sqlalchemy import create_engine, text

PG_ENV = "PROCMETRICS_TEST_PG_URL"


def base_pg_url() -> str | None:
    """The server URL from the environment, or ``None``."""
    return os.environ.get(PG_ENV) or None


def require_pg() -> str:
    """The server URL, or skip the calling test when none is configured."""
    url = base_pg_url()
    if url is None:
        pytest.skip(f"{PG_ENV} is not set (make test starts a server with .ci/pg)")
    return url


@contextlib.contextmanager
def scratch_pg_url(label: str = "t") -> Iterator[str]:
    """A URL to a fresh, empty PostgreSQL schema; the schema is dropped on exit."""
    base = require_pg()
    # lower case: the search_path option folds an unquoted name to lower case
    name = f"pm_{label}_{uuid.uuid4().hex[:12]}".lower()
    admin = create_engine(base, isolation_level="AUTOCOMMIT")
    try:
        with admin.connect() as conn:
            conn.execute(text(f'CREATE SCHEMA "{name}"'))
        sep = "&" if "?" in base else "?"
        yield f"{base}{sep}options={quote(f'-csearch_path={name}')}"
    finally:
        with admin.connect() as conn:
            # tests dispose their engines; an idle connection holds no lock
            conn.execute(text(f'DROP SCHEMA IF EXISTS "{name}" CASCADE'))
        admin.dispose()


def sqlite_url(folder: Path, name: str = "store.sqlite") -> str:
    return "sqlite:///" + str(folder / name)


@pytest.fixture
def pg_url() -> Iterator[str]:
    """A fresh PostgreSQL store URL (skips without a server)."""
    with scratch_pg_url() as url:
        yield url


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def any_store_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """Each test that uses this runs once on SQLite and once on PostgreSQL."""
    if request.param == "sqlite":
        yield sqlite_url(tmp_path)
    else:
        with scratch_pg_url() as url:
            yield url
