"""Untrusted repositories: their content is data, never code, and nothing is written.

The hostile repository below configures every program-starting hook we know of in
git (each would write a sentinel file when run); mining it with line counts must
start none of them, leave every byte under the repository unchanged and never
touch the user's home. The trap is checked live first (plain ``git`` does run it),
so the test cannot pass merely because the trap is broken.
"""
from __future__ import annotations

import ast
import os
import re
import subprocess
from pathlib import Path

import pytest

from procmetrics.errors import GitFailed
from procmetrics.mine.blame import blame_fixes
from procmetrics.mine.git import GitRepo
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from tests.git_support import when
from tests.robustness.robust_support import (
    ROOT, run_procmetrics, subprocess_env, tree_digest,
)

HOOKS = ("pre-commit", "post-checkout", "post-merge", "pre-push", "reference-transaction",
         "post-index-change", "pre-auto-gc", "fsmonitor-watchman", "post-rewrite")


def _evil_script(folder: Path, sentinels: Path) -> Path:
    script = folder / "evil.sh"
    script.write_text(f"#!/bin/sh\necho \"$0 $*\" >> {sentinels}/ran-$$\n"
                      "exit 0\n")
    script.chmod(0o755)
    return script


def build_hostile(h, tmp_path: Path) -> tuple[Path, Path]:
    """Commit some history, then arm the repository. Returns (sentinel dir, script)."""
    sentinels = tmp_path / "sentinels"
    sentinels.mkdir()
    tools = tmp_path / "tools"
    tools.mkdir()
    script = _evil_script(tools, sentinels)
    h.commit("core: start\n", files={"core/a.c": "a\n", "README": "r\n"}, date=when(0))
    h.commit("core: more\n\nFixes: " + h.rev()[:12] + "\n",
             files={"core/a.c": "a\nb\n", "data.bin": b"\0\1\2",
                    ".gitattributes": "* diff=evil filter=evil merge=evil\n"},
             date=when(1))
    blob = h.git("rev-parse", "HEAD:core/a.c")
    h.commit("docs: add\n", files={"docs/x.md": "x\n"}, date=when(2))
    h.commit("core: fix the first line\n", files={"core/a.c": "A\nb\n"}, date=when(3),
             name="fix")
    # .mailmap pointing at an endless device (git >= 2.32 does not follow it in-tree)
    os.symlink("/dev/zero", h.path / ".mailmap")
    gitdir = h.path / ".git"
    other = tmp_path / "included.cfg"
    other.write_text(f"[core]\n\tfsmonitor = {script}\n[diff]\n\texternal = {script}\n")
    s = str(script)
    settings = [
        ("core.fsmonitor", s), ("core.pager", s), ("pager.log", s), ("pager.rev-list", s),
        ("diff.external", s), ("diff.evil.textconv", s), ("diff.evil.command", s),
        ("filter.evil.clean", s), ("filter.evil.smudge", s), ("filter.evil.process", s),
        ("filter.evil.required", "true"), ("merge.evil.driver", s),
        ("core.hooksPath", str(tools / "hooks")), ("core.sshCommand", s),
        ("core.gitProxy", s), ("credential.helper", f"!{s}"), ("gpg.program", s),
        ("gpg.ssh.program", s), ("log.showSignature", "true"),
        ("uploadpack.packObjectsHook", s), ("core.alternateRefsCommand", s),
        ("sequence.editor", s), ("core.editor", s), ("include.path", str(other)),
        ("remote.origin.url", f"ext::{s} %S"), ("remote.origin.promisor", "true"),
        ("extensions.partialClone", "origin"), ("core.repositoryFormatVersion", "1"),
        ("protocol.allow", "always"), ("protocol.ext.allow", "always"),
        ("mailmap.file", "/dev/zero"), ("blame.ignoreRevsFile", "/dev/zero"),
        ("diff.orderFile", "/dev/zero"),
    ]
    for key, value in settings:
        h.git("config", key, value)
    (gitdir / "info").mkdir(exist_ok=True)
    (gitdir / "info" / "attributes").write_text("* diff=evil filter=evil\n")
    for folder in (tools / "hooks", gitdir / "hooks"):
        folder.mkdir(exist_ok=True)
        for hook in HOOKS:
            (folder / hook).write_text(script.read_text())
            (folder / hook).chmod(0o755)
    # a missing blob: a lazy fetch from the promisor remote would run the ext:: command
    (gitdir / "objects" / blob[:2] / blob[2:]).unlink()
    return sentinels, script


