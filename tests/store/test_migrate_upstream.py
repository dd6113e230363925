"""Schema 1 -> 2: the upstream tables are added to an older store opened writable."""
from __future__ import annotations

import sqlite3

import pytest

from procmetrics.errors import SchemaError
from procmetrics.store import SCHEMA_VERSION, open_store
from procmetrics.store.tables import read_table


def _make_older(path, version: int, *statements: str) -> None:
    """Turn the store at ``path`` into one of schema ``version`` (the ``statements``
    undo what came after it), and check that a read-only open refuses it."""
    con = sqlite3.connect(path)
    for statement in statements:
        con.execute(statement)
    con.execute(f"UPDATE pm_meta SET value = '{version}' WHERE key = 'schema_version'")
    con.commit()
    con.close()
    with pytest.raises(SchemaError, match="older than .* run 'procmetrics mine' on its "):
        open_store(str(path), create=False)


def test_schema_1_store_gains_the_upstream_tables(tmp_path):
    path = tmp_path / "old.sqlite"
    open_store(str(path)).dispose()
    _make_older(path, 1, *(f"DROP TABLE {t}"
                           for t in ("upstream_reference", "patch_id", "backport_line")))
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
        (str(SCHEMA_VERSION),) == ("6",)
    con.close()


SUMS_BY_GROUP = """
SELECT c.hash, COUNT(f.commit_id), SUM(f.lines_added), SUM(f.lines_deleted)
FROM git_commit c LEFT JOIN file_change f ON f.commit_id = c.commit_id
GROUP BY c.commit_id ORDER BY c.hash
"""


@pytest.mark.parametrize("line_counts", [True, False])
def test_schema_5_store_gains_each_commits_sums(tmp_path, git_history, line_counts):
    """5 -> 6: each commit's file count and line sums. Oracle: SQL's own COUNT and SUM
    over the stored file rows (a text file, a binary file without counts, an empty
    commit, a merge; a paths-only store has no counts at all). The writer stores the
    same sums (checked before the columns are dropped)."""
    from procmetrics.mine import MineOptions, mine_repository

    h = git_history()
    h.write({"a.c": "one\ntwo\n", "b.bin": b"\x00\x01\x02"})
    h.commit("first")
    h.write({"a.c": "one\n", "c.c": "x\n"})
    h.commit("second")
    h.commit("nothing changed")
    h.branch("side", "HEAD~1")
    h.checkout("side")
    h.write({"d.c": "d\n"})
    h.commit("side")
    h.checkout("main")
    h.merge("side")
    path = tmp_path / "five.sqlite"
    mine_repository(h.path, store=str(path), options=MineOptions(
        ref="HEAD", progress=False, line_counts=line_counts))
    con = sqlite3.connect(path)
    want = con.execute(SUMS_BY_GROUP).fetchall()
    stored = con.execute("SELECT hash, n_files, lines_added, lines_deleted FROM git_commit "
                         "ORDER BY hash").fetchall()
    assert stored == want and len(want) == 5
    assert (0, None, None) in {r[1:] for r in want}          # the empty commit
    assert any(r[2] is not None for r in want) == line_counts
    con.close()
    _make_older(path, 5, *(f"ALTER TABLE git_commit DROP COLUMN {column}"
                           for column in ("n_files", "lines_added", "lines_deleted")))
    open_store(str(path)).dispose()
    con = sqlite3.connect(path)
    assert con.execute("SELECT hash, n_files, lines_added, lines_deleted FROM git_commit "
                       "ORDER BY hash").fetchall() == want
    assert con.execute("SELECT value FROM pm_meta WHERE key='schema_version'").fetchone() == \
        ("6",)
    con.close()
