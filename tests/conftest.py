"""Shared fixtures (helpers live in :mod:`tests.git_support`).

* ``git_history`` - factory ``git_history(name="repo", bare=False) -> GitHistory``: a new
  repository under ``tmp_path`` driven by the real git with isolated configuration;
  commit with fixed identities (``ALICE``, ``BOB``...) and dates (``when(day, tz)``).
* ``sample_history`` - a ready-made, session-scoped, read-only history with merges (one
  octopus), two roots, a rename, a binary file, non-UTF-8 text, an empty message,
  trailers, fix/revert references, tags and a ``.mailmap``; hashes in ``.ids``.
* ``make_demo`` - the README's ``make demo`` run once per session, shared by the xdist
  workers (:mod:`tests.shared_builds`), with its folders under the shared temporary root:
  ``MakeDemo(returncode, output, repo, out)``; the demo history, its store
  (``out / "procmetrics.sqlite"``) and report are read-only for the tests.
"""
from __future__ import annotations

import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path

import pytest

from tests.git_support import GitHistory, build_sample_history
from tests.shared_builds import shared_build

ROOT = Path(__file__).resolve().parents[1]


@dataclass(frozen=True)
class MakeDemo:
    returncode: int
    output: str            # the tails of make's stdout and stderr
    repo: Path             # the generated aurora-fw history (truth file beside it)
    out: Path              # the report folder, with the store procmetrics.sqlite


@pytest.fixture
def git_history(tmp_path: Path):
    """Factory: ``git_history(name="repo", bare=False) -> GitHistory`` under tmp_path."""
    def make(name: str = "repo", *, bare: bool = False) -> GitHistory:
        return GitHistory.create(tmp_path / name, bare=bare)
    return make


@pytest.fixture(scope="session")
def sample_history(tmp_path_factory) -> GitHistory:
    """The standard small history, built once per session; tests must not modify it."""
    return build_sample_history(tmp_path_factory.mktemp("sample") / "sample")


@pytest.fixture(scope="session")
def make_demo(tmp_path_factory) -> MakeDemo:
    """``make demo`` as the README says, its folders moved under the shared temporary root
    (make variables on the command line) so the source tree is left alone."""
    if shutil.which("make") is None:
        pytest.skip("make is not installed")

    def build(base: Path) -> dict:
        repo, out = base / "aurora-fw", base / "demo"
        # -o: do not reinstall the package when pyproject.toml is newer than the stamp
        proc = subprocess.run(["make", "-C", str(ROOT), "-o", ".venv/.installed", "demo",
                               f"DEMO_REPO={repo}", f"DEMO_OUT={out}"],
                              check=False, capture_output=True, text=True, timeout=600)
        return {"returncode": proc.returncode, "output": proc.stdout[-3000:] +
                proc.stderr[-3000:], "repo": repo, "out": out}

    return MakeDemo(**shared_build(tmp_path_factory, "make-demo", build))
