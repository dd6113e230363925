"""Mining many repositories into one store: process pool and a local Dask cluster.

Oracles: ``git rev-list`` / ``git rev-parse`` for counts and tips (plain git
plumbing), and mining each repository alone with the single-repository miner:
mining in parallel must not change one row of any repository's tidy tables.
"""
from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from procmetrics.errors import ConfigError
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.mine.multi import assign_names, mine_many, read_repo_list
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from tests.git_support import ALICE, BOB, CAROL, GitHistory, when
from tests.pg_support import any_store_url, sqlite_url  # noqa: F401 - fixture

PER_REPO_TABLES = ("commits", "commit_subsystems", "file_changes", "trailers", "fix_links",
                   "reverts", "unparsed_references", "tags")
OPTS = MineOptions(ref="HEAD", progress=False)


def _small(path: Path, label: str, n: int) -> GitHistory:
    """``n`` commits with sign-offs, a review, a fix of the first commit and a tag."""
    h = GitHistory.create(path)
    first = h.commit(f"{label}: start\n\nSigned-off-by: {ALICE[0]} <{ALICE[1]}>\n",
                     files={f"{label}/core.c": "a\n"}, author=ALICE, date=when(0, "+0200"))
    for i in range(1, n - 1):
        h.commit(f"{label}: step {i}\n\nReviewed-by: {CAROL[0]} <{CAROL[1]}>\n"
                 f"Signed-off-by: {BOB[0]} <{BOB[1]}>\n",
                 files={f"{label}/f{i % 3}.c": f"{i}\n"}, author=BOB, date=when(i, "-0500"))
    h.commit(f"{label}: fix start\n\nFixes: {first[:12]} (\"{label}: start\")\n"
             f"Signed-off-by: {ALICE[0]} <{ALICE[1]}>\n",
             files={f"{label}/core.c": "b\n"}, author=ALICE, date=when(n, "+0000"))
    h.tag("v1", message="one", date=when(n + 1))
    return h


@pytest.fixture
def three_repos(tmp_path: Path, sample_history: GitHistory) -> list[GitHistory]:
    """Two repositories that share the folder name ``fw`` and the standard sample."""
    return [_small(tmp_path / "team-a" / "fw", "net", 5),
            _small(tmp_path / "team-b" / "fw", "disk", 7),
            sample_history]


def _check_against_single_runs(engine, repos: list[GitHistory], names: list[str],
                               tmp_path: Path) -> None:
    for h, name in zip(repos, names):
        alone_url = sqlite_url(tmp_path, f"alone-{name}.sqlite")
        mine_repository(h.path, store=alone_url, options=MineOptions(
            ref="HEAD", progress=False, repo_name=name))
        alone = open_store(alone_url)
        try:
            for table in PER_REPO_TABLES:
                pd.testing.assert_frame_equal(read_table(engine, table, name),
                                              read_table(alone, table, name),
                                              obj=f"{table}[{name}]")
        finally:
            alone.dispose()
        commits = read_table(engine, "commits", name)
        assert len(commits) == int(h.git("rev-list", "--count", "HEAD").strip())
    runs = read_table(engine, "mining_runs")
    repos_t = read_table(engine, "repositories").set_index("repo")
    assert sorted(runs["repo"]) == sorted(names)          # one run per repository
    assert set(runs["status"]) == {"complete"}
    for h, name in zip(repos, names):
        assert repos_t.loc[name, "tip_hash"] == h.rev("HEAD")
        assert Path(repos_t.loc[name, "path"]) == h.path.resolve()


def test_names_default_to_folders_and_are_disambiguated() -> None:
    assert assign_names(["/x/a/fw", "/x/b/fw", "/x/lib"]) == ["a-fw", "b-fw", "lib"]
    assert assign_names(["/srv/core.git", "/w/tool/.git"]) == ["core", "tool"]
    assert assign_names(["/a/x/fw", "/b/x/fw"]) == ["x-fw-1", "x-fw-2"]
    names = assign_names(["/p/x-fw-1", "/a/x/fw", "/b/x/fw"])
    assert len(set(names)) == 3


def test_repository_list_file(tmp_path: Path) -> None:
    lst = tmp_path / "lists" / "repos.txt"
    lst.parent.mkdir()
    lst.write_text("# team repositories\n\n../fw\n/abs/lib  \n   # indented comment\n")
    assert read_repo_list(lst) == [str(tmp_path / "lists" / ".." / "fw"), "/abs/lib"]
    (tmp_path / "empty.txt").write_text("# nothing\n")
    with pytest.raises(ConfigError, match="no repository"):
        read_repo_list(tmp_path / "empty.txt")


