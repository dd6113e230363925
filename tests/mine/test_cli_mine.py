"""``procmetrics mine`` through the real entry point."""
from __future__ import annotations

import subprocess
import sys

from procmetrics.cli import main
from tests.git_support import when


def test_mine_command_prints_a_summary(sample_history, tmp_path, capsys):
    store = tmp_path / "s.sqlite"
    assert main(["mine", str(sample_history.path), "--store", str(store), "--no-progress"]) == 0
    out = capsys.readouterr().out
    assert "17 new commit(s) mined (full)" in out
    assert "17 commits (3 merges)" in out
    assert "6 fix references (resolved 5, unresolved 1, ambiguous 0, self 0), 1 unparsed" in out
    assert main(["mine", str(sample_history.path), "--store", str(store)]) == 0
    assert "0 new commit(s) mined (incremental" in capsys.readouterr().out


def test_errors_become_one_line_and_an_exit_code(git_history, tmp_path, capsys):
    plain = tmp_path / "plain"
    plain.mkdir()
    assert main(["mine", str(plain), "--store", str(tmp_path / "s.sqlite")]) == 3
    err = capsys.readouterr().err
    assert err.startswith("procmetrics: error:") and len(err.strip().splitlines()) == 1
    h = git_history()
    h.commit("a\n", files={"a": "1\n"}, date=when(0))
    bad = tmp_path / "rules.toml"
    bad.write_text("[subsystems\n")
    assert main(["mine", str(h.path), "--store", str(tmp_path / "s.sqlite"),
                 "--subsystem-rules", str(bad)]) == 2
    store = str(tmp_path / "t.sqlite")
    assert main(["mine", str(h.path), "--store", store]) == 0
    h.git("commit", "-q", "--amend", "-m", "rewritten", env={"GIT_AUTHOR_NAME": "A",
          "GIT_AUTHOR_EMAIL": "a@x", "GIT_COMMITTER_NAME": "A", "GIT_COMMITTER_EMAIL": "a@x"})
    capsys.readouterr()
    assert main(["mine", str(h.path), "--store", store]) == 4
    assert "--rewrite-policy remine" in capsys.readouterr().err
    assert main(["mine", str(h.path), "--store", store, "--rewrite-policy", "remine"]) == 0


def test_module_entry_point_runs(sample_history, tmp_path):
    proc = subprocess.run([sys.executable, "-m", "procmetrics", "mine", str(sample_history.path),
                           "--store", str(tmp_path / "s.sqlite"), "--no-line-counts",
                           "--prefix-depth", "2", "--repo-name", "demo"],
                          capture_output=True, text=True, check=False)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.startswith("demo: 17 new commit(s)")
    assert "path-prefix (depth=2)" in proc.stdout
