"""The bulk loader: invariance to batching, indexes, cleanup, and both databases."""
from __future__ import annotations

import pandas as pd
from sqlalchemy import inspect, select

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store import schema as s
from procmetrics.store.tables import READERS, read_table
from procmetrics.store.writer import StoreWriter
from tests.pg_support import any_store_url  # noqa: F401 - fixture

TABLES = [n for n in READERS if n not in ("mining_runs", "repositories")]


def _tables(engine, repo=None):
    return {n: read_table(engine, n, repo) for n in TABLES}


def test_batch_size_does_not_change_the_store(sample_history, tmp_path):
    """Invariance: one commit per transaction or all in one give the same tables."""
    a = open_store(tmp_path / "a.sqlite")
    b = open_store(tmp_path / "b.sqlite")
    mine_repository(sample_history.path, store=a, options=MineOptions(batch_size=1,
                                                                      progress=False))
    mine_repository(sample_history.path, store=b, options=MineOptions(progress=False))
    ta, tb = _tables(a), _tables(b)
    for name in TABLES:
        pd.testing.assert_frame_equal(ta[name], tb[name], obj=name)
    with a.connect() as conn:       # the person cache never inserted a duplicate
        people = conn.execute(select(s.person.c.name, s.person.c.email)).all()
    assert len(people) == len(set(people))


def test_indexes_exist_after_the_first_bulk_load(sample_history, tmp_path):
    engine = open_store(tmp_path / "s.sqlite")
    w = StoreWriter(engine)
    assert w.drop_indexes_if_empty() is True          # empty store: dropped
    mine_repository(sample_history.path, store=engine, options=MineOptions(progress=False))
    insp = inspect(engine)
    have = {ix["name"] for t in insp.get_table_names() for ix in insp.get_indexes(t)}
    assert {ix.name for ix in s.INDEXES} <= have
    assert w.drop_indexes_if_empty() is False         # never drops on a filled store


def test_cleanup_touches_only_the_unfinished_run_of_that_repository(sample_history, tmp_path,
                                                                    git_history):
    from tests.git_support import when
    engine = open_store(tmp_path / "s.sqlite")
    mine_repository(sample_history.path, store=engine, options=MineOptions(progress=False))
    other = git_history("other")
    other.commit("x\n", files={"x": "1\n"}, date=when(0))
    before = _tables(engine, "sample")
    w = StoreWriter(engine)
    rid = w.ensure_repository("other", str(other.path))
    run = w.start_run(rid, ref="HEAD", head_hash="0" * 40, base_hash=None, is_shallow=False,
                      options_json="{}", versions_json="{}")
    from procmetrics.store.writer import CommitRow
    w.write_batch(rid, run, [CommitRow("a" * 40, (), ("N", "n@x"), ("N", "n@x"), 0, 0, 0, 0,
                                       "s", "s", False, True, [], [], [], [], [])])
    def stored() -> int:    # raw rows: the tidy tables hide unfinished runs anyway
        with engine.connect() as conn:
            return conn.exec_driver_sql("SELECT count(*) FROM git_commit WHERE repo_id = ?",
                                        (rid,)).scalar()
    assert stored() == 1 and len(read_table(engine, "commits", "other")) == 0
    assert w.cleanup_incomplete(rid) == [run]
    assert stored() == 0
    after = _tables(engine, "sample")
    for name in TABLES:
        pd.testing.assert_frame_equal(before[name], after[name], obj=name)


def test_same_tables_on_every_database(sample_history, any_store_url, tmp_path):  # noqa: F811
    """PostgreSQL (when configured) must hold what SQLite holds."""
    ref = open_store(tmp_path / "ref.sqlite")
    mine_repository(sample_history.path, store=ref, options=MineOptions(progress=False))
    engine = open_store(any_store_url)
    try:
        mine_repository(sample_history.path, store=engine, options=MineOptions(progress=False))
        mine_repository(sample_history.path, store=engine, options=MineOptions(progress=False))
        a, b = _tables(ref), _tables(engine)
        for name in TABLES:
            pd.testing.assert_frame_equal(a[name], b[name], obj=name)
    finally:
        engine.dispose()


def test_prefix_lookup_by_scan_equals_lookup_by_query(sample_history, tmp_path, monkeypatch):
    """The two look-up strategies (a range query per reference, or one scan of all stored
    hashes) give the same answer; the oracle for 'which commits share a prefix' is git."""
    import procmetrics.store.linkstore as w
    engine = open_store(tmp_path / "s.sqlite")
    mine_repository(sample_history.path, store=engine, options=MineOptions(progress=False))
    hashes = sample_history.git("rev-list", "HEAD").split()
    refs = sorted({h[:n] for h in hashes for n in (1, 2, 7, 12)} | {"deadbeef", hashes[0]})
    writer = StoreWriter(engine)
    rid = writer.ensure_repository("sample", str(sample_history.path))    # existing row
    by_query = writer.stored_matches(rid, refs, 40)
    monkeypatch.setattr(w, "MANY_REFS", 0)
    by_scan = writer.stored_matches(rid, refs, 40)
    assert by_query == by_scan
    for r in refs:
        assert by_query[r] == sorted(h for h in hashes if h.startswith(r))[:2]


