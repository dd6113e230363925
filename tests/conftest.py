"""Shared fixtures (helpers live in :mod:`tests.git_support`).

* ``git_history`` - factory ``git_history(name="repo", bare=False) -> GitHistory``: a new
  repository under ``tmp_path`` driven by the real git with isolated configuration;
  commit with fixed identities (``ALICE``, ``BOB``...) and dates (``when(day, tz)``).
* ``sample_history`` - a ready-made, session-scoped, read-only history with merges (one
  octopus), two roots, a rename, a binary file, non-UTF-8 text, an empty message,
  trailers, fix/revert references, tags and a ``.mailmap``; hashes in ``.ids``.
"""
from __future__ import annotations

from pathlib import Path

import pytest

from tests.git_support import GitHistory, build_sample_history


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
