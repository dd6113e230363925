"""report, check and rerun through the real entry point (procmetrics.cli.main)."""
from __future__ import annotations

import json
import re
import shutil

import pytest

from procmetrics.cli import main

from tests.report.conftest import _git, build_history


@pytest.fixture(scope="module")
def mined(tmp_path_factory):
    base = tmp_path_factory.mktemp("cli-report")
    repo, policy = build_history(base)
    store = base / "pm.sqlite"
    assert main(["mine", str(repo), "--store", str(store), "--no-progress"]) == 0
    return base, repo, store, policy


def test_check_exit_code_reflects_verdicts(mined, tmp_path, capsys):
    base, _, store, policy = mined
    claims = tmp_path / "c.toml"
    claims.write_text('[[claim]]\nid = "rose"\nkind = "review_coverage_rose"\n'
                      'date = "policy"\n', encoding="utf-8")
    args = ["check", str(claims), "--store", str(store), "--policy-date", policy]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "[SUPPORTED] rose" in out
    claims.write_text(claims.read_text() + '\n[[claim]]\nid = "none"\n'
                      'kind = "no_defects_remain"\n', encoding="utf-8")
    assert main(args) == 12           # 8 + 4: a claim not supportable
    assert "NOT SUPPORTABLE" in capsys.readouterr().out
    js = tmp_path / "v.json"
    assert main(args + ["--json", str(js)]) == 12
    doc = json.loads(js.read_text())
    assert [d["verdict"] for d in doc["verdicts"]] == ["supported", "not_supportable"]


def test_check_claims_error_names_file_line_and_key(mined, tmp_path, capsys):
    _, _, store, _ = mined
    bad = tmp_path / "bad.toml"
    bad.write_text('[[claim]]\nid = "a"\nkind = "at_least"\nmetric = "fix_ratio"\n'
                   'threshold = "most"\n', encoding="utf-8")
    assert main(["check", str(bad), "--store", str(store)]) == 2
    err = capsys.readouterr().err
    assert f"{bad}:5, key 'threshold'" in err and err.count("\n") == 1


def test_check_usage_mistakes_exit_2_with_one_line(mined, tmp_path, capsys):
    # a "policy" claim without --policy-date, and a subsystem the store lacks, are the
    # user's mistakes: one line, exit 2 (not an "undecidable" verdict)
    _, _, store, policy = mined
    claims = tmp_path / "c.toml"
    claims.write_text('[[claim]]\nid = "rose"\nkind = "review_coverage_rose"\n'
                      'date = "policy"\n', encoding="utf-8")
    assert main(["check", str(claims), "--store", str(store)]) == 2
    err = capsys.readouterr().err
    assert "claim 'rose' (line 1)" in err and "--policy-date" in err and err.count("\n") == 1
    claims.write_text('[[claim]]\nid = "sub"\nkind = "at_least"\nmetric = "fix_ratio"\n'
                      'threshold = 0.1\nsubsystem = "no-such-subsystem"\n', encoding="utf-8")
    assert main(["check", str(claims), "--store", str(store), "--policy-date", policy]) == 2
    err = capsys.readouterr().err
    assert "'no-such-subsystem' does not exist in the store" in err and err.count("\n") == 1


def test_check_lists_kinds(capsys):
    assert main(["check", "--list-kinds"]) == 0
    out = capsys.readouterr().out
    assert "residual_defects_below" in out and "median_lifetime_below" in out


def test_report_then_rerun_matches_and_notices_a_moved_head(mined, tmp_path, capsys):
    base, repo, store, policy = mined
    repo2 = tmp_path / "aurora-fw"
    shutil.copytree(repo, repo2)        # our own copy: we add a commit to it below
    store2 = tmp_path / "pm.sqlite"
    assert main(["mine", str(repo2), "--store", str(store2), "--no-progress"]) == 0
    out = tmp_path / "rep"
    capsys.readouterr()
    assert main(["report", "--store", str(store2), "--out", str(out), "--policy-date", policy,
                 "--pdf-engine", "none", "--progress"]) == 0
    assert (out / "report.html").exists() and (out / "manifest.json").exists()
    # progress on stderr only: numbered steps that never pass their total, with time so
    # far and (from the second step) an estimate of the time left
    err = capsys.readouterr().err
    counts = [tuple(map(int, m)) for m in re.findall(r"^report: \[(\d+)/(\d+)\]", err, re.M)]
    assert counts and all(k <= n for k, n in counts) and counts[-1][0] == counts[-1][1]
    assert "so far; about" in err and "report.html" not in err
    assert main(["rerun", str(out / "manifest.json"), "--out", str(tmp_path / "r1")]) == 0
    assert "figures match" in capsys.readouterr().out
    # the store disappears and HEAD moves: re-mined at the recorded HEAD, figures still match
    store2.unlink()
    home = tmp_path / "home"
    home.mkdir()
    _git(repo2, home, "commit", "--allow-empty", "-q", "-m", "later work")
    assert main(["rerun", str(out / "manifest.json"), "--out", str(tmp_path / "r2")]) == 0
    text = capsys.readouterr().out
    assert "HEAD moved" in text and "re-mined" in text and "figures match" in text
    assert "scope-facts" in text          # the ref is now recorded as a hash: provenance only


def test_report_errors_are_one_line(mined, tmp_path, capsys):
    _, _, store, _ = mined
    code = main(["report", "--store", str(store), "--out", str(tmp_path / "x"),
                 "--policy-date", "not-a-date"])
    assert code == 2
    assert "--policy-date" in capsys.readouterr().err
    assert main(["report", "--store", str(tmp_path / "none.sqlite"), "--out",
                 str(tmp_path / "y")]) == 5