def test_links_to_recheck_include_prefixes_a_new_commit_shares(tmp_path):
    """A short reference resolved earlier is looked at again only when a commit of the
    new run shares its prefix (7 hex digits would need ~16,000 real commits to collide,
    so the rows are written directly)."""
    from procmetrics.store.writer import CommitRow, FixRow
    engine = open_store(tmp_path / "s.sqlite")
    w = StoreWriter(engine)
    rid = w.ensure_repository("r", "/nowhere")

    def commit(h, fixes=()):
        return CommitRow(h, (), ("N", "n@x"), ("N", "n@x"), 0, 0, 0, 0, "s", "s", False, True,
                         [], [], [FixRow(f, None, True, "Fixes: " + f) for f in fixes], [], [])
    a, c = "abcdef1" + "0" * 33, "1" * 40
    run1 = w.start_run(rid, ref="HEAD", head_hash=c, base_hash=None, is_shallow=False,
                       options_json="{}", versions_json="{}")
    w.write_batch(rid, run1, [commit(a), commit("2" * 40), commit(c, ["abcdef1", "2222222"])])
    links = w.links_to_check(rid, run1, 40)
    assert {ln.ref_hash for ln in links} == {"abcdef1", "2222222"} and all(ln.is_new for ln in links)
    w.update_links([(ln, "resolved", a if ln.ref_hash == "abcdef1" else "2" * 40, None)
                    for ln in links])
    run2 = w.start_run(rid, ref="HEAD", head_hash=c, base_hash=c, is_shallow=False,
                       options_json="{}", versions_json="{}")
    assert w.links_to_check(rid, run2, 40) == []            # nothing new: nothing to do
    w.write_batch(rid, run2, [commit("abcdef1" + "f" * 33)])
    again = w.links_to_check(rid, run2, 40)
    assert [(ln.ref_hash, ln.is_new) for ln in again] == [("abcdef1", False)]
    assert w.stored_matches(rid, ["abcdef1"], 40)["abcdef1"] == [a, "abcdef1" + "f" * 33]


def test_a_completed_run_is_never_failed_afterwards(sample_history, tmp_path):
    """``fail_run`` after the final transaction (an interrupt, a late store error)
    leaves the run complete and its rows visible; on a run still running it marks it
    failed. Oracle for the visible rows: ``git rev-list --count``."""
    engine = open_store(tmp_path / "s.sqlite")
    summary = mine_repository(sample_history.path, store=engine,
                              options=MineOptions(progress=False))
    w = StoreWriter(engine)
    w.fail_run(summary.run_id, "KeyboardInterrupt: ")
    runs = read_table(engine, "mining_runs")
    assert list(runs["status"]) == ["complete"] and runs["message"].isna().all()
    n = int(sample_history.git("rev-list", "--count", "HEAD").strip())
    assert len(read_table(engine, "commits")) == n
    repo_id = w.ensure_repository(summary.repo, str(sample_history.path))
    run = w.start_run(repo_id, ref="HEAD", head_hash=summary.head_hash, base_hash=None,
                      is_shallow=False, options_json="{}", versions_json="{}")
    w.fail_run(run, "KeyboardInterrupt: ")
    runs = read_table(engine, "mining_runs").set_index("run_id")
    assert runs.loc[run, "status"] == "failed"
    assert runs.loc[summary.run_id, "status"] == "complete"


def test_planner_statistics_are_advisory(tmp_path):
    """A store error while refreshing planner statistics (PostgreSQL: two workers'
    ANALYZE can deadlock) is a warning: the run has already completed."""
    import sqlite3

    import pytest
    from sqlalchemy import event

    from procmetrics.errors import ProcmetricsWarning

    engine = open_store(tmp_path / "s.sqlite")

    @event.listens_for(engine, "before_cursor_execute")
    def deadlock(conn, cursor, statement, *args):
        if statement.strip().upper() == "ANALYZE":
            raise sqlite3.OperationalError("database is locked")

    with pytest.warns(ProcmetricsWarning, match="planner statistics not refreshed"):
        StoreWriter(engine).refresh_statistics()
    event.remove(engine, "before_cursor_execute", deadlock)
    StoreWriter(engine).refresh_statistics()        # and the engine still works
