"""Schema 1 -> 2: the upstream tables are added to an older store opened writable."""
from __future__ import annotations

import sqlite3

import pytest

from procmetrics.errors import SchemaError
from procmetrics.store import SCHEMA_VERSION, open_store
from procmetrics.store.tables import read_table


def test_schema_1_store_gains_the_upstream_tables(tmp_path):
    path = tmp_path / "old.sqlite"
    open_store(str(path)).dispose()
    con = sqlite3.connect(path)             # make it look like a schema-1 store
    for t in ("upstream_reference", "patch_id", "backport_line"):
        con.execute(f"DROP TABLE {t}")
    con.execute("UPDATE pm_meta SET value = '1' WHERE key = 'schema_version'")
    con.commit()
    con.close()
    with pytest.raises(SchemaError, match="older than .* run 'procmetrics mine' on its "):
        open_store(str(path), create=False)
    engine = open_store(str(path))
    try:
        for name in ("upstream_references", "patch_ids", "backport_lines"):
            assert read_table(engine, name).empty
    finally:
        engine.dispose()
    con = sqlite3.connect(path)
    assert con.execute("SELECT value FROM pm_meta WHERE key='schema_version'").fetchone() == \
        (str(SCHEMA_VERSION),)
    names = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='index'")}
    con.close()
    assert {"ix_patch_id_value", "ix_backport_line"} <= names


def test_schema_2_store_gains_the_path_map_column(tmp_path):
    path = tmp_path / "two.sqlite"
    open_store(str(path)).dispose()
    con = sqlite3.connect(path)             # a schema-2 store: no path_map column
    con.execute("DROP TABLE upstream_reference")
    con.execute("CREATE TABLE upstream_reference (repo_id INTEGER NOT NULL, "
                "upstream_repo_id INTEGER NOT NULL)")
    con.execute("UPDATE pm_meta SET value = '2' WHERE key = 'schema_version'")
    con.commit()
    con.close()
    engine = open_store(str(path))
    try:
        assert list(read_table(engine, "upstream_references").columns) == \
            ["repo", "upstream_repo", "path_map"]
    finally:
        engine.dispose()
    con = sqlite3.connect(path)
    cols = [r[1] for r in con.execute("PRAGMA table_info(upstream_reference)")]
    con.close()
    assert "path_map" in cols and SCHEMA_VERSION >= 3


def test_schema_4_store_gains_the_link_check_tips(tmp_path):
    """4 -> 5: the table of tips the link statuses were resolved against, empty (the next
    run then checks every unsettled link, tests/mine/test_incremental.py)."""
    path = tmp_path / "four.sqlite"
    open_store(str(path)).dispose()
    con = sqlite3.connect(path)
    con.execute("DROP TABLE link_check_tip")
    con.execute("UPDATE pm_meta SET value = '4' WHERE key = 'schema_version'")
    con.commit()
    con.close()
    open_store(str(path)).dispose()
    con = sqlite3.connect(path)
    assert con.execute("SELECT COUNT(*) FROM link_check_tip").fetchone() == (0,)
    assert con.execute("SELECT value FROM pm_meta WHERE key='schema_version'").fetchone() == \
        (str(SCHEMA_VERSION),) == ("5",)
    con.close()
