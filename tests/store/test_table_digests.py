"""Stored table digests (schema 4) against the full computation, after every kind of write.

Oracles: the report's checksum from the tidy tables read into pandas
(:func:`procmetrics.store.repodata.store_checksum` over every table, the path a
report without stored digests took before), and per table the count and
multiset digest of the pandas canonical lines of the tidy table as read. Neither
uses the stored digests nor the SQL line builder the writer uses.
"""
from __future__ import annotations

import sqlite3

import pytest
from sqlalchemy import select

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.mine.upstream import mine_upstream
from procmetrics.store import open_store
from procmetrics.store import schema as s
from procmetrics.store.digests import MAINTAINED, stored_digests
from procmetrics.store.repodata import (
    CHECKSUM_TABLES, StoreData, canonical_column_lines, load_store_data, multiset_digest,
    store_checksum,
)
from procmetrics.store.tables import COLUMNS, read_tables
from procmetrics.store.writer import CommitRow, FileRow, StoreWriter, TrailerRow
from tests.git_support import BOB, CAROL, when
from tests.mine.test_incremental import (Boom, first_part, interrupt_second_run, opts,
                                         second_part)
from tests.mine.test_multi_repo import three_repos  # noqa: F401 - fixture
from tests.pg_support import any_store_url  # noqa: F401 - fixture


def oracle(engine, repo: str) -> tuple[str, dict[str, tuple[int, str]]]:
    """Checksum and per-table (count, digest) from the tidy tables in pandas."""
    tables = read_tables(engine, CHECKSUM_TABLES, repo)
    per_table = {name: (len(tables[name]), multiset_digest([canonical_column_lines(
        tables[name], COLUMNS[name])])) for name in MAINTAINED}
    return store_checksum(StoreData(repo, tables)), per_table


def stored(engine, repo: str) -> dict[str, tuple[int, str]]:
    with engine.connect() as conn:
        return stored_digests(conn, repo)


def check(engine, repo: str = "proj", *, expect_stored: bool = True) -> str:
    """Stored digests (when expected) equal the oracle's; the report's checksum too."""
    checksum, per_table = oracle(engine, repo)
    have = stored(engine, repo)
    if expect_stored:
        assert have == per_table
    else:
        assert have == {}
    assert load_store_data(engine, repo).checksum == checksum
    return checksum


def test_first_and_incremental_mine(git_history, any_store_url):  # noqa: F811
    h = git_history()
    first_part(h)
    engine = open_store(any_store_url)
    try:
        mine_repository(h.path, store=engine, options=opts())
        first = check(engine)
        assert stored(engine, "proj")["trailers"][0] == 4      # three Fixes, one Signed-off-by
        second_part(h)     # a merge, a new trailer, a tag, links of older commits resolved
        mine_repository(h.path, store=engine, options=opts())
        assert check(engine) != first
        assert stored(engine, "proj")["trailers"][0] == 5      # and a Reviewed-by
        mine_repository(h.path, store=engine, options=opts())    # nothing new
        check(engine)
    finally:
        engine.dispose()


def test_sample_history_with_odd_text(sample_history, tmp_path):
    """Non-UTF-8 names and messages, an empty message, renames, binary files, trailers."""
    engine = open_store(tmp_path / "s.sqlite")
    mine_repository(sample_history.path, store=engine, options=MineOptions(progress=False))
    check(engine, "sample")
    assert all(n > 0 for n, _ in stored(engine, "sample").values())