@pytest.mark.timeout(120)
def test_hostile_repository_runs_nothing_and_stays_byte_identical(git_history, tmp_path):
    h = git_history()
    sentinels, _ = build_hostile(h, tmp_path)
    # the trap is live: plain git with this config starts the script
    subprocess.run(["git", "-C", str(h.path), "-c", "mailmap.file=/dev/null", "-c",
                    "diff.orderFile=/dev/null", "log", "-p", "-1", "--", "docs"], env=h.env,
                   capture_output=True, stdin=subprocess.DEVNULL, timeout=60)
    assert any(sentinels.iterdir()), "the trap did not fire with plain git"
    for p in sentinels.iterdir():
        p.unlink()
    home = tmp_path / "home"
    home.mkdir()
    before = tree_digest(h.path)
    env = subprocess_env(HOME=str(home), XDG_CONFIG_HOME=str(home / ".config"))
    store = tmp_path / "s.sqlite"
    with_lines = run_procmetrics("mine", h.path, "--store", store, env=env, timeout=100)
    # the blob is missing and must not be fetched: mined on, the commits needing it
    # without line counts (one warning line), nothing run
    assert with_lines.returncode == 0, with_lines.stderr
    assert "procmetrics: warning: line counts missing for" in with_lines.stderr
    paths_only = run_procmetrics("mine", h.path, "--store", tmp_path / "p.sqlite",
                                 "--no-line-counts", env=env, timeout=100)
    assert paths_only.returncode == 0, paths_only.stderr
    assert "Traceback" not in with_lines.stderr + paths_only.stderr
    # reading the missing blob directly is what makes git try a lazy fetch from the
    # promisor remote, whose ext:: URL and protocol.ext.allow=always would run the
    # script (blocked twice: GIT_NO_LAZY_FETCH and an empty GIT_ALLOW_PROTOCOL)
    with pytest.raises(GitFailed):
        GitRepo.open(h.path).blob_at("HEAD~1", "core/a.c")
    assert sorted(p.name for p in sentinels.iterdir()) == []
    assert tree_digest(h.path) == before
    assert list(home.iterdir()) == []
    commits = read_table(open_store(tmp_path / "p.sqlite"), "commits")
    assert len(commits) == 4


@pytest.mark.timeout(120)
def test_hostile_repository_with_all_objects_mines_line_counts(git_history, tmp_path):
    """The same traps without the missing blob: line counts are mined (git's own
    numstat is the oracle) and still nothing runs."""
    h = git_history()
    sentinels, _ = build_hostile(h, tmp_path)
    # restore the deleted blob from a clean re-hash of its content
    h.git("hash-object", "-w", "--stdin", "--no-filters", input=b"a\nb\n")
    for p in sentinels.iterdir():
        p.unlink()
    before = tree_digest(h.path)
    home = tmp_path / "home"
    home.mkdir()
    r = run_procmetrics("mine", h.path, "--store", tmp_path / "s.sqlite",
                        env=subprocess_env(HOME=str(home)), timeout=100)
    assert r.returncode == 0, r.stderr
    assert list(sentinels.iterdir()) == []
    assert tree_digest(h.path) == before
    assert list(home.iterdir()) == []
    fc = read_table(open_store(tmp_path / "s.sqlite"), "file_changes")
    got = fc[fc["path"] == "core/a.c"].sort_values("lines_added")["lines_added"].tolist()
    assert got == [1, 1, 1]     # core/a.c: one line added in each of three commits
    # the optional blame pass reads the same repository: nothing runs, nothing hangs
    run = blame_fixes(h.path, [h.ids["fix"]])
    assert run.failed == () and len(run.rows) == 1          # line 1 of core/a.c
    assert list(sentinels.iterdir()) == []
    assert tree_digest(h.path) == before


