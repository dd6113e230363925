"""Fixtures for the robustness tests (bad input, faults, hostile repositories).

* ``cli(*args)`` - run ``procmetrics.cli.main`` in-process; returns ``Ran(code, out, err)``.
* ``aurora`` - the seeded demo history (1,500 commits) built once per session with
  ``sample_repos/generate.py``; read-only.

Helpers (subprocess runner, tree digests, tidy-table comparison) are in
:mod:`tests.robustness.robust_support`.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from procmetrics.cli import main
from tests.robustness.robust_support import AURORA_COMMITS, ROOT, Ran, subprocess_env


@pytest.fixture
def cli(capsys):
    """``cli(*args) -> Ran``: the real entry point, in this process."""
    def run(*args: str) -> Ran:
        capsys.readouterr()
        code = main([str(a) for a in args])
        got = capsys.readouterr()
        return Ran(code, got.out, got.err)
    return run


@pytest.fixture(scope="session")
def aurora(tmp_path_factory) -> Path:
    """The seeded demo history with 1,500 commits (git fast-import; about 2 s)."""
    out = tmp_path_factory.mktemp("aurora") / "aurora-fw"
    subprocess.run([sys.executable, str(ROOT / "sample_repos" / "generate.py"), "--out",
                    str(out), "--commits", str(AURORA_COMMITS)], check=True,
                   capture_output=True, env=subprocess_env())
    return out
