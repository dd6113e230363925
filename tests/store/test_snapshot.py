"""Readers see one consistent state: complete runs only, one snapshot for many tables.

Reference: the counts git itself gives (``git rev-list --count``) before and after
new commits are mined while a reader holds its snapshot.
"""
from __future__ import annotations

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store.tables import read_table, read_tables, snapshot
from tests.git_support import when


def _count(h) -> int:
    return int(h.git("rev-list", "--count", "HEAD"))


def test_a_snapshot_does_not_see_a_run_that_completes_during_it(git_history, tmp_path):
    h = git_history()
    for i in range(4):
        h.commit(f"core: step {i}", files={"core/a.c": f"{i}\n"}, date=when(1 + i))
    store = tmp_path / "s.sqlite"
    opts = MineOptions(progress=False)
    mine_repository(h.path, store=store, options=opts)
    before = _count(h)
    for i in range(3):
        h.commit(f"net: step {i}\n\nReviewed-by: Bob <bob@example.org>\n",
                 files={"net/b.c": f"{i}\n"}, date=when(10 + i))
    engine = open_store(store)
    with snapshot(engine) as conn:
        first = read_table(conn, "commits")
        mine_repository(h.path, store=store, options=opts)   # completes meanwhile
        again = read_tables(engine, ["commits"])             # a fresh reader sees it
        still = read_table(conn, "commits")                  # the snapshot does not
        trailers = read_table(conn, "trailers")
    assert len(first) == len(still) == before
    assert len(again["commits"]) == _count(h) == before + 3
    assert set(trailers["hash"]) <= set(still["hash"])       # no trailer without its commit