def test_process_pool_matches_single_runs(three_repos, any_store_url: str,
                                          tmp_path: Path) -> None:
    paths = [h.path for h in three_repos]
    result = mine_many(paths, store=any_store_url, options=OPTS, jobs=2)
    assert result.ok and result.executor == "process-pool" and result.workers == 2
    names = [s.repo for s in result.summaries]
    assert names == ["team-a-fw", "team-b-fw", "sample"]
    engine = open_store(any_store_url)
    try:
        _check_against_single_runs(engine, three_repos, names, tmp_path)
    finally:
        engine.dispose()


def test_second_run_is_incremental_per_repository(three_repos, tmp_path: Path) -> None:
    url = sqlite_url(tmp_path)
    repos = three_repos[:2]
    mine_many([h.path for h in repos], store=url, options=OPTS, jobs=2)
    repos[1].commit("disk: later\n\nSigned-off-by: Bob Sample <bob@example.net>\n",
                    files={"disk/late.c": "z\n"}, author=BOB, date=when(30))
    again = mine_many([h.path for h in repos], store=url, options=OPTS, jobs=2)
    by = {s.repo: s for s in again.summaries}
    assert by["team-a-fw"].incremental and by["team-a-fw"].new_commits == 0
    assert by["team-b-fw"].incremental and by["team-b-fw"].new_commits == 1
    assert by["team-b-fw"].commits == int(repos[1].git("rev-list", "--count", "HEAD"))


def test_a_broken_path_fails_alone(three_repos, tmp_path: Path) -> None:
    not_repo = tmp_path / "plain-folder"
    not_repo.mkdir()
    result = mine_many([three_repos[0].path, not_repo], store=sqlite_url(tmp_path),
                       options=OPTS, jobs=2)
    assert [s.repo for s in result.summaries] == ["fw"]
    [failure] = result.failures
    assert (failure.repo, failure.error, failure.exit_code) == ("plain-folder",
                                                                "NotARepository", 3)


def test_option_conflicts_are_config_errors(three_repos, tmp_path: Path) -> None:
    paths = [h.path for h in three_repos[:2]]
    with pytest.raises(ConfigError, match="repo-name"):
        mine_many(paths, store=sqlite_url(tmp_path),
                  options=MineOptions(repo_name="one", progress=False))
    with pytest.raises(ConfigError, match="SQLite"):
        mine_many(paths, store=sqlite_url(tmp_path), scheduler="tcp://10.1.2.3:8786")
    with pytest.raises(ConfigError, match="--jobs"):
        mine_many(paths, store=sqlite_url(tmp_path), jobs=0)


@pytest.fixture(scope="module")
def dask_cluster():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                  dashboard_address=None) as cluster:
        yield cluster


@pytest.mark.slow
def test_local_dask_cluster_matches_single_runs(dask_cluster, three_repos,
                                                any_store_url: str, tmp_path: Path) -> None:
    paths = [h.path for h in three_repos]
    result = mine_many(paths, store=any_store_url, options=OPTS,
                       scheduler=dask_cluster.scheduler_address)
    assert result.ok and result.executor == "dask" and result.workers == 2
    names = [s.repo for s in result.summaries]
    engine = open_store(any_store_url)
    try:
        _check_against_single_runs(engine, three_repos, names, tmp_path)
    finally:
        engine.dispose()


def test_cli_mines_paths_and_a_list(three_repos, tmp_path: Path, capsys) -> None:
    from procmetrics.cli import main
    store = tmp_path / "cli.sqlite"
    lst = tmp_path / "repos.txt"
    lst.write_text(f"# two teams\n{three_repos[1].path}\n")
    code = main(["mine", str(three_repos[0].path), "--list", str(lst), "--store", str(store),
                 "--jobs", "2", "--no-progress"])
    out = capsys.readouterr().out
    assert code == 0
    assert "2 of 2 repositories mined" in out
    engine = open_store(store)
    try:
        assert sorted(read_table(engine, "repositories")["repo"]) == ["team-a-fw", "team-b-fw"]
    finally:
        engine.dispose()
    assert main(["mine", "--store", str(store)]) == ConfigError.exit_code