def test_escaped_text_and_persons(tmp_path, any_store_url):  # noqa: F811
    """Tabs, newlines, backslashes and non-ASCII in every text column, a trailer without a
    person: the database's lines equal pandas' canonical lines."""
    engine = open_store(any_store_url)
    try:
        w = StoreWriter(engine)
        rid = w.ensure_repository("proj", str(tmp_path))
        run = w.start_run(rid, ref="HEAD", head_hash="1" * 40, base_hash=None,
                          is_shallow=False, options_json="{}", versions_json="{}")
        odd = "tab\there\\back\nline ü 漢"
        w.write_batch(rid, run, [CommitRow(
            "a" * 40, (), ("Ann\tTab", "ann@x"), ("Ann\tTab", "ann@x"), 0, 0, 0, 0, "s", "m",
            False, True, [FileRow(odd, None, "A", 3, 0, False),
                          FileRow("bin\\x", odd, "R", None, None, True)],
            [TrailerRow("Reviewed-by", "reviewed-BY", odd, (odd, "o@x")),
             TrailerRow("Link", "Link", "x\\y", None)], [], [], [("fixes", odd)])])
        w.complete_run(run, rid, tip_hash="a" * 40, tip_ref="HEAD", path=str(tmp_path),
                       remote_url=None, is_shallow=False, mapping_kind="path-prefix",
                       mapping_source="1", counts={"n_commits": 1}, message=None)
        check(engine)
        assert {k: v[0] for k, v in stored(engine, "proj").items()} == \
            {"file_changes": 2, "trailers": 2, "unparsed_references": 1}
    finally:
        engine.dispose()


@pytest.mark.parametrize("hard", [False, True])
def test_interrupted_run_and_cleanup(git_history, tmp_path, monkeypatch, hard):
    h = git_history()
    store = tmp_path / "s.sqlite"
    interrupt_second_run(h, store, monkeypatch, hard)
    engine = open_store(store)
    with engine.connect() as conn:      # rows of the dead run are stored but not counted
        n_fc = conn.exec_driver_sql("SELECT count(*) FROM file_change").scalar()
    assert n_fc > stored(engine, "proj")["file_changes"][0]
    check(engine)
    assert mine_repository(h.path, store=store, options=opts(batch_size=2)).cleaned_runs
    check(engine)
    engine.dispose()


def test_failure_after_completion_keeps_the_run_and_its_digests(git_history, tmp_path,
                                                                 monkeypatch):
    """A failure after the completing transaction (here the planner statistics) does
    not undo the run: rows, tip and digests were committed together, so they stay
    visible and stored (hiding the rows lost them: the tip had moved), and the next
    run has nothing to add."""
    h = git_history()
    first_part(h)
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts())
    second_part(h)

    def broken(self):
        raise Boom("statistics")
    monkeypatch.setattr(StoreWriter, "refresh_statistics", broken)
    with pytest.raises(Boom):
        mine_repository(h.path, store=store, options=opts())
    monkeypatch.undo()
    engine = open_store(store)
    done = check(engine)
    assert len(read_tables(engine, ["commits"], "proj")["commits"]) == int(
        h.git("rev-list", "--count", "HEAD").strip())
    again = mine_repository(h.path, store=engine, options=opts())
    assert again.new_commits == 0 and check(engine) == done
    engine.dispose()


def test_rewrite_remine(git_history, tmp_path):
    h = git_history()
    first_part(h)
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts())
    h.git("reset", "-q", "--hard", h.ids["bug"])
    h.commit("core: another fix\n\nTested-by: Carol Test <carol@example.com>\n",
             files={"core/a.c": "x\n"}, author=CAROL, date=when(9))
    mine_repository(h.path, store=store, options=opts(rewrite_policy="remine"))
    engine = open_store(store)
    check(engine)
    once = open_store(tmp_path / "once.sqlite")
    mine_repository(h.path, store=once, options=opts())
    assert stored(engine, "proj") == stored(once, "proj")
    engine.dispose()
    once.dispose()


def test_maintainers_change_tags_and_two_repositories(git_history, tmp_path):
    """A MAINTAINERS change remaps paths (commit_subsystems), a tag moves, and a second
    repository mined into the same store leaves the first one's digests alone."""
    h = git_history()
    first_part(h)
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=opts())
    other = git_history("other")
    other.commit("o: one\n\nSigned-off-by: Bob Sample <bob@example.net>\n",
                 files={"o.c": "1\n"}, author=BOB, date=when(0))
    engine = open_store(store)
    before = stored(engine, "proj")
    mine_repository(other.path, store=engine, options=MineOptions(progress=False,
                                                                   repo_name="other"))
    assert stored(engine, "proj") == before
    check(engine, "other")
    h.commit("maintainers\n", files={"MAINTAINERS": "CORE\nF:\tcore/\n\nSIDE\nF:\tside/\n"},
             date=when(10))
    h.tag("v1", message="one", date=when(11))
    mine_repository(h.path, store=engine, options=opts())
    h.git("tag", "-d", "v1")
    h.commit("later\n", files={"core/c.c": "c\n"}, date=when(12))
    h.tag("v1", message="moved", date=when(13))
    mine_repository(h.path, store=engine, options=opts())
    check(engine)
    check(engine, "other")
    engine.dispose()


