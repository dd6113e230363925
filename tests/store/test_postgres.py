"""The PostgreSQL team store behaves like the SQLite default through the same code.

The oracle is the other database: the same rows written through the schema into
SQLite and into PostgreSQL must read back as identical tidy tables, and dates
must come back as the instants :mod:`datetime` computes for the stored epochs.
"""
from __future__ import annotations

from datetime import datetime, timezone

import pandas as pd
import pytest
from sqlalchemy import insert, select, text, update

from procmetrics.errors import SchemaError, StoreError
from procmetrics.store import open_store
from procmetrics.store import schema as s
from procmetrics.store.tables import COLUMNS, READERS, read_table
from tests.pg_support import any_store_url, pg_url, sqlite_url  # noqa: F401 - fixtures

# 2040-01-01T00:00:00Z: beyond 32-bit epoch seconds, so BIGINT columns matter
FAR = int(datetime(2040, 1, 1, tzinfo=timezone.utc).timestamp())
T0 = int(datetime(2019, 3, 4, 5, 6, 7, tzinfo=timezone.utc).timestamp())
H = [f"{i:02x}" * 20 for i in range(1, 8)]   # seven distinct 40-digit hashes


def _fill(engine) -> None:
    """A small store by hand: two repositories, every table, NULLs and non-ASCII text."""
    with engine.begin() as c:
        c.execute(insert(s.repository), [
            {"repo_id": 1, "name": "alpha-fw", "path": "/src/alpha", "remote_url": None,
             "tip_hash": H[3], "tip_ref": "main", "is_shallow": False,
             "mapping_kind": "maintainers", "mapping_source": "MAINTAINERS"},
            {"repo_id": 2, "name": "Beta_lib", "path": "/src/beta", "remote_url": "file:///x",
             "tip_hash": H[5], "tip_ref": "trunk", "is_shallow": True,
             "mapping_kind": "path-prefix", "mapping_source": "2"},
        ])
        c.execute(insert(s.mining_run), [
            {"run_id": 1, "repo_id": 1, "status": "complete", "started_utc": T0,
             "ended_utc": T0 + 5, "ref": "main", "head_hash": H[3], "base_hash": None,
             "is_shallow": False, "options_json": "{}", "versions_json": "{\"git\": \"2\"}",
             "n_commits": 4, "n_file_changes": 5, "n_trailers": 3, "n_fix_refs": 2,
             "message": None},
            {"run_id": 2, "repo_id": 2, "status": "complete", "started_utc": FAR,
             "ended_utc": None, "ref": "trunk", "head_hash": None, "base_hash": H[4],
             "is_shallow": True, "options_json": "{}", "versions_json": "{}",
             "n_commits": None, "n_file_changes": None, "n_trailers": None,
             "n_fix_refs": None, "message": "interrupted"},
        ])
        c.execute(insert(s.person), [
            {"person_id": 1, "name": "Åsa Nørd", "email": "asa@alpha.example"},
            {"person_id": 2, "name": "Bo Ito", "email": "bo@beta.example"},
        ])
        common = {"author_offset_min": -420, "committer_offset_min": 330,
                  "message_was_utf8": True, "stable_request": False}
        c.execute(insert(s.commit), [
            {"commit_id": 1, "repo_id": 1, "run_id": 1, "hash": H[0], "author_id": 1,
             "committer_id": 2, "author_time": T0 - 86400, "committer_time": T0,
             "subject": "core: add ✓ check", "message": "core: add ✓ check\n", "n_parents": 0,
             "is_merge": False, **common},
            {"commit_id": 2, "repo_id": 1, "run_id": 1, "hash": H[1], "author_id": 2,
             "committer_id": 2, "author_time": T0 + 10, "committer_time": T0 + 3600,
             "subject": "net: fix leak", "message": "net: fix leak\n\nFixes: " + H[0][:12],
             "n_parents": 1, "is_merge": False, **{**common, "stable_request": True}},
            {"commit_id": 3, "repo_id": 1, "run_id": 1, "hash": H[2], "author_id": 1,
             "committer_id": 1, "author_time": T0 + 20, "committer_time": T0 + 7200,
             "subject": "Revert \"net: fix leak\"", "message": "Revert", "n_parents": 1,
             "is_merge": False, **common},
            {"commit_id": 4, "repo_id": 1, "run_id": 1, "hash": H[3], "author_id": 2,
             "committer_id": 1, "author_time": T0 + 30, "committer_time": T0 + 9000,
             "subject": "Merge branch 'x'", "message": "Merge", "n_parents": 2,
             "is_merge": True, **common},
            {"commit_id": 5, "repo_id": 2, "run_id": 2, "hash": H[4], "author_id": 2,
             "committer_id": 2, "author_time": FAR, "committer_time": FAR + 1,
             "subject": "lib: init", "message": "lib: init", "n_parents": 0,
             "is_merge": False, **{**common, "message_was_utf8": False}},
            {"commit_id": 6, "repo_id": 2, "run_id": 2, "hash": H[5], "author_id": 1,
             "committer_id": 2, "author_time": FAR + 50, "committer_time": FAR + 60,
             "subject": "lib: fix init", "message": "lib: fix init", "n_parents": 1,
             "is_merge": False, **common},
        ])
        c.execute(insert(s.commit_parent), [
            {"commit_id": 2, "position": 0, "parent_hash": H[0]},
            {"commit_id": 3, "position": 0, "parent_hash": H[1]},
            {"commit_id": 4, "position": 0, "parent_hash": H[2]},
            {"commit_id": 4, "position": 1, "parent_hash": H[6]},
            {"commit_id": 6, "position": 0, "parent_hash": H[4]},
        ])
        c.execute(insert(s.file_change), [
            {"commit_id": 1, "path": "core/a.c", "old_path": None, "change_type": "A",
             "lines_added": 10, "lines_deleted": 0, "is_binary": False},
            {"commit_id": 1, "path": "core/logo.png", "old_path": None, "change_type": "A",
             "lines_added": None, "lines_deleted": None, "is_binary": True},
            {"commit_id": 2, "path": "net/ß.c", "old_path": "net/old.c", "change_type": "R",
             "lines_added": 3, "lines_deleted": 1, "is_binary": False},
            {"commit_id": 3, "path": "net/ß.c", "old_path": None, "change_type": "M",
             "lines_added": 1, "lines_deleted": 3, "is_binary": False},
            {"commit_id": 5, "path": "lib/init.c", "old_path": None, "change_type": "A",
             "lines_added": None, "lines_deleted": None, "is_binary": None},
            {"commit_id": 6, "path": "lib/init.c", "old_path": None, "change_type": "M",
             "lines_added": None, "lines_deleted": None, "is_binary": None},
        ])
        c.execute(insert(s.trailer), [
            {"commit_id": 2, "position": 0, "key": "fixes", "raw_key": "Fixes",
             "value": H[0][:12], "person_id": None},
            {"commit_id": 2, "position": 1, "key": "signed-off-by", "raw_key": "Signed-Off-By",
             "value": "Bo Ito <bo@beta.example>", "person_id": 2},
            {"commit_id": 6, "position": 0, "key": "reviewed-by", "raw_key": "Reviewed-by",
             "value": "Åsa Nørd <asa@alpha.example>", "person_id": 1},
        ])
        c.execute(insert(s.fix_link), [
            {"commit_id": 2, "position": 0, "ref_hash": H[0][:12], "status": "resolved",
             "introducer_hash": H[0], "cited_subject": "core: add ✓ check",
             "subject_match": True, "in_trailer_block": True, "raw_text": "Fixes: x"},
            {"commit_id": 6, "position": 0, "ref_hash": "deadbeef", "status": "unresolved",
             "introducer_hash": None, "cited_subject": None, "subject_match": None,
             "in_trailer_block": False, "raw_text": "Fixes: deadbeef"},
            {"commit_id": 6, "position": 1, "ref_hash": H[4][:8], "status": "resolved",
             "introducer_hash": H[4], "cited_subject": "lib: other", "subject_match": False,
             "in_trailer_block": True, "raw_text": "Fixes: y"},
        ])
        c.execute(insert(s.unparsed_reference), [
            {"commit_id": 6, "kind": "fixes", "raw_text": "Fixes: the init bug"}])
        c.execute(insert(s.revert_link), [
            {"commit_id": 3, "ref_hash": H[1], "status": "resolved", "reverted_hash": H[1]}])
        c.execute(insert(s.subsystem), [
            {"subsystem_id": 1, "repo_id": 1, "name": "CORE"},
            {"subsystem_id": 2, "repo_id": 1, "name": "NETWORKING"},
            {"subsystem_id": 3, "repo_id": 2, "name": "lib"},
        ])
        c.execute(insert(s.path_subsystem), [
            {"repo_id": 1, "path": "core/a.c", "subsystem_id": 1},
            {"repo_id": 1, "path": "core/logo.png", "subsystem_id": 1},
            {"repo_id": 1, "path": "net/ß.c", "subsystem_id": 2},
            {"repo_id": 1, "path": "net/ß.c", "subsystem_id": 1},
            {"repo_id": 2, "path": "lib/init.c", "subsystem_id": 3},
        ])
        c.execute(insert(s.tag), [
            {"repo_id": 1, "name": "v1.0", "commit_hash": H[1], "tag_time": T0 + 4000,
             "tag_offset_min": 60, "is_annotated": True},
            {"repo_id": 2, "name": "v0.1-rc1", "commit_hash": H[4], "tag_time": None,
             "tag_offset_min": None, "is_annotated": False},
        ])
        c.execute(insert(s.upstream_reference), [{"repo_id": 1, "upstream_repo_id": 2}])
        c.execute(insert(s.patch_id), [
            {"repo_id": 1, "hash": H[0], "patch_id": "a" * 40},
            {"repo_id": 1, "hash": H[1], "patch_id": "b" * 40},
            {"repo_id": 2, "hash": H[4], "patch_id": "a" * 40},
        ])
        c.execute(insert(s.backport_line), [
            {"repo_id": 1, "hash": H[1], "style": "upstream-commit", "cited_hash": H[4][:12]},
        ])


