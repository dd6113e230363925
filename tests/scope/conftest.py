"""Fixtures for the scope tests: the seeded demo history mined once per session.

``demo`` gives ``(repo, store)``: aurora-fw (1,500 commits, ``sample_repos/generate.py``)
and a SQLite store mined from it. Read-only for the tests.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from tests.scope.scope_support import git_env

ROOT = Path(__file__).resolve().parents[2]
DEMO_COMMITS = 1500


@pytest.fixture(scope="session")
def demo(tmp_path_factory) -> tuple[Path, Path]:
    from procmetrics.mine import MineOptions, mine_repository

    base = tmp_path_factory.mktemp("scope_demo")
    repo = base / "aurora-fw"
    subprocess.run([sys.executable, str(ROOT / "sample_repos" / "generate.py"), "--out",
                    str(repo), "--commits", str(DEMO_COMMITS)], check=True,
                   capture_output=True, env=git_env())
    store = base / "pm.sqlite"
    mine_repository(repo, store=store, options=MineOptions(progress=False))
    return repo, store
