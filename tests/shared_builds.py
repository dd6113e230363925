"""Expensive test inputs built once per test session, shared by the xdist workers.

A session-scoped fixture runs once per *worker* (``pytest -n 2`` gives two), so a
history mined and reported in a session fixture was built twice. :func:`shared_build`
builds into a folder beside the workers' own temporary roots under a file lock: the
first worker to ask builds, the others wait for it and reuse the folder.

    @pytest.fixture(scope="session")
    def demo_store(tmp_path_factory) -> Path:
        def build(base: Path) -> Path:
            ...                        # write everything under base; return a picklable value
            return base / "store.sqlite"
        return shared_build(tmp_path_factory, "demo-store", build)

What is built there is read-only for the tests: a test that changes a folder or a
store copies it first (``shutil.copytree`` into its ``tmp_path``). A failed build leaves
nothing behind and is retried (and fails again) in the next worker that asks.
"""
from __future__ import annotations

import os
import pickle
import shutil
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

try:
    import fcntl
except ImportError:          # not POSIX: each worker builds its own copy
    fcntl = None  # type: ignore[assignment]

T = TypeVar("T")
_DONE = "shared-build-result.pickle"


def shared_root(tmp_path_factory) -> Path:
    """The folder this session's workers share (the per-session root under xdist;
    this session's own temporary root without xdist or without file locks)."""
    base = tmp_path_factory.getbasetemp()
    if os.environ.get("PYTEST_XDIST_WORKER") and fcntl is not None:
        return base.parent
    return base


def shared_build(tmp_path_factory, name: str, build: Callable[[Path], T]) -> T:
    """``build(folder)`` once per session across workers; its (pickled) return value.

    ``folder`` is ``<shared root>/shared-<name>``; the value ``build`` returns is
    stored beside its outputs and handed to every later caller, in any worker.
    """
    root = shared_root(tmp_path_factory)
    folder = root / f"shared-{name}"
    done = root / f"shared-{name}.{_DONE}"
    with open(root / f"shared-{name}.lock", "w") as lock:
        if fcntl is not None:
            fcntl.flock(lock.fileno(), fcntl.LOCK_EX)
        try:
            if done.exists():
                with open(done, "rb") as fh:
                    return pickle.load(fh)
            if folder.exists():                  # left by a build that failed
                shutil.rmtree(folder)
            folder.mkdir()
            try:
                value = build(folder)
            except BaseException:
                shutil.rmtree(folder, ignore_errors=True)
                raise
            with open(done.with_suffix(".tmp"), "wb") as fh:
                pickle.dump(value, fh)
            os.replace(done.with_suffix(".tmp"), done)
            return value
        finally:
            if fcntl is not None:
                fcntl.flock(lock.fileno(), fcntl.LOCK_UN)
