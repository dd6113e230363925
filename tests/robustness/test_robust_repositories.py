"""What the miner does with odd or broken repositories and a missing or old git.

Every failure must be one ``procmetrics: error:`` line and a documented exit code
(3 for repository and git problems); oracles are plain git plumbing.
"""
from __future__ import annotations

import os
import shutil
import stat
import subprocess
from pathlib import Path

import pytest

from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from tests.git_support import BOB, when

from tests.robustness.robust_support import (assert_one_line_error, integrity_ok, run_procmetrics,
                                              tidy_tables)


def _small(h):
    h.commit("a: one\n", files={"a/x.txt": "1\n"}, date=when(0), name="one")
    h.commit("a: two\n\nFixes: " + h.rev()[:12] + "\n", files={"a/x.txt": "1\n2\n"},
             author=BOB, date=when(1, "-0300"), name="two")
    h.commit("b: three\n", files={"b/y.txt": "3\n"}, date=when(2), name="three")
    return h


def _count(h, *args) -> int:
    return int(h.git("rev-list", "--count", *args))


def test_not_a_repository(cli, tmp_path):
    (tmp_path / "plain").mkdir()
    r = cli("mine", tmp_path / "plain", "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "not a git repository")
    (tmp_path / "file.txt").write_text("x")
    r = cli("mine", tmp_path / "file.txt", "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "no such folder")
    r = cli("mine", tmp_path / "missing", "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "no such folder")


def test_bare_repository_is_mined_like_its_source(cli, git_history, tmp_path):
    h = _small(git_history())
    bare = tmp_path / "bare.git"
    subprocess.run(["git", "clone", "-q", "--bare", str(h.path), str(bare)], check=True,
                   env=h.env)
    r = cli("mine", bare, "--store", tmp_path / "b.sqlite", "--repo-name", "r")
    assert r.code == 0, r.err
    assert cli("mine", h.path, "--store", tmp_path / "w.sqlite", "--repo-name", "r").code == 0
    commits = read_table(open_store(tmp_path / "b.sqlite"), "commits")
    assert len(commits) == _count(h, "HEAD")          # oracle: git rev-list
    b, w = tidy_tables(tmp_path / "b.sqlite"), tidy_tables(tmp_path / "w.sqlite")
    for name in ("commits", "file_changes", "fix_links", "trailers"):
        assert b[name].equals(w[name]), name


def test_empty_repository(cli, git_history, tmp_path):
    h = git_history()
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "no commits yet")


def test_unknown_ref_and_option_like_ref(cli, git_history, tmp_path):
    h = _small(git_history())
    r = cli("mine", h.path, "--ref", "no-such-branch", "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "no-such-branch", "does not name a commit")
    target = tmp_path / "written-by-git"
    r = cli("mine", h.path, f"--ref=--output={target}", "--store", tmp_path / "s.sqlite")
    assert r.code == 2
    assert_one_line_error(r.err, "not a usable ref")
    assert not target.exists()


def test_shallow_clone_warns_loudly_and_is_recorded(cli, git_history, tmp_path):
    h = _small(git_history())
    shallow = tmp_path / "shallow"
    subprocess.run(["git", "clone", "-q", "--depth", "2", f"file://{h.path}", str(shallow)],
                   check=True, env=h.env, capture_output=True)
    with pytest.warns(Warning, match="shallow clone"):
        r = cli("mine", shallow, "--store", tmp_path / "s.sqlite")
    assert r.code == 0, r.err
    # the README's documented line, once, in the one-line warning format
    assert [ln for ln in r.err.splitlines() if "shallow" in ln] == \
        [ln for ln in r.err.splitlines() if ln.startswith("procmetrics: warning: shallow clone: ")]
    assert r.err.count("shallow clone") == 1
    engine = open_store(tmp_path / "s.sqlite")
    runs = read_table(engine, "mining_runs")
    assert runs["is_shallow"].tolist() == [True]
    assert read_table(engine, "repositories")["is_shallow"].tolist() == [True]
    assert len(read_table(engine, "commits")) == 2


def test_replace_refs_and_grafts_are_ignored(git_history, tmp_path, cli):
    """The stored parents are the ones written in the commit objects (oracle: cat-file)."""
    h = _small(git_history())
    assert cli("mine", h.path, "--store", tmp_path / "before.sqlite", "--repo-name", "r").code == 0
    ids = h.ids
    h.git("replace", ids["two"], ids["one"])                       # hides "two"
    (h.path / ".git" / "info").mkdir(exist_ok=True)
    (h.path / ".git" / "info" / "grafts").write_text(ids["three"] + "\n")   # cuts the past
    assert _count(h, "HEAD") == 1                                   # git itself is fooled
    r = cli("mine", h.path, "--store", tmp_path / "after.sqlite", "--repo-name", "r")
    assert r.code == 0, r.err
    parents = read_table(open_store(tmp_path / "after.sqlite"), "commits")
    assert len(parents) == 3
    obj = h.git("cat-file", "-p", ids["three"], env={"GIT_NO_REPLACE_OBJECTS": "1"})
    assert f"parent {ids['two']}" in obj
    before, after = tidy_tables(tmp_path / "before.sqlite"), tidy_tables(tmp_path / "after.sqlite")
    for name in ("commits", "file_changes", "fix_links"):
        assert before[name].equals(after[name]), name


def _loose(h, oid: str) -> Path:
    return h.path / ".git" / "objects" / oid[:2] / oid[2:]


def test_missing_blob_mines_on_without_line_counts_for_that_commit(git_history, tmp_path,
                                                                   cli):
    """A full clone lacking one blob: mined on; the commit whose file content is absent
    gets no line counts (counted, warned about in one line, recorded on the run); every
    other commit's line counts equal git's own numstat (oracle)."""
    h = _small(git_history())
    blob = h.git("rev-parse", f"{h.ids['two']}:a/x.txt")
    _loose(h, blob).unlink()
    store = tmp_path / "s.sqlite"
    r = cli("mine", h.path, "--store", store)
    assert r.code == 0, r.err
    warned = [ln for ln in r.err.splitlines() if "line counts missing" in ln]
    assert len(warned) == 1 and warned[0].startswith("procmetrics: warning: ")
    assert "for 1 commit(s)" in warned[0] and blob in warned[0] and h.ids["two"][:12] in warned[0]
    assert integrity_ok(store)
    engine = open_store(store)
    run = read_table(engine, "mining_runs").iloc[-1]
    assert run["status"] == "complete" and "line counts missing for 1 commit" in run["message"]
    from procmetrics.analyse.measures.quality import history_state
    from procmetrics.store.repodata import load_store_data
    assert len(history_state(load_store_data(engine, "repo"))["line_counts_missing"]) == 1
    fc = read_table(engine, "file_changes")
    assert len(read_table(engine, "commits")) == 3
    assert fc.loc[fc["hash"] == h.ids["two"], "lines_added"].isna().all()
    for name in ("one", "three"):
        want = h.git("log", "-1", "--numstat", "--format=", h.ids[name]).split()
        got = fc[fc["hash"] == h.ids[name]]
        assert [int(want[0]), int(want[1]), want[2]] == \
            [int(got["lines_added"].iloc[0]), int(got["lines_deleted"].iloc[0]),
             got["path"].iloc[0]]
    # without line counts no blob is read: the history is complete
    r = cli("mine", h.path, "--store", tmp_path / "paths.sqlite", "--no-line-counts")
    assert r.code == 0, r.err
    assert len(read_table(open_store(tmp_path / "paths.sqlite"), "commits")) == 3


def test_a_missing_object_is_named_with_its_commit_path_and_remedy(git_history):
    """When git stops on an object it cannot read and mining cannot go on, the message
    names the object, the commit and path it belongs to and the remedies."""
    from procmetrics.mine.git import GitRepo
    from procmetrics.mine.options import MineOptions
    from procmetrics.mine.partial import explain_missing_object
    h = _small(git_history())
    blob = h.git("rev-parse", f"{h.ids['two']}:a/x.txt")
    _loose(h, blob).unlink()
    git = GitRepo.open(h.path)
    msg = explain_missing_object(git, h.rev(), f"git log failed (exit 128): fatal: unable "
                                 f"to read {blob}", MineOptions())
    for needle in (blob, "'a/x.txt'", h.ids["two"][:12], "--no-line-counts",
                   "repair the clone"):
        assert needle in msg, msg


def test_missing_tree_or_commit_fails_clearly(git_history, tmp_path, cli):
    h = _small(git_history())
    _loose(h, h.git("rev-parse", "HEAD^{tree}")).unlink()
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite", "--no-line-counts")
    assert r.code == 3
    assert_one_line_error(r.err, "unable to read tree")
    h2 = _small(git_history("other"))
    _loose(h2, h2.ids["one"]).unlink()
    r = cli("mine", h2.path, "--store", tmp_path / "s2.sqlite", "--no-line-counts")
    assert r.code == 3
    assert_one_line_error(r.err, "failed (exit 128)", "parents of commit")


def _raw_paths(repo: Path, env: dict) -> set[tuple[str, str]]:
    """(commit, path) of every raw diff entry of every non-merge commit with exact-content
    rename detection (oracle: plain git plumbing on the full repository)."""
    out = subprocess.run(["git", "-C", str(repo), "log", "-z", "--raw", "--no-merges",
                          "--no-abbrev", "-M100%", "--format=%x01%H", "main", "--"],
                         env=env, capture_output=True, check=True).stdout.split(b"\0")
    pairs, commit, i = set(), None, 0
    while i < len(out):
        f = out[i]
        if b"\x01" in f:
            head = f.split(b"\x01", 1)[1].split(b"\n")
            commit, f = head[0].decode(), b"\n".join(head[1:])
        f = f.lstrip(b"\n")                  # "<header>\0\n:<raw line>\0<path>\0"
        if f.startswith(b":"):
            n = 2 if f.split()[-1][:1] in (b"R", b"C") else 1
            pairs.add((commit, out[i + n].decode("utf-8", "surrogateescape")))
            i += n + 1
            continue
        i += 1
    return pairs


@pytest.mark.timeout(120)
def test_partial_clone_is_mined_paths_only_and_never_fetches(git_history, tmp_path, cli):
    """A blob-less partial clone (git clone --filter=blob:none of a local fixture): mined
    paths only (no line counts; renames only where the content is identical; the absent
    .mailmap and MAINTAINERS skipped with warnings), the mode recorded and flagged for the
    report; git fetches nothing (GIT_NO_LAZY_FETCH, no transport) and the clone is
    unchanged. Oracle: git log --raw -M100% on the full repository."""
    h = git_history("src")
    h.commit("init\n", files={"MAINTAINERS": "CORE\nF:\tcore/\n", ".mailmap":
                              "Alice Example <alice@example.org> <old@example.org>\n",
                              "core/a.c": "a\n" * 50, "core/b.c": "b\n" * 50},
             author=("Old Name", "old@example.org"), date=when(0))
    h.git("mv", "core/a.c", "core/a2.c")                      # identical content
    h.commit("rename a\n", date=when(1))
    h.git("mv", "core/b.c", "core/b2.c")                      # renamed and edited
    h.commit("rename and edit b\n", files={"core/b2.c": "b\n" * 49 + "x\n"}, date=when(2))
    env = {k: v for k, v in os.environ.items() if not k.startswith("GIT_")}
    env.update(GIT_CONFIG_NOSYSTEM="1", GIT_CONFIG_GLOBAL="/dev/null")
    server = tmp_path / "server.git"
    subprocess.run(["git", "clone", "-q", "--bare", str(h.path), str(server)], check=True,
                   env=env)
    subprocess.run(["git", "-C", str(server), "config", "uploadpack.allowFilter", "true"],
                   check=True, env=env)
    part = tmp_path / "part"
    subprocess.run(["git", "clone", "-q", "--no-checkout", "--filter=blob:none",
                    f"file://{server}", str(part)], check=True, env=env, capture_output=True)

    def objects() -> str:
        return subprocess.run(["git", "-C", str(part), "count-objects", "-v"], env=env,
                              capture_output=True, text=True, check=True).stdout
    before = objects()
    store = tmp_path / "s.sqlite"
    r = cli("mine", part, "--store", store)
    assert r.code == 0, r.err
    assert objects() == before                                  # nothing fetched
    warned = [ln for ln in r.err.splitlines() if ln.startswith("procmetrics: warning: partial")]
    assert len(warned) == 3 and "paths only" in warned[0] and ".mailmap" in warned[1] \
        and "MAINTAINERS" in warned[2], r.err
    engine = open_store(store)
    fc = read_table(engine, "file_changes")
    assert set(zip(fc["hash"], fc["path"])) == _raw_paths(h.path, env)
    assert fc["lines_added"].isna().all()
    commits = read_table(engine, "commits")
    assert set(commits["author_email"]) == {"old@example.org", "alice@example.org"}
    run = read_table(engine, "mining_runs").iloc[-1]
    assert "partial clone" in run["message"] and '"line_counts": false' in run["options_json"]
    from procmetrics.analyse.measures.quality import history_state
    from procmetrics.store.repodata import load_store_data
    data = load_store_data(engine, "part")
    assert history_state(data)["is_partial_clone"] is True
    engine.dispose()


def _fake_git(folder: Path, version_line: str) -> str:
    folder.mkdir()
    exe = folder / "git"
    exe.write_text(f"#!/bin/sh\necho '{version_line}'\n")
    exe.chmod(exe.stat().st_mode | stat.S_IEXEC)
    return str(folder)


def test_git_missing_or_too_old(cli, git_history, tmp_path, monkeypatch):
    h = _small(git_history())
    monkeypatch.setenv("PATH", str(tmp_path / "empty-bin"))
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "git is not installed")
    monkeypatch.setenv("PATH", _fake_git(tmp_path / "old-bin", "git version 2.20.1"))
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "2.20.1 is too old")
    monkeypatch.setenv("PATH", _fake_git(tmp_path / "odd-bin", "not a version"))
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "cannot read git's version")


