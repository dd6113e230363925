"""series, changes and compare warn about data quality as the report does: fix references
that name no commit of this history make every fix ratio an undercount."""
from __future__ import annotations

import os
import subprocess

import pytest

from procmetrics.cli import main


def _git(repo, *args, date="2024-01-01T12:00:00+0000"):
    env = {"PATH": os.environ.get("PATH", ""), "HOME": str(repo.parent),
           "GIT_CONFIG_NOSYSTEM": "1", "GIT_AUTHOR_NAME": "Ola Invented",
           "GIT_AUTHOR_EMAIL": "ola@example.invalid", "GIT_COMMITTER_NAME": "Ola Invented",
           "GIT_COMMITTER_EMAIL": "ola@example.invalid", "GIT_AUTHOR_DATE": date,
           "GIT_COMMITTER_DATE": date}
    subprocess.run(["git", "-C", str(repo), *args], env=env, check=True, capture_output=True)


@pytest.fixture(scope="module")
def mirror_store(tmp_path_factory):
    """A mirror-like history: most Fixes: lines name commits that are not in it."""
    base = tmp_path_factory.mktemp("mirror")
    repo = base / "mirror"
    repo.mkdir()
    _git(repo, "init", "-q", "-b", "main")
    for i in range(40):
        (repo / f"f{i % 4}.c").write_text("".join(f"int v{i}_{k};\n" for k in range(i % 7)))
        _git(repo, "add", ".")
        msg = f"lib: change {i}"
        if i % 3 == 0:
            msg += f"\n\nFixes: {'%012x' % (0xabc000000000 + i)} (\"an upstream commit\")"
        month = 1 + i % 12
        _git(repo, "commit", "-q", "-m", msg, date=f"{2020 + i // 12}-{month:02d}-10T12:00:00+0000")
    store = base / "s.sqlite"
    assert main(["mine", str(repo), "--store", str(store), "--no-progress"]) == 0
    return store


WARNING = "warning [unresolved_fix_references]"


def test_series_warns_for_fix_ratio_only(mirror_store, capsys):
    capsys.readouterr()
    assert main(["series", "--store", str(mirror_store), "--metric", "fix_ratio",
                 "--period", "year", "--no-trend"]) == 0
    out = capsys.readouterr().out
    assert WARNING in out and "100% of fix references (14 unresolved" in out
    assert out.index(WARNING) < out.index("fix_ratio [")      # before the numbers
    assert main(["series", "--store", str(mirror_store), "--metric", "review_coverage",
                 "--period", "year", "--no-trend"]) == 0
    assert WARNING not in capsys.readouterr().out


def test_changes_and_compare_warn_too(mirror_store, capsys):
    capsys.readouterr()
    main(["changes", "--store", str(mirror_store), "--metric", "fix_ratio", "--period",
          "quarter"])
    assert WARNING in capsys.readouterr().out
    main(["compare", "--store", str(mirror_store), "--at", "2021-06-01", "--metric",
          "fix_ratio", "--period", "quarter", "--resamples", "99", "--boot", "99"])
    assert WARNING in capsys.readouterr().out