@pytest.mark.postgres
def test_open_store_creates_and_checks_the_schema_on_postgres(pg_url: str) -> None:
    engine = open_store(pg_url)
    try:
        with engine.connect() as conn:
            version = conn.execute(select(s.meta.c.value)
                                   .where(s.meta.c.key == "schema_version")).scalar_one()
            found = set(conn.execute(text(
                "SELECT table_name FROM information_schema.tables "
                "WHERE table_schema = current_schema()")).scalars())
        assert version == str(s.SCHEMA_VERSION)
        assert found == set(s.metadata.tables)
        open_store(pg_url).dispose()            # reopening an existing store is fine
        with engine.begin() as conn:
            conn.execute(update(s.meta).where(s.meta.c.key == "schema_version")
                         .values(value=str(s.SCHEMA_VERSION + 1)))
        with pytest.raises(SchemaError, match="newer procmetrics"):
            open_store(pg_url)
    finally:
        engine.dispose()


@pytest.mark.postgres
def test_unreachable_server_is_a_store_error_without_the_password() -> None:
    from tests.pg_support import require_pg
    base = require_pg()
    # port 1 on loopback: nothing listens there (common practice: privileged, unused)
    head, tail = base.split("@", 1)
    dbname = tail.split("/", 1)[1]
    with pytest.raises(StoreError) as info:
        open_store(f"{head}@127.0.0.1:1/{dbname}")
    password = head.rsplit(":", 1)[1]
    assert password not in str(info.value)


