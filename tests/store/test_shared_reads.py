"""Reading the tidy tables with shared strings and id lookups gives the same tables.

``commit_subsystems`` fetches (commit id, subsystem id) pairs and looks the texts up;
the oracle is a plain SQL join over the text columns (the form it had before), with
``DISTINCT`` in the database and the rows sorted in Python. Repeating text columns are
read with equal values sharing one string; the oracle is the same read with sharing
turned off. Both on SQLite and PostgreSQL, one repository and the whole store.
"""
from __future__ import annotations

import pandas as pd
import pytest
from sqlalchemy import text

from procmetrics.errors import StoreError
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store import frames as F
from procmetrics.store import tables as T
from tests.mine.test_multi_repo import three_repos  # noqa: F401 - fixture
from tests.pg_support import any_store_url  # noqa: F401 - fixture

PAIRS_BY_TEXT = """
SELECT DISTINCT r.name, c.hash, sub.name
FROM file_change fc
JOIN git_commit c ON c.commit_id = fc.commit_id
JOIN repository r ON r.repo_id = c.repo_id
JOIN path_subsystem ps ON ps.repo_id = c.repo_id AND ps.path = fc.path
JOIN subsystem sub ON sub.subsystem_id = ps.subsystem_id
WHERE c.run_id IN (SELECT run_id FROM mining_run WHERE status = 'complete')
"""


@pytest.fixture
def store(three_repos, any_store_url):  # noqa: F811
    for h, name in zip(three_repos, ["a-fw", "b-fw", "sample"]):
        mine_repository(h.path, store=any_store_url, options=MineOptions(
            ref="HEAD", progress=False, repo_name=name))
    engine = open_store(any_store_url)
    yield engine
    engine.dispose()


def test_commit_subsystems_equal_the_join_over_text(store) -> None:
    with store.connect() as conn:
        rows = sorted(tuple(r) for r in conn.execute(text(PAIRS_BY_TEXT)))
    assert len(rows) > 20 and len({r[0] for r in rows}) == 3
    for repo in (None, "a-fw", "b-fw", "sample"):
        got = T.read_table(store, "commit_subsystems", repo)
        want = [r for r in rows if repo is None or r[0] == repo]
        assert list(got.itertuples(index=False, name=None)) == want
        assert list(got.columns) == T.COLUMNS["commit_subsystems"]
        assert all(got[c].dtype == object for c in got.columns)
        assert got.index.equals(pd.RangeIndex(len(got)))


def test_shared_strings_change_no_value(store, monkeypatch) -> None:
    names = [n for n in T.READERS if n != "mining_runs"]
    shared = {(n, r): T.read_table(store, n, r) for n in names for r in (None, "sample")}
    monkeypatch.setattr(T, "_REPEATED_TEXT", {})
    for (n, r), df in shared.items():
        pd.testing.assert_frame_equal(df, T.read_table(store, n, r), check_exact=True,
                                      obj=f"{n}[{r}]")
    trailers = shared[("trailers", None)]
    emails = trailers["person_email"].dropna()
    assert len(emails) > emails.nunique()               # values repeat ...
    assert len({id(v) for v in emails}) == emails.nunique()   # ... and share one string


def test_an_id_without_its_row_is_a_store_error() -> None:
    with pytest.raises(StoreError, match="changed while it was read"):
        F.positions(pd.Series([1, 2, 3]), pd.Series([2, 4]))
    assert list(F.positions(pd.Series([5, 7]), pd.Series([7, 7, 5]))) == [1, 1, 0]
    assert len(F.positions(pd.Series([5]), pd.Series([], dtype="int64"))) == 0


# The commits and trailers as a plain SQL join over the text columns, sorted by the
# database (the form both readers had before they looked people up from ids and sorted
# in numpy). Booleans and sums are compared as numbers.
COMMITS_BY_TEXT = """
SELECT r.name, c.hash, a.name, a.email, m.name, m.email, c.author_time, c.author_offset_min,
       c.committer_time, c.committer_offset_min, c.subject, c.n_parents,
       CASE WHEN c.is_merge THEN 1 ELSE 0 END, CASE WHEN c.stable_request THEN 1 ELSE 0 END,
       (SELECT count(*) FROM file_change f WHERE f.commit_id = c.commit_id),
       (SELECT sum(f.lines_added) FROM file_change f WHERE f.commit_id = c.commit_id),
       (SELECT sum(f.lines_deleted) FROM file_change f WHERE f.commit_id = c.commit_id),
       (SELECT count(*) FROM fix_link l WHERE l.commit_id = c.commit_id),
       (SELECT count(*) FROM fix_link l WHERE l.commit_id = c.commit_id
          AND l.status = 'resolved'),
       (SELECT count(*) FROM revert_link v WHERE v.commit_id = c.commit_id)
FROM git_commit c
JOIN repository r ON r.repo_id = c.repo_id
JOIN person a ON a.person_id = c.author_id
JOIN person m ON m.person_id = c.committer_id
WHERE c.run_id IN (SELECT run_id FROM mining_run WHERE status = 'complete')
ORDER BY r.name COLLATE "C", c.committer_time, c.hash COLLATE "C"
"""

