"""procmetrics benchmark: kernel-scale mining speed, memory, incremental runs, analyses.

Every speed figure is a ratio to a baseline measured in the same run on the same
history (``git log --raw`` / ``--numstat``), so machines of different speed give
comparable figures. Small measurements are repeated (``--repeats``, median);
runs on the full history once. Results: ``bench/results/latest.json`` and
``bench/results/latest.md``. Not part of the test suite.

    python bench/run.py                      # 1,000,000 commits (first run builds it)
    python bench/run.py --commits 20000      # quick check
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import psutil

HERE = Path(__file__).resolve().parent
CACHE = HERE / "cache"
RESULTS = HERE / "results"
sys.path.insert(0, str(HERE))
import generate  # noqa: E402  (bench/generate.py)
import report_md  # noqa: E402  (bench/report_md.py)

TARGETS = {"paths_ratio": 1.3, "lines_ratio": 1.3, "peak_rss_mib": 1024,
           "incremental_s": 5.0, "report_s": 60.0}


def git_env() -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith("GIT_")}
    env.update({"GIT_CONFIG_NOSYSTEM": "1", "GIT_CONFIG_GLOBAL": os.devnull, "LC_ALL": "C"})
    return env


SMALL_TREE = ["--files", "6000", "--dirs", "120", "--maintainers", "300"]


def history(commits: int, *, prefixes: list[int], extra: int, small_tree: bool = False) -> Path:
    """The cached synthetic history with these parameters, built when missing."""
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
    """Sample the summed RSS of a process tree (procmetrics + its git children)."""

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
    """Run argv; wall seconds, peak tree RSS (MiB) and exit code (-9: timed out)."""
    start = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=stdout, stderr=subprocess.PIPE, env=env)
    peak = Peak(proc.pid)
    try:
        _, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        for child in psutil.Process(proc.pid).children(recursive=True):
            child.kill()
        proc.kill()
        _, err = proc.communicate()
        err = b"timed out after %d s\n" % timeout + err
    seconds = time.perf_counter() - start
    rss = peak.stop()
    out = {"seconds": round(seconds, 3), "peak_rss_mib": round(rss / 2**20, 1),
           "peak_rss_main_mib": round(peak.peak_root / 2**20, 1),
           "exit_code": proc.returncode}
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


def git_log(repo: Path, ref: str, kind: str, repeats: int) -> dict[str, object]:
    argv = ["git", "-C", str(repo), "log", f"--{kind}", "--no-merges", ref]
    return median_of([timed(argv, env=git_env()) for _ in range(repeats)])


def procmetrics(*args: str) -> list[str]:
    return [sys.executable, "-m", "procmetrics", *args]


def mine(repo: Path, store: Path, ref: str, *, lines: bool) -> dict[str, object]:
    argv = procmetrics("mine", str(repo), "--store", str(store), "--ref", ref, "--no-progress",
                       "--repo-name", "kernel")
    if not lines:
        argv.append("--no-line-counts")
    return timed(argv)


def store_size(store: Path) -> int:
    return sum(p.stat().st_size for p in (store, Path(f"{store}-wal")) if p.exists())


def count_commits(store: Path) -> int:
    with sqlite3.connect(store) as conn:
        return conn.execute("SELECT count(*) FROM git_commit").fetchone()[0]


def mined_pair(repo: Path, ref: str, work: Path, *, lines: bool, repeats: int
               ) -> tuple[dict[str, object], Path]:
    """Mine into fresh stores ``repeats`` times; keep the last store."""
    runs, store = [], work / f"{'lines' if lines else 'paths'}-{ref.replace('/', '_')}.sqlite"
    for _ in range(repeats):
        for p in (store, Path(f"{store}-wal"), Path(f"{store}-shm")):
            p.unlink(missing_ok=True)
        runs.append(mine(repo, store, ref, lines=lines))
    return median_of(runs), store


def incremental(repo: Path, base_store: Path, work: Path, *, lines: bool,
                repeats: int) -> dict[str, object]:
    runs = []
    for i in range(repeats):
        copy = work / f"incr-{i}.sqlite"
        shutil.copyfile(base_store, copy)
        runs.append(mine(repo, copy, "next", lines=lines))
        new = count_commits(copy) - count_commits(base_store)
        copy.unlink()
    out = median_of(runs)
    out["new_commits"] = new
    return out


def analyses(store: Path, repo: Path, work: Path, commits: int,
             timeout: float) -> dict[str, object]:
    """Time every analysis command that exists, and the full report."""
    sys.path.insert(0, str(HERE.parent))
    from procmetrics.cli import COMMANDS
    half = subprocess.run(["git", "-C", str(repo), "log", "-1", "--format=%cs",
                           f"prefix/{commits // 2}"], capture_output=True, text=True,
                          env=git_env()).stdout.strip()
    at = half or "2015-01-01"
    planned = {
        "series": ["series", "--store", str(store)],
        "changes": ["changes", "--store", str(store)],
        "compare": ["compare", "--store", str(store), "--at", at],
        "lifetimes": ["lifetimes", "--store", str(store), "--out", str(work / "lifetimes")],
        "growth": ["growth", "--store", str(store), "--out", str(work / "growth")],
        "report": ["report", "--store", str(store), "--out", str(work / "report"),
                   "--policy-date", at, "--pdf-engine", "none"],
    }
    out: dict[str, object] = {"policy_date": at}
    for name, argv in planned.items():
        if name not in COMMANDS:
            out[name] = {"skipped": "command not available in this procmetrics"}
            continue
        print(f"  {name} ...", file=sys.stderr)
        out[name] = timed(procmetrics(*argv), timeout=timeout)
    return out


def pydriller_loop(repo: Path) -> None:  # runs in a child process
    from pydriller import Repository
    n = 0
    for c in Repository(str(repo), only_in_branch="main", only_no_merge=True).traverse_commits():
        for m in c.modified_files:
            n += (m.added_lines or 0) + (m.deleted_lines or 0) + len(m.new_path or m.old_path or "")
    print(n)


def pydriller_ratio(small: Path, work: Path, repeats: int) -> dict[str, object]:
    # pydriller writes into the repository's config: give it a throw-away copy
    copy = work / "pydriller-copy"
    if copy.exists():
        shutil.rmtree(copy)
    shutil.copytree(small, copy, symlinks=True)
    code = ("import sys; sys.path.insert(0, %r); import run; run.pydriller_loop(__import__('pathlib')"
            ".Path(%r))" % (str(HERE), str(copy)))
    pyd = median_of([timed([sys.executable, "-c", code]) for _ in range(repeats)])
    ours, _ = mined_pair(small, "main", work, lines=True, repeats=repeats)
    shutil.rmtree(copy)
    return {"pydriller": pyd, "procmetrics_lines": ours,
            "commits": int(subprocess.run(["git", "-C", str(small), "rev-list", "--count",
                                           "--no-merges", "main"], capture_output=True,
                                          text=True, env=git_env()).stdout),
            "ratio": round(pyd["seconds"] / ours["seconds"], 1)}


def save(out: Path, n: int, res: dict[str, object]) -> Path:
    """Write the results so far (a long run that is stopped keeps what it measured)."""
    name = "latest" if n >= 1_000_000 else f"latest-{n}"
    out.mkdir(parents=True, exist_ok=True)
    (out / f"{name}.json").write_text(json.dumps(res, indent=2, sort_keys=True) + "\n")
    (out / f"{name}.md").write_text(report_md.render(res))
    return out / f"{name}.md"


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--commits", type=int, default=1_000_000)
    ap.add_argument("--small", type=int, default=2000, help="history size for pydriller")
    ap.add_argument("--repeats", type=int, default=3, help="repeats of small measurements")
    ap.add_argument("--big-repeats", type=int, default=1, help="repeats of full-history runs")
    ap.add_argument("--skip", action="append", default=[],
                    choices=["lines", "memory", "incremental", "analyses", "pydriller"])
    ap.add_argument("--out", type=Path, default=RESULTS)
    ap.add_argument("--analysis-timeout", type=float, default=1800.0,
                    help="seconds before an analysis command is stopped and recorded as such")
    args = ap.parse_args(argv)
    n = args.commits
    prefixes = [n // 4, n // 2]
    repo = history(n, prefixes=prefixes, extra=1000)
    args.out.mkdir(parents=True, exist_ok=True)
    work = Path(tempfile.mkdtemp(prefix="tmp-", dir=args.out))
    res: dict[str, object] = {"machine": machine(), "targets": TARGETS,
                              "started": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
                              "load_avg_start": os.getloadavg(),
                              "history": json.loads((repo / ".git" / "bench-complete.json")
                                                    .read_text())}
    try:
        res["history"]["non_merge_commits"] = n
        print("git log --raw baseline ...", file=sys.stderr)
        res["git_raw"] = git_log(repo, "main", "raw", args.repeats)
        print("mining, paths only ...", file=sys.stderr)
        paths, paths_store = mined_pair(repo, "main", work, lines=False, repeats=args.big_repeats)
        res["mine_paths"] = paths
        res["stored_commits"] = count_commits(paths_store)
        res["store_bytes_per_commit_paths"] = round(store_size(paths_store) / res["stored_commits"])
        res["paths_ratio"] = round(paths["seconds"] / res["git_raw"]["seconds"], 2)
        save(args.out, n, res)
        if "lines" not in args.skip:
            print("git log --numstat baseline ...", file=sys.stderr)
            res["git_numstat"] = git_log(repo, "main", "numstat", args.repeats)
            print("mining with line counts ...", file=sys.stderr)
            lines, lines_store = mined_pair(repo, "main", work, lines=True,
                                            repeats=args.big_repeats)
            res["mine_lines"] = lines
            res["store_bytes_per_commit_lines"] = round(store_size(lines_store)
                                                        / count_commits(lines_store))
            res["lines_ratio"] = round(lines["seconds"] / res["git_numstat"]["seconds"], 2)
            save(args.out, n, res)
        if "memory" not in args.skip:
            res["memory"] = {}
            for p in prefixes:
                print(f"memory at {p} commits ...", file=sys.stderr)
                r, st = mined_pair(repo, f"prefix/{p}", work, lines=False, repeats=1)
                res["memory"][str(p)] = {"peak_rss_mib": r["peak_rss_mib"],
                                         "peak_rss_main_mib": r["peak_rss_main_mib"],
                                         "seconds": r["seconds"]}
                st.unlink()
                save(args.out, n, res)
            res["memory"][str(n)] = {"peak_rss_mib": paths["peak_rss_mib"],
                                     "peak_rss_main_mib": paths["peak_rss_main_mib"],
                                     "seconds": paths["seconds"]}
        if "incremental" not in args.skip:
            print("incremental mining of 1,000 commits ...", file=sys.stderr)
            res["incremental"] = incremental(repo, paths_store, work, lines=False,
                                             repeats=args.repeats)
            save(args.out, n, res)
        if "analyses" not in args.skip and "lines" not in args.skip:
            print("analyses and report ...", file=sys.stderr)
            res["analyses"] = analyses(lines_store, repo, work, n, args.analysis_timeout)
        if "pydriller" not in args.skip:
            print(f"pydriller loop vs procmetrics on {args.small} commits ...", file=sys.stderr)
            small = history(args.small, prefixes=[], extra=0, small_tree=True)
            res["pydriller"] = pydriller_ratio(small, work, args.repeats)
    finally:
        res["load_avg_end"] = os.getloadavg()
        res["finished"] = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
        written = save(args.out, n, res)
        shutil.rmtree(work, ignore_errors=True)
        print(f"wrote {written}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