@pytest.mark.postgres
def test_every_tidy_table_reads_the_same_from_sqlite_and_postgres(pg_url: str,
                                                                   tmp_path) -> None:
    lite = open_store(sqlite_url(tmp_path))
    pg = open_store(pg_url)
    try:
        _fill(lite)
        _fill(pg)
        for name in READERS:
            for repo in (None, "alpha-fw", "Beta_lib"):
                a = read_table(lite, name, repo)
                b = read_table(pg, name, repo)
                assert list(b.columns) == COLUMNS[name]
                pd.testing.assert_frame_equal(a, b, check_exact=True, obj=f"{name}[{repo}]")
            assert len(read_table(pg, name)) > 0, name
        # the review-key filter done by the database: the same rows on both, and the
        # rows pandas keeps from the whole table (case-blind, as the analyses compare)
        keys = ("REVIEWED-by", "acked-BY")
        whole = read_table(lite, "trailers")
        want = whole[whole["key"].str.lower().isin({k.lower() for k in keys})]
        for engine in (lite, pg):
            got = read_table(engine, "trailers", keys=keys)
            assert len(got) > 0
            pd.testing.assert_frame_equal(got, want.reset_index(drop=True), check_exact=True)
        commits = read_table(pg, "commits")
        # oracle: datetime's own epoch conversion, not the store's
        far = commits.loc[commits["hash"] == H[5], "committer_date"].item()
        assert far == pd.Timestamp(datetime.fromtimestamp(FAR + 60, tz=timezone.utc))
        assert commits["repo"].tolist()[:2] == ["Beta_lib", "Beta_lib"]   # byte order
        subs = read_table(pg, "commit_subsystems", "alpha-fw")
        assert sorted(subs.loc[subs["hash"] == H[1], "subsystem"]) == ["CORE", "NETWORKING"]
    finally:
        lite.dispose()
        pg.dispose()