def test_unreadable_folder_is_named_not_called_a_non_repository(cli, git_history, tmp_path):
    """A clone this user may not read: 'permission denied', exit 3 (as a user without
    root's override: setpriv drops it in a child process)."""
    h = _small(git_history())
    os.chmod(h.path, 0)
    try:
        r = run_procmetrics("mine", h.path, "--store", tmp_path / "s.sqlite",
                            honour_permissions=True)
    finally:
        os.chmod(h.path, 0o755)
    assert r.returncode == 3, r.stderr
    assert_one_line_error(r.stderr, "permission denied", str(h.path))
    assert "is not a git repository" not in r.stderr


def test_dubious_ownership_names_the_exact_remedy(cli, git_history, tmp_path, monkeypatch):
    """git versions that ignore a command-line safe.directory refuse a clone owned by
    another user; the message carries git's reason and the exact command that allows it.
    (A wrapper stands in for such a git: it answers rev-parse with git's own refusal.)"""
    h = _small(git_history())
    real = shutil.which("git")
    folder = tmp_path / "strict-bin"
    folder.mkdir()
    exe = folder / "git"
    exe.write_text("#!/bin/sh\ncase \"$*\" in *rev-parse*)\n"
                   f"  echo \"fatal: detected dubious ownership in repository at '{h.path}'\" >&2\n"
                   "  exit 128;;\nesac\n"
                   f"exec {real} \"$@\"\n")
    exe.chmod(0o755)
    monkeypatch.setenv("PATH", f"{folder}{os.pathsep}{os.environ['PATH']}")
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite")
    assert r.code == 3
    assert_one_line_error(r.err, "dubious ownership",
                          f"git config --global --add safe.directory {h.path}")


