"""The summary's row counts after a run, checked against git plumbing and against the
per-repository join, for a store holding one repository (counted whole) and two."""
from __future__ import annotations

from sqlalchemy import text

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store.writer import StoreWriter
from tests.git_support import GitHistory, when


def _joined(engine, repo_id: int) -> dict[str, int]:
    """Each count by the plain join to the repository's commits (the oracle in SQL)."""
    q = ("SELECT count(*) FROM {t} x JOIN git_commit g ON g.commit_id = x.commit_id "
         "WHERE g.repo_id = :r")
    with engine.connect() as conn:
        def one(sql: str) -> int:
            return int(conn.execute(text(sql), {"r": repo_id}).scalar())
        return {"commits": one("SELECT count(*) FROM git_commit WHERE repo_id = :r"),
                "merges": one("SELECT count(*) FROM git_commit WHERE repo_id = :r "
                              "AND n_parents > 1"),
                "file_changes": one(q.format(t="file_change")),
                "trailers": one(q.format(t="trailer")),
                "reverts": one(q.format(t="revert_link")),
                "unparsed": one(q.format(t="unparsed_reference")),
                "fix_status": dict(conn.execute(text(
                    "SELECT f.status, count(*) FROM fix_link f JOIN git_commit g "
                    "ON g.commit_id = f.commit_id WHERE g.repo_id = :r GROUP BY f.status"),
                    {"r": repo_id}).all())}


def _git_counts(h: GitHistory) -> dict[str, int]:
    raw = h.git("log", "--no-merges", "--format=", "--raw", "-M", "HEAD")
    return {"commits": int(h.git("rev-list", "--count", "HEAD")),
            "merges": int(h.git("rev-list", "--count", "--merges", "HEAD")),
            "file_changes": sum(1 for line in raw.splitlines() if line.startswith(":"))}


def _other(path) -> GitHistory:
    h = GitHistory.create(path)
    h.commit("one\n\nReviewed-by: Ann Other <ann@example.org>\n", files={"x/a.c": "a\n"},
             date=when(0))
    h.commit("two\n", files={"x/a.c": "b\n", "y/b.c": "b\n"}, date=when(1))
    return h


def test_totals_alone_and_beside_another_repository(sample_history, tmp_path):
    store = tmp_path / "s.sqlite"
    first = mine_repository(sample_history.path, store=store,
                            options=MineOptions(progress=False, repo_name="main"))
    engine = open_store(store)
    writer = StoreWriter(engine)
    alone = writer.totals(1)
    git = _git_counts(sample_history)
    assert git["merges"] > 0 and alone["trailers"] > 0 and alone["fix_status"]
    assert {k: alone[k] for k in git} == git
    assert {k: alone[k] for k in _joined(engine, 1)} == _joined(engine, 1)
    assert (first.commits, first.merges, first.file_changes) == (
        git["commits"], git["merges"], git["file_changes"])
    h = _other(tmp_path / "other")
    second = mine_repository(h.path, store=store,
                             options=MineOptions(progress=False, repo_name="other"))
    assert writer.totals(1) == alone            # counted through the join now
    both = writer.totals(2)
    assert {k: both[k] for k in _joined(engine, 2)} == _joined(engine, 2)
    assert (second.commits, second.file_changes, second.trailers) == (2, 3, 1)