# -- the code base itself -------------------------------------------------------------
_ALLOWED_PROCESS_MODULES = {"procmetrics/report/pdf.py",      # headless chromium for PDF
                            "procmetrics/background.py"}     # this interpreter, our module


def _python_files() -> list[Path]:
    return sorted((ROOT / "procmetrics").rglob("*.py"))


def test_no_shell_true_anywhere():
    offenders = []
    for path in _python_files():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call):
                for kw in node.keywords:
                    if kw.arg == "shell" and not (isinstance(kw.value, ast.Constant)
                                                  and kw.value.value is False):
                        offenders.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    assert offenders == []


def test_the_second_process_is_only_this_interpreter_running_our_module():
    """procmetrics/background.py starts one kind of process: ``sys.executable -m
    procmetrics.background`` (no shell, nothing from a repository or user in argv)."""
    tree = ast.parse((ROOT / "procmetrics" / "background.py").read_text(encoding="utf-8"))
    calls = [n for n in ast.walk(tree) if isinstance(n, ast.Call)
             and isinstance(n.func, ast.Attribute) and isinstance(n.func.value, ast.Name)
             and n.func.value.id == "subprocess"]
    assert [ast.unparse(c.func) for c in calls] == ["subprocess.Popen"]
    assert ast.unparse(calls[0].args[0]) == "[sys.executable, '-m', 'procmetrics.background']"


def test_processes_start_only_in_mine_and_the_pdf_writer():
    pattern = re.compile(r"\b(subprocess|os\.system|os\.popen|os\.exec\w*|os\.spawn\w*|"
                         r"os\.posix_spawn\w*|pty\.spawn|create_subprocess_\w+)\b")
    offenders = []
    for path in _python_files():
        rel = path.relative_to(ROOT).as_posix()
        if rel.startswith("procmetrics/mine/") or rel in _ALLOWED_PROCESS_MODULES:
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module:
                names = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
            elif isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name):
                names = [f"{node.value.id}.{node.attr}"]
            offenders += [f"{rel}:{node.lineno} {n}" for n in names if pattern.search(n)]
    assert offenders == []


def test_repository_text_never_becomes_an_output_path(git_history, tmp_path, cli):
    """Paths and subsystem names like ``../../evil`` stay data: the report folder gets
    only its own fixed file names and nothing appears outside it."""
    h = git_history()
    h.commit("x: start\n", files={"dir/a.txt": "a\n"}, date=when(0))
    stream = (b"commit refs/heads/main\ncommitter Eve Evil <eve@example.org> "
              + when(1).encode() + b"\ndata 4\nevil\nfrom " + h.rev().encode() + b"\n")
    for name in (b"..\\..\\evil.txt", b"-rf", b"$(touch pwned)", b"a\nb/../../c.txt"):
        quoted = name.replace(b"\\", b"\\\\").replace(b"\n", b"\\n")
        stream += b'M 100644 inline "' + quoted + b'"\ndata 2\nx\n'
    h.git_bytes("fast-import", "--quiet", "--force", input=stream + b"\n")
    rules = tmp_path / "rules.toml"
    rules.write_text('[subsystems]\n"../../evil" = ["dir/"]\n"/etc/passwd" = ["**"]\n')
    store = tmp_path / "s.sqlite"
    r = cli("mine", h.path, "--store", store, "--subsystem-rules", rules)
    assert r.code == 0, r.err
    subs = set(read_table(open_store(store), "commit_subsystems")["subsystem"])
    assert {"../../evil", "/etc/passwd"} <= subs
    outer = tmp_path / "outer"
    out = outer / "inner" / "report"
    outer.mkdir()
    r = cli("report", "--store", store, "--out", out, "--pdf-engine", "none",
            "--subsystem", "../../evil", "--subsystem", "/etc/passwd")
    assert r.code == 0, r.err
    made = {p.relative_to(out).as_posix() for p in out.rglob("*")}
    for rel in made:
        assert re.fullmatch(r"[A-Za-z0-9._-]+(/[A-Za-z0-9._-]+)?", rel), rel
    assert {p.name for p in outer.iterdir()} == {"inner"}
    assert {p.name for p in (outer / "inner").iterdir()} == {"report"}
    assert not (tmp_path / "evil").exists() and not Path("pwned").exists()
