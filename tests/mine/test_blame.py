"""Blame of fix commits and tag ancestry on a tiny history built here; read-only checks."""
from __future__ import annotations

import hashlib
import os
import subprocess
from pathlib import Path

import pandas as pd
import pytest

from procmetrics.analyse.lifetimes.defects import build_defects
from procmetrics.analyse.lifetimes.szz import FAILURE_MODES, as_fix_links, szz_candidates
from procmetrics.mine.ancestry import tag_containment
from procmetrics.mine.blame import blame_fixes


def _git(repo: Path, *args: str, date: str | None = None) -> str:
    env = {k: v for k, v in os.environ.items() if not k.startswith("GIT_")}
    env.update({"GIT_CONFIG_GLOBAL": "/dev/null", "GIT_CONFIG_NOSYSTEM": "1",
                "GIT_AUTHOR_NAME": "Ada Example", "GIT_AUTHOR_EMAIL": "ada@example.org",
                "GIT_COMMITTER_NAME": "Ada Example", "GIT_COMMITTER_EMAIL": "ada@example.org"})
    if date:
        env.update({"GIT_AUTHOR_DATE": date, "GIT_COMMITTER_DATE": date})
    return subprocess.run(["git", "-C", str(repo), *args], check=True, capture_output=True,
                          env=env, text=True).stdout.strip()


def _commit(repo: Path, files: dict[str, str], msg: str, date: str) -> str:
    for name, text in files.items():
        (repo / name).parent.mkdir(parents=True, exist_ok=True)
        (repo / name).write_text(text)
    _git(repo, "add", "-A")
    _git(repo, "commit", "-q", "-m", msg, date=date)
    return _git(repo, "rev-parse", "HEAD")


@pytest.fixture
def history(tmp_path: Path) -> dict[str, str]:
    repo = tmp_path / "widget"
    repo.mkdir()
    _git(repo, "init", "-q", "-b", "main")
    h = {"repo": str(repo)}
    base = "".join(f"line {i}\n" for i in range(1, 11))
    h["a"] = _commit(repo, {"src/calc.c": base}, "calc: first version", "2023-01-01T10:00:00+00:00")
    _git(repo, "tag", "v1")
    bug = base.replace("line 5\n", "line 5 off-by-one\n")
    h["b"] = _commit(repo, {"src/calc.c": bug}, "calc: faster loop", "2023-01-10T10:00:00+00:00")
    # a whitespace-only reformat of line 5 must not steal the blame (-w)
    h["w"] = _commit(repo, {"src/calc.c": bug.replace("line 5 off-by-one", "line 5  off-by-one")},
                     "calc: reformat", "2023-01-15T10:00:00+00:00")
    _git(repo, "tag", "-a", "v2", "-m", "release 2", date="2023-01-16T00:00:00+00:00")
    fixed = base.replace("line 5\n", "line 5 correct\n")
    h["fix"] = _commit(repo, {"src/calc.c": fixed}, f"calc: fix bound\n\nFixes: {h['b'][:12]}",
                       "2023-02-01T10:00:00+00:00")
    h["add"] = _commit(repo, {"src/calc.c": fixed + "check added\n"}, "calc: add check",
                       "2023-02-05T10:00:00+00:00")
    _git(repo, "tag", "v3")
    return h


def _snapshot(repo: Path) -> str:
    """Digest of everything under .git except objects git may pack on its own."""
    dig = hashlib.sha256()
    for p in sorted((repo / ".git").rglob("*")):
        if p.is_file():
            dig.update(str(p.relative_to(repo)).encode())
            dig.update(p.read_bytes())
    return dig.hexdigest()


def test_blame_finds_the_introducer_and_never_writes(history):
    repo = Path(history["repo"])
    before = _snapshot(repo)
    run = blame_fixes(repo, [history["fix"], history["add"], history["a"]])
    assert _snapshot(repo) == before          # read-only, .git/config untouched
    rows = run.rows[run.rows["fix_hash"] == history["fix"]]
    # oracle: plain `git blame -w` on the parent for line 5
    ref = _git(repo, "blame", "-w", "--porcelain", "-L", "5,5", f"{history['fix']}^", "--",
               "src/calc.c").split()[0]
    assert list(rows["blamed_hash"]) == [ref] == [history["b"]]
    assert list(rows["line"]) == [5] and list(rows["path"]) == ["src/calc.c"]
    assert run.added_only == (history["add"],)
    assert run.skipped_roots == (history["a"],)


def test_without_ignore_whitespace_the_reformat_is_blamed(history):
    run = blame_fixes(history["repo"], [history["fix"]], ignore_whitespace=False)
    assert list(run.rows["blamed_hash"]) == [history["w"]]


def test_tag_containment_matches_merge_base(history):
    repo = Path(history["repo"])
    commits = [history[k] for k in ("a", "b", "fix")]
    for tags in (None, ["v1", "v2", "v3"], ["v2"]):      # both strategies
        df = tag_containment(repo, commits, tags)
        for row in df.itertuples():
            # oracle: git merge-base --is-ancestor
            rc = subprocess.run(["git", "-C", str(repo), "merge-base", "--is-ancestor",
                                 row.commit_hash, f"refs/tags/{row.tag}^{{commit}}"],
                                capture_output=True).returncode
            assert row.contains == (rc == 0)
    df = tag_containment(repo, commits)
    assert len(df) == 9


def test_szz_candidates_and_release_lifetime(history):
    repo = Path(history["repo"])
    log = _git(repo, "log", "--format=%H %cI %aI")
    commits = pd.DataFrame([{"repo": "widget", "hash": h, "committer_date": pd.Timestamp(c),
                             "author_date": pd.Timestamp(a)}
                            for h, c, a in (ln.split() for ln in log.splitlines())])
    run = blame_fixes(repo, [history["fix"], history["add"]])
    explicit = pd.DataFrame({"fix_hash": [history["fix"]], "introducer_hash": [history["b"]],
                             "status": ["resolved"]})
    res = szz_candidates(run.rows, commits, n_fixes=run.n_fixes, unblamable=len(run.added_only),
                         explicit_links=explicit)
    assert list(res.links["introducer_hash"]) == [history["b"]]
    assert res.agreement["recall"] == 1.0 and res.n_unblamable == 1
    assert any(c.code == "heuristic_classification" for c in res.caveats)
    assert len(FAILURE_MODES) >= 5
    links = as_fix_links(res, commits)
    cont = tag_containment(repo, [history["b"], history["fix"]])
    t = build_defects(links, basis="releases", tag_containment=cont, links_from=None)
    # b is in v2 and v3; the fix only in v3: one release shipped with the defect
    assert t.defects["lifetime"].tolist() == [1.0]
