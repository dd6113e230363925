"""``--scope``, ``--since`` and ``--until`` through the real entry point.

Every analysis command prints the scope header before any figure and counts only
the selected commits (the count is git's, see test_scope_git_oracle.py); a bad
scope, an unknown name or a tag that does not exist is one line and exit 2.
"""
from __future__ import annotations

import json
import re

import pytest

from procmetrics.cli import main
from tests.scope.scope_support import git

SCOPES = '[scope.motor]\ninclude = ["motor/**"]\n[scope.can]\ninclude = ["drivers/can"]\n'


@pytest.fixture
def run(capsys):
    def go(*args):
        capsys.readouterr()
        code = main([str(a) for a in args])
        got = capsys.readouterr()
        return code, got.out, got.err
    return go


@pytest.fixture(scope="module")
def scope_file(tmp_path_factory):
    f = tmp_path_factory.mktemp("cli_scope") / "scopes.toml"
    f.write_text(SCOPES, encoding="utf-8")
    return f


def _git_count(repo, *extra):
    return int(git(repo, "rev-list", "--count", "--no-merges", "--full-history", *extra,
                   "HEAD", "--", "motor"))


@pytest.mark.parametrize("cmd,extra", [
    ("series", ["--no-trend", "--metric", "commits"]), ("changes", ["--boot", "0"]),
    ("compare", ["--at", "v3.0", "--resamples", "9", "--boot", "9"]),
    ("lifetimes", ["--boot", "9"]), ("growth", ["--boot", "9"])])
def test_every_analysis_command_states_and_uses_the_scope(demo, scope_file, run, cmd, extra):
    repo, store = demo
    code, out, err = run(cmd, "--store", store, "--scope", f"{scope_file}:motor",
                         "--since", "v2.0", *extra)
    assert code == 0, err
    lo = git(repo, "log", "-1", "--format=%cI", "v2.0").strip()
    n = _git_count(repo, f"--since={lo}")
    head = out.splitlines()
    assert head[0].startswith("scope: motor from scopes.toml (toml, sha256 ")
    assert head[1].startswith("window: committer date ") and head[1].endswith("the tip")
    m = re.match(r"selected: (\d+) of (\d+) non-merge commits", head[2])
    assert m and int(m.group(1)) == n, (head[2], n)
    if cmd == "series":
        assert f"aurora-fw: {n} commits" in out


def test_series_out_writes_the_scope_json(demo, scope_file, run, tmp_path):
    repo, store = demo
    code, out, err = run("series", "--store", store, "--scope", f"{scope_file}:can",
                         "--until", "v4.0", "--no-trend", "--metric", "commits", "--out",
                         tmp_path / "o")
    assert code == 0, err
    doc = json.loads((tmp_path / "o" / "scope.json").read_text())
    hi = git(repo, "log", "-1", "--format=%cI", "v4.0").strip()
    assert doc["scope"]["name"] == "can" and len(doc["scope"]["file_sha256"]) == 64
    assert doc["n_commits"] == int(git(repo, "rev-list", "--count", "--no-merges",
                                       "--full-history", f"--until={hi}", "HEAD", "--",
                                       "drivers/can"))
    assert doc["since"] is None and doc["until"].startswith(hi[:10])
    assert doc["rule"] and doc["defect_rule"] and doc["window_rule"]


def test_check_json_states_the_scope(demo, scope_file, run, tmp_path):
    _, store = demo
    claims = tmp_path / "c.toml"
    claims.write_text('[[claim]]\nid = "a"\nkind = "at_least"\nmetric = "review_coverage"\n'
                      'threshold = 0.1\n')
    code, out, err = run("check", claims, "--store", store, "--scope", f"{scope_file}:motor",
                         "--no-panel", "--json", tmp_path / "v.json")
    assert code in (0, 9, 10, 11), err
    assert out.startswith("scope: motor")
    prov = json.loads((tmp_path / "v.json").read_text())["provenance"]
    assert prov["scope"]["scope"]["name"] == "motor"
    assert prov["scope"]["n_commits"] == _git_count(demo[0])


@pytest.mark.parametrize("args,needle", [
    (["--scope", "{f}:nope"], "has no scope 'nope'"),
    (["--scope", "{f}"], "holds several scopes"),
    (["--scope", "/no/such/scopes.toml"], "cannot read the scope file"),
    (["--since", "v99.0"], "--since 'v99.0' is not"),
    (["--until", "2019-13-45"], "--until"),
    (["--since", "v5.0", "--until", "v2.0"], "is after --until")])
def test_usage_errors_are_one_line_and_exit_2(demo, scope_file, run, args, needle):
    _, store = demo
    argv = [a.format(f=scope_file) for a in args]
    for cmd in ("series", "lifetimes"):
        code, out, err = run(cmd, "--store", store, *argv)
        assert code == 2, (cmd, argv, err)
        assert needle in err and len(err.strip().splitlines()) == 1, err