def test_default_store_is_never_written_inside_the_mined_repository(git_history, tmp_path,
                                                                     monkeypatch):
    """`cd clone && procmetrics mine .` would create procmetrics.sqlite (and its lock) in
    the work tree: refused with exit 2 and the reason; the work tree stays clean. An
    explicit --store inside the repository (or its .git) is refused the same way."""
    h = _small(git_history())
    before = h.git("status", "--porcelain", "--ignored")
    files = sorted(p.name for p in h.path.iterdir())
    monkeypatch.chdir(h.path)
    monkeypatch.delenv("PROCMETRICS_STORE", raising=False)
    for argv in (["mine", "."], ["mine", ".", "--store", str(h.path / ".git" / "s.sqlite")],
                 ["mine", str(h.path), str(tmp_path), "--store", str(h.path / "x.sqlite")]):
        r = run_procmetrics(*argv, cwd=h.path)
        assert r.returncode == 2, r.stderr
        assert_one_line_error(r.stderr, "inside the mined repository", "--store")
    assert sorted(p.name for p in h.path.iterdir()) == files
    assert h.git("status", "--porcelain", "--ignored") == before
    assert not list((h.path / ".git").glob("s.sqlite*"))


def test_a_new_subsystem_rules_file_needs_remine(git_history, tmp_path, cli):
    """Re-mining with a rules file the store was not mapped with would remap every stored
    commit: exit 2 naming --rewrite-policy remine, store unchanged; with remine it maps
    again (with a warning); the same rules from another path are accepted."""
    h = _small(git_history())
    store = tmp_path / "s.sqlite"
    assert cli("mine", h.path, "--store", store).code == 0
    before = read_table(open_store(store), "commit_subsystems")
    rules = tmp_path / "rules.toml"
    rules.write_text('[subsystems]\nalpha = "a/"\n')
    h.commit("a: more\n", files={"a/new.txt": "n\n"}, date=when(40))
    r = cli("mine", h.path, "--store", store, "--subsystem-rules", rules)
    assert r.code == 2
    assert_one_line_error(r.err, "subsystem mapping would change", "--rewrite-policy remine")
    pd_equal = read_table(open_store(store), "commit_subsystems").equals(before)
    assert pd_equal
    with pytest.warns(Warning, match="mapped again"):
        r = cli("mine", h.path, "--store", store, "--subsystem-rules", rules,
                "--rewrite-policy", "remine")
    assert r.code == 0, r.err
    fresh = tmp_path / "fresh.sqlite"           # oracle: a first run with the rules
    assert cli("mine", h.path, "--store", fresh, "--subsystem-rules", rules).code == 0
    got = read_table(open_store(store), "commit_subsystems")
    want = read_table(open_store(fresh), "commit_subsystems")
    assert "alpha" in set(got["subsystem"])
    assert sorted(map(tuple, got[["hash", "subsystem"]].to_numpy())) == \
        sorted(map(tuple, want[["hash", "subsystem"]].to_numpy()))
    moved = tmp_path / "elsewhere.toml"
    moved.write_text(rules.read_text())
    assert cli("mine", h.path, "--store", store, "--subsystem-rules", moved).code == 0


def test_promisor_packs_with_every_blob_are_mined_as_a_full_clone(git_history, tmp_path, cli):
    """A mirror kept in promisor packs whose blobs are all present (as some mirroring
    tools leave them) is a full clone: line counts are mined, no partial-clone warning.
    Only missing blobs at the tip (rev-list --missing=print) make a clone partial."""
    h = _small(git_history())
    h.git("repack", "-adq")
    pack = next((h.path / ".git" / "objects" / "pack").glob("*.pack"))
    pack.with_suffix(".promisor").write_text("")
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite")
    assert r.code == 0, r.err
    assert "partial clone" not in r.err
    fc = read_table(open_store(tmp_path / "s.sqlite"), "file_changes")
    assert fc["lines_added"].notna().all()
