"""The scope selection is the same SQL on PostgreSQL as on SQLite (the other database is
the oracle; git's count is the outer one)."""
from __future__ import annotations

import pytest

from procmetrics.scope.apply import ScopeRequest
from procmetrics.store import open_store
from procmetrics.store.repodata import load_store_data
from tests.pg_support import pg_url  # noqa: F401 - fixture
from tests.scope.scope_support import git


def _history(path):
    path.mkdir()
    git(path, "init", "-q", "-b", "main")
    steps = [({"src/a.c": "1", "src/b.h": "1", "doc/x.md": "1"}, None),
             ({"src/a.c": "2"}, None), ({"doc/x.md": "2"}, None),
             (None, ("src/b.h", "inc/b.h")), ({"inc/b.h": "3", "doc/y.md": "1"}, None)]
    for day, (files, mv) in enumerate(steps, 1):
        if files:
            for f, text in files.items():
                (path / f).parent.mkdir(parents=True, exist_ok=True)
                (path / f).write_text(text + "\n")
        if mv:
            (path / mv[1]).parent.mkdir(parents=True, exist_ok=True)
            git(path, "mv", *mv)
        git(path, "add", "-A")
        git(path, "-c", "user.name=Ada Test", "-c", "user.email=ada@example.invalid", "commit",
            "-q", "-m", f"step {day}", "--date", f"2024-02-{day:02d}T10:00:00+0000")


@pytest.mark.postgres
def test_postgres_selects_what_sqlite_and_git_select(tmp_path, pg_url):  # noqa: F811
    from procmetrics.mine import MineOptions, mine_repository

    repo = tmp_path / "r"
    _history(repo)
    scopes = tmp_path / "s.toml"
    scopes.write_text('[scope.code]\ninclude = ["src/**", "**/*.h"]\nexclude = ["inc/**"]\n')
    got = {}
    for url in (pg_url, "sqlite:///" + str(tmp_path / "s.sqlite")):
        mine_repository(repo, store=url, options=MineOptions(progress=False))
        engine = open_store(url, create=False, readonly=True)
        try:
            d = load_store_data(engine, "r", within=ScopeRequest(str(scopes)))
        finally:
            engine.dispose()
        got[url.split(":")[0].split("+")[0]] = (tuple(sorted(d["commits"]["subject"])),
                                                d.scope.n_paths, d.scope.line_share)
    want = git(repo, "log", "--format=%s", "--full-history", "--no-merges", "--",
               ":(glob)src/**", ":(glob)**/*.h", ":(exclude,glob)inc/**").split("\n")
    assert len(set(got.values())) == 1, got
    assert got["sqlite"][0] == tuple(sorted(w for w in want if w))
    # the rename src/b.h -> inc/b.h touches src/b.h: in scope
    assert "step 4" in got["sqlite"][0] and "step 5" not in got["sqlite"][0]