def test_upstream_runs(git_history, tmp_path):
    up = git_history("up")
    a = up.commit("net: start\n", files={"net/a.c": "a\n"}, date=when(0))
    up.commit(f"net: fix\n\nFixes: {a[:12]}\nSigned-off-by: Bob Sample <bob@example.net>\n",
              files={"net/a.c": "b\n"}, author=BOB, date=when(1))
    tree = git_history("tree")
    tree.commit("net: start\n", files={"net/a.c": "a\n"}, date=when(0))
    tree.commit(f"net: fix\n\ncommit {up.rev()} upstream.\n", files={"net/a.c": "b\n"},
                date=when(2))
    store = tmp_path / "s.sqlite"
    mine_repository(tree.path, store=store, options=opts())
    mine_upstream("proj", tree.path, up.path, store=str(store),
                  options=MineOptions(progress=False))
    engine = open_store(store)
    check(engine)
    check(engine, "up")
    engine.dispose()


def test_store_from_schema_3(git_history, tmp_path):
    """An older store gains an empty digest table: the report computes in full (same
    checksum), and the next completed run stores digests computed in its transaction."""
    h = git_history()
    first_part(h)
    path = tmp_path / "old.sqlite"
    mine_repository(h.path, store=path, options=opts())
    full = check(open_store(path))
    con = sqlite3.connect(path)
    con.execute("DROP TABLE table_digest")
    con.execute("UPDATE pm_meta SET value = '3' WHERE key = 'schema_version'")
    con.commit()
    con.close()
    engine = open_store(path)
    with engine.connect() as conn:
        assert conn.execute(select(s.table_digest.c.repo_id)).first() is None
    assert check(engine, expect_stored=False) == full
    second_part(h)
    mine_repository(h.path, store=engine, options=opts())
    check(engine)
    engine.dispose()


def test_a_completing_run_adds_only_its_own_rows(git_history, tmp_path):
    """The completing run adds its rows' digests to what is stored (it does not hash the
    store again): with the stored digests zeroed after the first run, the second run
    leaves exactly the count and digest of the rows its commits brought."""
    h = git_history()
    first_part(h)
    engine = open_store(tmp_path / "s.sqlite")
    mine_repository(h.path, store=engine, options=opts())
    old = read_tables(engine, MAINTAINED, "proj")
    with engine.begin() as conn:
        conn.execute(s.table_digest.update().values(n_rows=0, digest="0" * 64))
    second_part(h)
    mine_repository(h.path, store=engine, options=opts())
    new = read_tables(engine, MAINTAINED, "proj")
    added = {}
    for name in MAINTAINED:
        keys = [c for c in COLUMNS[name]]
        rows = new[name].merge(old[name].drop_duplicates(), on=keys, how="left",
                               indicator=True)
        rows = rows[rows["_merge"] == "left_only"][keys]
        added[name] = (len(rows), multiset_digest([canonical_column_lines(rows, keys)]))
    assert added["trailers"][0] == 1 and added["file_changes"][0] == 2
    assert stored(engine, "proj") == added
    engine.dispose()


def test_concurrent_miners_of_different_repositories(three_repos, any_store_url):  # noqa: F811
    """Two worker processes mine three repositories into one store at the same time."""
    from procmetrics.mine.multi import mine_many

    result = mine_many([h.path for h in three_repos], store=any_store_url,
                       options=MineOptions(progress=False), jobs=2)
    assert not result.failures and result.executor == "process-pool"
    engine = open_store(any_store_url)
    try:
        for summary in result.summaries:
            check(engine, summary.repo)
    finally:
        engine.dispose()
