"""Interrupted runs (SIGINT, SIGTERM, SIGKILL at seeded moments) and rewritten history.

Oracle: the tidy tables of one clean, uninterrupted run, and SQLite's integrity check.
"""
from __future__ import annotations

import random
import signal
import sqlite3
import subprocess
import time
from pathlib import Path

import pytest

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from tests.git_support import BOB, when
from tests.robustness.robust_support import (
    ROOT, assert_one_line_error, assert_same_tables, integrity_ok, small_batch_argv,
    subprocess_env, tidy_tables,
)

TRIALS = [  # (signal, base ref mined first or None); kill points come from a seeded generator
    (signal.SIGKILL, None), (signal.SIGINT, None), (signal.SIGTERM, None),
    (signal.SIGKILL, "v2.0"), (signal.SIGINT, "v2.0"),
]


@pytest.fixture(scope="module")
def clean(aurora, tmp_path_factory) -> dict:
    store = tmp_path_factory.mktemp("clean") / "clean.sqlite"
    mine_repository(aurora, store=store, options=MineOptions(progress=False))
    return tidy_tables(store)


def _loaded(store: Path) -> int | None:
    """Commits the running run has stored so far (None before the run has started)."""
    if not store.exists():
        return None
    try:
        con = sqlite3.connect(f"file:{store}?mode=ro", uri=True, timeout=0.2)
        try:
            row = con.execute("SELECT max(run_id) FROM mining_run WHERE status='running'"
                              ).fetchone()
            if row is None or row[0] is None:
                return None
            return con.execute("SELECT count(*) FROM git_commit WHERE run_id=?",
                               (row[0],)).fetchone()[0]
        finally:
            con.close()
    except sqlite3.Error:
        return None


@pytest.mark.slow
@pytest.mark.timeout(300)
def test_interrupted_runs_resume_to_the_clean_store(aurora, clean, tmp_path):
    """Kill ``procmetrics mine`` (batches of 40 commits) once it has stored a seeded
    number of commits; the store stays consistent and the next run ends with the
    clean store."""
    tags = subprocess.run(["git", "-C", str(aurora), "tag"], capture_output=True, text=True,
                          check=True).stdout.split()
    rng = random.Random(20261201)
    outcomes = []
    for i, (sig, base) in enumerate(TRIALS):
        store = tmp_path / f"t{i}.sqlite"
        if base is not None:
            assert base in tags
            mine_repository(aurora, store=store, options=MineOptions(progress=False, ref=base))
        total = len(clean["commits"])
        stored_before = 0 if base is None else int(subprocess.run(
            ["git", "-C", str(aurora), "rev-list", "--count", base], capture_output=True,
            text=True, check=True).stdout)
        proc = subprocess.Popen(small_batch_argv(40, "mine", aurora, "--store", store),
                                cwd=ROOT, env=subprocess_env(), stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE, text=True)
        # kill once the run has stored at least `after` commits (seeded): mid-load for
        # most trials; `after` = everything loaded lands in resolution/tags/mapping
        after = rng.choice([rng.randrange(0, 1200), rng.randrange(0, 1200), total])
        target = min(after, total - stored_before)
        while proc.poll() is None:
            loaded = _loaded(store)
            if loaded is not None and loaded >= target:
                break
            time.sleep(0.01)
        if proc.poll() is None:
            proc.send_signal(sig)
        code = proc.wait(timeout=120)
        err = proc.stderr.read()
        proc.stderr.close()
        assert "Traceback" not in err, err
        if code == 130:         # SIGINT inside main(): one line, no traceback
            assert err.strip().splitlines()[-1] == "procmetrics: interrupted", err
        else:                   # finished first, or a signal's default action
            assert code in (0, -sig), (sig.name, code, err)
        assert integrity_ok(store)
        status = read_table(open_store(store), "mining_runs")["status"].tolist()
        interrupted = status[-1] != "complete"
        outcomes.append((sig.name, code, interrupted))
        s = mine_repository(aurora, store=store, options=MineOptions(progress=False))
        assert len(s.cleaned_runs) == int(interrupted), outcomes
        assert_same_tables(tidy_tables(store), clean)
        runs = read_table(open_store(store), "mining_runs")
        assert runs["status"].iloc[-1] == "complete"
        assert "running" not in set(runs["status"])
    # the seeded delays must really interrupt runs, not only find them finished
    assert sum(interrupted for _, _, interrupted in outcomes) >= 4, outcomes


def _small(h):
    h.commit("a: one\n", files={"a/x.txt": "1\n"}, date=when(0), name="one")
    h.commit("a: two\n\nFixes: " + h.rev()[:12] + "\n", files={"a/x.txt": "2\n"},
             author=BOB, date=when(1), name="two")
    h.commit("b: three\n", files={"b/y.txt": "3\n"}, date=when(2), name="three")
    return h


@pytest.mark.parametrize("rewrite", ["amend", "reset-and-new"])
def test_rewritten_history_is_detected_and_remined_on_request(git_history, tmp_path, cli,
                                                              rewrite):
    h = _small(git_history())
    store = tmp_path / "s.sqlite"
    assert cli("mine", h.path, "--store", store, "--repo-name", "r").code == 0
    if rewrite == "amend":
        h.git("commit", "-q", "--amend", "-m", "b: three, reworded",
              env={"GIT_COMMITTER_DATE": when(3), "GIT_AUTHOR_DATE": when(2),
                   "GIT_COMMITTER_NAME": "Bob Sample", "GIT_COMMITTER_EMAIL": "bob@example.net"})
    else:
        h.git("reset", "-q", "--hard", h.ids["one"])
        h.commit("c: other line\n", files={"c/z.txt": "z\n"}, date=when(4))
    before = tidy_tables(store)
    r = cli("mine", h.path, "--store", store, "--repo-name", "r")
    assert r.code == 4
    assert_one_line_error(r.err, "rewritten", "--rewrite-policy remine")
    assert_same_tables(tidy_tables(store), before)     # nothing added, nothing lost
    assert integrity_ok(store)
    r = cli("mine", h.path, "--store", store, "--repo-name", "r", "--rewrite-policy", "remine")
    assert r.code == 0, r.err
    fresh = tmp_path / "fresh.sqlite"
    assert cli("mine", h.path, "--store", fresh, "--repo-name", "r").code == 0
    assert_same_tables(tidy_tables(store), tidy_tables(fresh))
    n = int(h.git("rev-list", "--count", "HEAD"))
    assert len(read_table(open_store(store), "commits")) == n      # no duplicates