def test_a_deadlock_victim_mines_its_repository_again(three_repos, tmp_path: Path,
                                                      monkeypatch) -> None:
    """PostgreSQL rolls back one transaction of a deadlock ("deadlock detected", a
    StoreBusy here). The worker mines its repository again; the retry removes the rows
    the interrupted run had written, so the store equals a clean run (oracle). Simulated
    after the commits are written (link resolution fails once), on SQLite; another
    StoreBusy (a held lock) is not retried."""
    import procmetrics.mine.miner as miner
    from procmetrics.errors import StoreBusy
    from procmetrics.mine.multi import _mine_one

    repo = three_repos[0]
    real = miner.resolve_links
    calls = {"n": 0}

    def once(*args, **kw):
        calls["n"] += 1
        if calls["n"] == 1:
            raise StoreBusy("the store is busy: another process holds its lock "
                            "(deadlock detected); run again when it has finished")
        return real(*args, **kw)

    monkeypatch.setattr(miner, "resolve_links", once)
    url = "sqlite:///" + str(tmp_path / "retry.sqlite")
    got = _mine_one(str(repo.path), "fw", url, MineOptions(progress=False))
    assert calls["n"] == 2 and got.repo == "fw" and got.cleaned_runs == (1,)
    clean = tmp_path / "clean.sqlite"
    monkeypatch.setattr(miner, "resolve_links", real)
    mine_repository(repo.path, store=clean, options=MineOptions(progress=False,
                                                                repo_name="fw"))
    for t in ("commits", "file_changes", "trailers", "fix_links"):
        a = read_table(open_store(url), t)
        b = read_table(open_store(clean), t)
        pd.testing.assert_frame_equal(a.reset_index(drop=True), b.reset_index(drop=True),
                                      check_dtype=False)

    def busy(*args, **kw):
        raise StoreBusy("the store is busy: another process holds its lock (database is "
                        "locked); run again when it has finished")

    monkeypatch.setattr(miner, "resolve_links", busy)
    failed = _mine_one(str(repo.path), "fw2", "sqlite:///" + str(tmp_path / "b.sqlite"),
                       MineOptions(progress=False))
    assert failed.exit_code == 6 and "database is locked" in failed.message


def test_a_failure_after_the_run_completed_keeps_its_rows(three_repos, tmp_path: Path,
                                                          monkeypatch) -> None:
    """The flaky PostgreSQL run of the two-worker test, made certain: the deadlock
    struck *after* the run's final transaction (the planner statistics of two workers
    at once). The run was then marked failed, so its rows left the readers' view while
    the repository's tip had moved; the retry mined nothing new and the repository
    ended with 0 visible commits and ``ok`` results. A completed run now stays
    complete. Oracle: ``git rev-list --count`` and a clean run of the same repository."""
    from procmetrics.errors import StoreBusy
    from procmetrics.mine.multi import _mine_one
    from procmetrics.store.runbook import RunBook

    repo = three_repos[1]
    real = RunBook.complete_run
    calls = {"n": 0}

    def then_deadlock(self, *args, **kw):
        real(self, *args, **kw)
        calls["n"] += 1
        if calls["n"] == 1:
            raise StoreBusy("the store is busy: another process holds its lock "
                            "(deadlock detected); run again when it has finished")

    monkeypatch.setattr(RunBook, "complete_run", then_deadlock)
    url = "sqlite:///" + str(tmp_path / "late.sqlite")
    got = _mine_one(str(repo.path), "fw", url, MineOptions(progress=False))
    assert calls["n"] == 2 and got.repo == "fw"
    engine = open_store(url)
    try:
        commits = read_table(engine, "commits", "fw")
        assert len(commits) == int(repo.git("rev-list", "--count", "HEAD").strip())
        runs = read_table(engine, "mining_runs")
        assert list(runs["status"]) == ["complete", "complete"]
        assert list(runs["n_commits"]) == [len(commits), 0]     # the retry found no work
        clean = tmp_path / "clean.sqlite"
        monkeypatch.setattr(RunBook, "complete_run", real)
        mine_repository(repo.path, store=clean, options=MineOptions(progress=False,
                                                                    repo_name="fw"))
        alone = open_store(clean)
        for t in ("commits", "file_changes", "trailers", "fix_links"):
            pd.testing.assert_frame_equal(read_table(engine, t).reset_index(drop=True),
                                          read_table(alone, t).reset_index(drop=True),
                                          check_dtype=False, obj=t)
        alone.dispose()
    finally:
        engine.dispose()