TRAILERS_BY_TEXT = """
SELECT r.name, c.hash, t.position, t.key, t.raw_key, t.value, p.name, p.email
FROM trailer t
JOIN git_commit c ON c.commit_id = t.commit_id
JOIN repository r ON r.repo_id = c.repo_id
LEFT JOIN person p ON p.person_id = t.person_id
WHERE c.run_id IN (SELECT run_id FROM mining_run WHERE status = 'complete')
ORDER BY r.name COLLATE "C", c.hash COLLATE "C", t.position
"""


def _sql(store, query: str) -> list[tuple]:
    if store.dialect.name == "sqlite":
        query = query.replace('COLLATE "C"', "COLLATE BINARY")
    with store.connect() as conn:
        return [tuple(r) for r in conn.execute(text(query))]


def _plain(value):
    """A cell as the join gives it: missing as None, numbers as int."""
    if value is None or value is pd.NA or value is pd.NaT or (
            isinstance(value, float) and value != value):
        return None
    if isinstance(value, pd.Timestamp):
        return int(value.timestamp())
    if hasattr(value, "item"):          # numpy scalars and numpy booleans
        value = value.item()
    return int(value) if isinstance(value, bool) else value


def test_commits_and_trailers_equal_the_join_over_text(store) -> None:
    commits, trailers = _sql(store, COMMITS_BY_TEXT), _sql(store, TRAILERS_BY_TEXT)
    assert len(commits) > 20 and len(trailers) > 20
    assert any(r[6] is None for r in trailers)      # a trailer line without a person
    for repo in (None, "a-fw", "b-fw", "sample"):
        got = T.read_table(store, "commits", repo)
        got = got.assign(is_revert=got["is_revert"].astype("Int64"))[
            T.COLUMNS["commits"]]
        rows = [tuple(_plain(v) for v in r) for r in got.itertuples(index=False, name=None)]
        want = [tuple(_plain(v) for v in r) for r in commits if repo is None or r[0] == repo]
        want = [w[:-1] + (int(w[-1] > 0),) for w in want]
        assert rows == want, repo
        got = T.read_table(store, "trailers", repo)
        rows = [tuple(_plain(v) for v in r) for r in got.itertuples(index=False, name=None)]
        assert rows == [r for r in trailers if repo is None or r[0] == repo], repo
        # only review keys, case-blind, as the metrics ask for them
        got = T.read_table(store, "trailers", repo, keys=("reviewed-BY",))
        assert list(got.itertuples(index=False, name=None)) == [
            tuple(r) for r in T.read_table(store, "trailers", repo).itertuples(
                index=False, name=None) if r[3].lower() == "reviewed-by"], repo


FIX_LINKS_BY_TEXT = """
SELECT r.name, c.hash, l.position, l.ref_hash, l.status, l.introducer_hash, l.cited_subject,
       CASE WHEN l.subject_match IS NULL THEN NULL WHEN l.subject_match THEN 1 ELSE 0 END,
       CASE WHEN l.in_trailer_block THEN 1 ELSE 0 END, l.raw_text,
       c.author_time, c.committer_time, i.author_time, i.committer_time
FROM fix_link l
JOIN git_commit c ON c.commit_id = l.commit_id
JOIN repository r ON r.repo_id = c.repo_id
LEFT JOIN git_commit i ON i.repo_id = c.repo_id AND i.hash = l.introducer_hash
  AND i.run_id IN (SELECT run_id FROM mining_run WHERE status = 'complete')
WHERE c.run_id IN (SELECT run_id FROM mining_run WHERE status = 'complete')
ORDER BY r.name COLLATE "C", c.committer_time, c.hash COLLATE "C", l.position
"""


def test_fix_links_equal_the_join_over_text(store) -> None:
    links = _sql(store, FIX_LINKS_BY_TEXT)
    assert len(links) > 5 and any(r[5] is None for r in links) \
        and any(r[5] is not None for r in links)
    for repo in (None, "a-fw", "b-fw", "sample"):
        got = T.read_table(store, "fix_links", repo)
        rows = [tuple(_plain(v) for v in r) for r in got.itertuples(index=False, name=None)]
        assert rows == [r for r in links if repo is None or r[0] == repo], repo
