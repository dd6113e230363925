"""Measuring primitives of the benchmark: the cached histories, timed runs, peak memory.

Shared by ``bench/run.py``, ``bench/patch_ids.py``, ``bench/multi_repo.py`` and
``bench/scope_bench.py`` (through ``run``, which re-exports these names).
"""
from __future__ import annotations

import json
import os
import platform
import shutil
import sqlite3
import statistics
import subprocess
import sys
import threading
import time
from pathlib import Path

import psutil

HERE = Path(__file__).resolve().parent
CACHE = HERE / "cache"
SMALL_TREE = ["--files", "6000", "--dirs", "120", "--maintainers", "300"]


def git_env() -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith("GIT_")}
    env.update({"GIT_CONFIG_NOSYSTEM": "1", "GIT_CONFIG_GLOBAL": os.devnull, "LC_ALL": "C"})
    return env


def history(commits: int, *, prefixes: list[int], extra: int, small_tree: bool = False) -> Path:
    """The cached synthetic history with these parameters, built when missing."""
    import generate  # bench/generate.py (on sys.path when run from bench/)
    out = CACHE / (f"small-{commits}" if small_tree else f"kernel-{commits}")
    marker = out / ".git" / "bench-complete.json"
    if marker.exists():
        return out
    if out.exists():
        shutil.rmtree(out)          # an interrupted build
    CACHE.mkdir(parents=True, exist_ok=True)
    argv = ["--commits", str(commits), "--extra", str(extra), "--out", str(out)]
    for p in prefixes:
        argv += ["--prefix", str(p)]
    if small_tree:
        argv += SMALL_TREE
    print(f"building the {commits}-commit history (cached in {out}) ...", file=sys.stderr)
    generate.main(argv)
    return out


def history_info(repo: Path) -> dict[str, object]:
    """The generator's parameters, recorded in the history's completion marker."""
    return json.loads((repo / ".git" / "bench-complete.json").read_text())


def machine() -> dict[str, object]:
    cpu = platform.processor() or ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    git = subprocess.run(["git", "--version"], capture_output=True, text=True).stdout.strip()
    head = subprocess.run(["git", "-C", str(HERE.parent), "describe", "--always", "--dirty"],
                          capture_output=True, text=True).stdout.strip()
    from importlib import metadata
    return {
        "cpu_model": cpu, "logical_cpus": os.cpu_count(),
        "physical_cores": psutil.cpu_count(logical=False),
        "ram_gib": round(psutil.virtual_memory().total / 2**30, 1),
        "os": f"{platform.system()} {platform.release()}", "git": git,
        "python": platform.python_version(), "procmetrics": f"{metadata.version('procmetrics')} ({head})",
        "sqlalchemy": metadata.version("sqlalchemy"), "sqlite": sqlite3.sqlite_version,
    }


class Peak:
    """Sample the RSS of a process tree: summed (procmetrics + its git children) and the root alone."""

    def __init__(self, pid: int, interval: float = 0.05) -> None:
        self.pid, self.interval, self.peak, self.peak_root = pid, interval, 0, 0
        self._stop = threading.Event()
        self._t = threading.Thread(target=self._run, daemon=True)
        self._t.start()

    def _run(self) -> None:
        try:
            root = psutil.Process(self.pid)
        except psutil.NoSuchProcess:
            return
        while not self._stop.is_set():
            try:
                procs = [root] + root.children(recursive=True)
                rss = 0
                for p in procs:
                    try:
                        one = p.memory_info().rss
                    except psutil.NoSuchProcess:
                        continue
                    rss += one
                    if p.pid == self.pid:   # git's RSS includes its mapped pack files
                        self.peak_root = max(self.peak_root, one)
                self.peak = max(self.peak, rss)
            except psutil.NoSuchProcess:
                return
            self._stop.wait(self.interval)

    def stop(self) -> int:
        self._stop.set()
        self._t.join()
        return self.peak


def timed(argv: list[str], *, env: dict[str, str] | None = None,
          stdout=subprocess.DEVNULL, timeout: float | None = None) -> dict[str, object]:
    """Run argv; wall seconds, peak RSS (MiB; tree and root alone), exit code (-9: timed out)."""
    start = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=stdout, stderr=subprocess.PIPE, env=env)
    peak = Peak(proc.pid)
    timed_out = False
    try:
        _, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        timed_out = True
        for child in psutil.Process(proc.pid).children(recursive=True):
            child.kill()
        proc.kill()
        _, err = proc.communicate()
        err = b"timed out after %d s\n" % timeout + err
    seconds = time.perf_counter() - start
    rss = peak.stop()
    out: dict[str, object] = {"seconds": round(seconds, 3), "peak_rss_mib": round(rss / 2**20, 1),
                              "peak_rss_main_mib": round(peak.peak_root / 2**20, 1),
                              "exit_code": proc.returncode}
    if timed_out:
        out["timed_out"] = True
    if proc.returncode != 0:
        out["stderr"] = err.decode("utf-8", "replace")[-2000:]
    return out


def median_of(runs: list[dict[str, object]]) -> dict[str, object]:
    ok = [r for r in runs if r["exit_code"] == 0] or runs
    return {"seconds": round(statistics.median(r["seconds"] for r in ok), 3),
            "peak_rss_mib": round(max(r["peak_rss_mib"] for r in ok), 1),
            "peak_rss_main_mib": round(max(r.get("peak_rss_main_mib", 0) for r in ok), 1),
            "runs": [r["seconds"] for r in runs], "exit_code": max(r["exit_code"] for r in runs),
            **({"stderr": runs[-1]["stderr"]} if "stderr" in runs[-1] else {})}


def git_out(repo: Path, *args: str) -> str | None:
    """Stdout of a git command on repo, or None when git fails."""
    r = subprocess.run(["git", "-C", str(repo), *args], capture_output=True, text=True,
                       env=git_env())
    return r.stdout.strip() if r.returncode == 0 else None


def policy_date(repo: Path, commits: int) -> tuple[str, str]:
    """The policy date of the analyses on a bench history, and where it came from.

    The committer date of ``prefix/<commits // 2>`` (the commit at which half the
    non-merge commits exist); a history without that ref falls back to the
    committer date of the middle non-merge commit of ``main``, found with
    ``git rev-list`` (newest first, skipping the newer half).
    """
    ref = f"prefix/{commits // 2}"
    if git_out(repo, "rev-parse", "--verify", "--quiet", f"{ref}^{{commit}}"):
        out = git_out(repo, "rev-list", "--max-count=1", "--format=%cs", ref)
        if out:
            return out.splitlines()[-1], f"committer date of {ref}"
    count = git_out(repo, "rev-list", "--count", "--no-merges", "main")
    if not count:
        raise RuntimeError(f"{repo}: no branch main to take a policy date from")
    total = int(count)
    skip = total - max(total // 2, 1)
    out = git_out(repo, "rev-list", "--no-merges", f"--skip={skip}", "--max-count=1",
                  "--format=%cs", "main")
    if not out:
        raise RuntimeError(f"{repo}: git rev-list found no middle commit on main")
    return out.splitlines()[-1], (f"committer date of the middle non-merge commit of main "
                                  f"({total - skip:,} of {total:,}; no ref {ref})")
