"""Helpers for the robustness tests (a plain module: ``from tests.robustness.robust_support
import ...``); the fixtures built on them live in ``conftest.py``."""
from __future__ import annotations

import hashlib
import os
import shutil
import sqlite3
import stat
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from procmetrics.store import open_store
from procmetrics.store.tables import READERS, read_table

ROOT = Path(__file__).resolve().parents[2]
AURORA_COMMITS = 1500


@dataclass(frozen=True)
class Ran:
    code: int
    out: str
    err: str


def subprocess_env(**extra: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("GIT_", "PROCMETRICS_"))}
    env.update(extra)
    return env


def run_procmetrics(*args: str, env: dict[str, str] | None = None,
                    honour_permissions: bool = False, cwd: Path | None = None,
                    timeout: float = 120) -> subprocess.CompletedProcess:
    """``python -m procmetrics ARGS`` in a child process.

    ``honour_permissions``: when we run as root, start the child without the
    capabilities that let root ignore file permissions (``setpriv``), so a chmod'ed
    store is as unreadable to it as to any user.
    """
    prefix: list[str] = []
    if honour_permissions and os.geteuid() == 0:
        setpriv = shutil.which("setpriv")
        if setpriv is None:
            import pytest
            pytest.skip("running as root without setpriv: permissions cannot be tested")
        prefix = [setpriv, "--bounding-set=-dac_override,-dac_read_search"]
    return subprocess.run([*prefix, sys.executable, "-m", "procmetrics", *map(str, args)],
                          capture_output=True, text=True, env=env or subprocess_env(),
                          cwd=cwd or ROOT, timeout=timeout)


def assert_one_line_error(err: str, *needles: str) -> None:
    """stderr is exactly one ``procmetrics: error: ...`` line (no traceback) naming needles."""
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("procmetrics: error: "), err
    assert "Traceback" not in err
    for n in needles:
        assert n.lower() in lines[0].lower(), (n, err)


def tree_digest(root: Path) -> dict[str, tuple]:
    """(kind, mode, content hash or link target) of everything under ``root``."""
    out: dict[str, tuple] = {}
    for dirpath, dirs, files in os.walk(root, followlinks=False):
        for name in dirs + files:
            p = Path(dirpath) / name
            st = p.lstat()
            rel = str(p.relative_to(root))
            if stat.S_ISLNK(st.st_mode):
                out[rel] = ("link", os.readlink(p))
            elif stat.S_ISDIR(st.st_mode):
                out[rel] = ("dir", stat.S_IMODE(st.st_mode))
            else:
                out[rel] = ("file", stat.S_IMODE(st.st_mode),
                            hashlib.sha256(p.read_bytes()).hexdigest())
    return out


def tidy_tables(store) -> dict[str, pd.DataFrame]:
    """Every tidy table except ``mining_runs`` (provenance differs by design), with the
    repository path dropped and rows sorted, so two stores of one history compare equal."""
    engine = open_store(store, create=False)
    try:
        out = {}
        for name in READERS:
            if name == "mining_runs":
                continue
            df = read_table(engine, name)
            if name == "repositories":
                df = df.drop(columns=["path"])
            out[name] = df.sort_values(list(df.columns)).reset_index(drop=True) \
                if len(df) else df.reset_index(drop=True)
        return out
    finally:
        engine.dispose()


def assert_same_tables(a: dict[str, pd.DataFrame], b: dict[str, pd.DataFrame]) -> None:
    assert a.keys() == b.keys()
    for name in a:
        pd.testing.assert_frame_equal(a[name], b[name], obj=name)


def integrity_ok(path: Path) -> bool:
    con = sqlite3.connect(path)
    try:
        return con.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    finally:
        con.close()


# Runs the real CLI with a smaller commit batch (more transactions, so an
# interruption can land between any two of them). Test hook only.
SMALL_BATCH_RUNNER = """
import sys
from functools import partial
import procmetrics.cli.cmd_mine as cmd_mine
from procmetrics.mine.options import MineOptions
cmd_mine.MineOptions = partial(MineOptions, batch_size=int(sys.argv[1]))
from procmetrics.cli import main
sys.exit(main(sys.argv[2:]))
"""


def small_batch_argv(batch: int, *args: str) -> list[str]:
    return [sys.executable, "-c", SMALL_BATCH_RUNNER, str(batch), *map(str, args)]


def file_sha(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def store_dump(path: Path) -> str:
    """SQLite's SQL dump of a store (its logical content, whatever the WAL state)."""
    con = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return "\n".join(con.iterdump())
    finally:
        con.close()