def test_any_store_url_round_trip(any_store_url: str) -> None:
    """The same write-read path on whichever database this parameter names."""
    engine = open_store(any_store_url)
    try:
        _fill(engine)
        people = read_table(engine, "trailers")
        assert set(people["person_name"].dropna()) == {"Åsa Nørd", "Bo Ito"}
        runs = read_table(engine, "mining_runs")
        ended = runs.set_index("repo")["ended"]
        assert pd.isna(ended["Beta_lib"]) and not pd.isna(ended["alpha-fw"])
    finally:
        engine.dispose()


@pytest.mark.postgres
def test_mined_history_reads_the_same_from_sqlite_and_postgres(sample_history, pg_url: str,
                                                               tmp_path) -> None:
    """End to end: the miner writes the standard sample history into both databases,
    twice (a full run, then an incremental one after a new commit) and every tidy
    table reads back identical, row for row."""
    from procmetrics.mine import MineOptions, mine_repository
    from tests.git_support import GitHistory

    clone = GitHistory.create(tmp_path / "clone")
    clone.git("fetch", "-q", "--update-head-ok", str(sample_history.path),
              "+refs/heads/*:refs/heads/*",
              "+refs/tags/*:refs/tags/*")
    clone.git("reset", "-q", "--hard", "main")
    lite_url = sqlite_url(tmp_path)
    opts = MineOptions(ref="main", progress=False, repo_name="sample")
    for url in (lite_url, pg_url):
        mine_repository(clone.path, store=url, options=opts)
    clone.commit(f"later\n\nFixes: {clone.rev('main~1')[:12]}\n", files={"late.txt": "x\n"})
    for url in (lite_url, pg_url):
        summary = mine_repository(clone.path, store=url, options=opts)
        assert summary.incremental and summary.new_commits == 1
    lite, pg = open_store(lite_url), open_store(pg_url)
    try:
        for name in READERS:
            a, b = read_table(lite, name), read_table(pg, name)
            if name == "mining_runs":       # wall-clock times of two different runs
                a = a.drop(columns=["started", "ended"])
                b = b.drop(columns=["started", "ended"])
            pd.testing.assert_frame_equal(a, b, check_exact=True, obj=name)
        commits = read_table(pg, "commits")
        # oracle: git's own count of the mined history
        assert len(commits) == int(clone.git("rev-list", "--count", "main").strip())
        assert len(read_table(pg, "fix_links")) > 0 and len(read_table(pg, "trailers")) > 0
    finally:
        lite.dispose()
        pg.dispose()
