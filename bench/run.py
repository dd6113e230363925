"""procmetrics benchmark: mining, incremental runs and analyses at several history sizes.

Every figure is measured at each size (default 100,000, 300,000 and 1,000,000
non-merge commits; each size has its own cached history), given as a ratio to
``git log`` timed in the same run on the same history, and fitted across sizes
for its growth exponent (time ∝ N^k). The run ends with the regression gate
against the committed results (``gate.py``): exit code 1 when a figure regressed
by more than 25% or a command failed. Not part of the test suite.

    python bench/run.py                          # 100k, 300k, 1M: results/latest.*
    python bench/run.py --sizes 20000,50000      # quick: results/latest-20000-50000.*
"""
from __future__ import annotations

import argparse
import json
import os
import shutil
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
RESULTS = HERE / "results"
sys.path.insert(0, str(HERE))
import gate  # noqa: E402  (bench/gate.py)
import generate  # noqa: E402,F401  (bench/generate.py; used through run.generate)
import growth_fit  # noqa: E402  (bench/growth_fit.py)
import report_md  # noqa: E402  (bench/report_md.py)
from measure import (CACHE, SMALL_TREE, git_env, history, history_info, machine,  # noqa: E402,F401
                     median_of, policy_date, timed)

DEFAULT_SIZES = [100_000, 300_000, 1_000_000]


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


def planned_analyses(store: Path, work: Path, at: str) -> dict[str, list[str]]:
    """The analysis commands timed at every size (argv after ``procmetrics``)."""
    s = str(store)
    return {
        "series": ["series", "--store", s],
        "changes": ["changes", "--store", s],
        "compare": ["compare", "--store", s, "--at", at],
        "compare_all": ["compare", "--store", s, "--at", at, "--all-subsystems"],
        "lifetimes": ["lifetimes", "--store", s, "--out", str(work / "lifetimes")],
        "growth": ["growth", "--store", s, "--out", str(work / "growth")],
        "report": ["report", "--store", s, "--out", str(work / "report"),
                   "--policy-date", at, "--pdf-engine", "none"],
    }


def analyses(store: Path, repo: Path, work: Path, commits: int,
             timeout: float, out: dict[str, object] | None = None,
             save=lambda: None) -> dict[str, object]:
    """Time every planned analysis command that exists, and the full report, into ``out``
    (saved after each command, so a stopped run keeps the commands it timed)."""
    sys.path.insert(0, str(HERE.parent))
    from procmetrics.cli import COMMANDS
    at, source = policy_date(repo, commits)
    out = {} if out is None else out
    out.update(policy_date=at, policy_date_source=source, store=store.name)
    for name, argv in planned_analyses(store, work, at).items():
        if argv[0] not in COMMANDS:
            out[name] = {"skipped": "command not available in this procmetrics"}
            continue
        print(f"  {name} ...", file=sys.stderr)
        out[name] = timed(procmetrics(*argv), timeout=timeout)
        save()
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


def measure_size(n: int, args: argparse.Namespace, work: Path, res: dict,
                 save) -> None:
    """Every figure at one size into ``res`` (saved after each step)."""
    prefixes = [n // 4, n // 2]
    repo = history(n, prefixes=prefixes, extra=1000)
    res["history"] = history_info(repo)
    res["history"]["non_merge_commits"] = n
    res["load_avg_start"] = os.getloadavg()
    print(f"[{n:,} commits] git log --raw baseline ...", file=sys.stderr)
    res["git_raw"] = git_log(repo, "main", "raw", args.repeats)
    print(f"[{n:,} commits] mining, paths only ...", file=sys.stderr)
    paths, paths_store = mined_pair(repo, "main", work, lines=False, repeats=args.big_repeats)
    res["mine_paths"] = paths
    res["stored_commits"] = count_commits(paths_store)
    res["store_bytes_per_commit_paths"] = round(store_size(paths_store) / res["stored_commits"])
    res["paths_ratio"] = round(paths["seconds"] / res["git_raw"]["seconds"], 2)
    save()
    store = paths_store
    if "lines" not in args.skip:
        print(f"[{n:,} commits] git log --numstat baseline, mining with line counts ...",
              file=sys.stderr)
        res["git_numstat"] = git_log(repo, "main", "numstat", args.repeats)
        lines, store = mined_pair(repo, "main", work, lines=True, repeats=args.big_repeats)
        res["mine_lines"] = lines
        res["store_bytes_per_commit_lines"] = round(store_size(store) / count_commits(store))
        res["lines_ratio"] = round(lines["seconds"] / res["git_numstat"]["seconds"], 2)
        save()
    if "memory" not in args.skip and n == max(args.sizes):
        res["memory"] = {}
        for p in prefixes:
            print(f"[{n:,} commits] memory at {p:,} commits ...", file=sys.stderr)
            r, st = mined_pair(repo, f"prefix/{p}", work, lines=False, repeats=1)
            res["memory"][str(p)] = {k: r[k] for k in ("peak_rss_mib", "peak_rss_main_mib",
                                                       "seconds", "exit_code")}
            st.unlink()
            save()
        res["memory"][str(n)] = {k: paths[k] for k in ("peak_rss_mib", "peak_rss_main_mib",
                                                       "seconds", "exit_code")}
    if "incremental" not in args.skip:
        print(f"[{n:,} commits] incremental mining of 1,000 commits ...", file=sys.stderr)
        res["incremental"] = incremental(repo, paths_store, work, lines=False,
                                         repeats=args.repeats)
        save()
    if "analyses" not in args.skip:
        print(f"[{n:,} commits] analyses and report ...", file=sys.stderr)
        res["analyses"] = {}
        analyses(store, repo, work, n, args.analysis_timeout, res["analyses"], save)
    print(f"[{n:,} commits] git log --raw baseline again ...", file=sys.stderr)
    res["git_raw_after"] = git_log(repo, "main", "raw", args.repeats)
    res["load_avg_end"] = os.getloadavg()


def output_name(sizes: list[int], name: str | None) -> str:
    """``latest`` for the default sizes, else ``latest-<size>-<size>...``."""
    if name:
        return name
    return "latest" if sizes == DEFAULT_SIZES else "latest-" + "-".join(map(str, sizes))


def write(out: Path, name: str, res: dict[str, object]) -> Path:
    """Write the results so far (a long run that is stopped keeps what it measured)."""
    out.mkdir(parents=True, exist_ok=True)
    (out / f"{name}.json").write_text(json.dumps(res, indent=2, sort_keys=True) + "\n")
    (out / f"{name}.md").write_text(report_md.render(res))
    return out / f"{name}.md"


def parse_args(argv: list[str] | None) -> argparse.Namespace:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", default=",".join(map(str, DEFAULT_SIZES)),
                    help="history sizes, non-merge commits, comma-separated (default: %(default)s)")
    ap.add_argument("--commits", type=int, help="one size only (same as --sizes N)")
    ap.add_argument("--small", type=int, default=2000, help="history size for pydriller")
    ap.add_argument("--repeats", type=int, default=3, help="repeats of small measurements")
    ap.add_argument("--big-repeats", type=int, default=1, help="repeats of full-history runs")
    ap.add_argument("--skip", action="append", default=[],
                    choices=["lines", "memory", "incremental", "analyses", "pydriller"])
    ap.add_argument("--out", type=Path, default=RESULTS, help="results folder")
    ap.add_argument("--name", help="results file name without suffix (default: latest for the "
                                   "default sizes, else latest-<sizes>); keeps committed files")
    ap.add_argument("--analysis-timeout", type=float, default=1800.0,
                    help="seconds before an analysis command is stopped and recorded as such")
    ap.add_argument("--no-gate", action="store_true", help="report the comparison, never fail")
    ap.add_argument("--baseline", type=Path, action="append", default=[],
                    help="results JSON to gate against (repeatable; default: the committed "
                         "results of this name, latest-<sizes>.json, latest.json, latest-<N>.json)")
    ap.add_argument("--tolerance", type=float, default=gate.TOLERANCE,
                    help="allowed rise of a figure before the gate fails (default: %(default)s)")
    args = ap.parse_args(argv)
    try:
        sizes = [args.commits] if args.commits else [int(s) for s in args.sizes.split(",") if s]
    except ValueError:
        ap.error(f"--sizes: not a comma-separated list of integers: {args.sizes!r}")
    if not sizes or min(sizes) < 1000:
        ap.error("--sizes: give sizes of at least 1000 commits")
    args.sizes = sorted(set(sizes))
    return args


def main(argv: list[str] | None = None) -> int:
    args = parse_args(argv)
    name = output_name(args.sizes, args.name)
    keys = [str(n) for n in args.sizes]
    # read before this run writes anything: the committed results it is gated against
    cands = ([(json.loads(p.read_text()), str(p)) for p in args.baseline] if args.baseline
             else gate.default_candidates(args.out, name, keys))
    baselines = gate.find_baselines(keys, cands)
    res: dict[str, object] = {"machine": machine(), "sizes": {}, "skip": args.skip,
                              "started": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
                              "load_avg_start": os.getloadavg()}
    args.out.mkdir(parents=True, exist_ok=True)
    written = None
    try:
        for n in args.sizes:
            work = Path(tempfile.mkdtemp(prefix="tmp-", dir=args.out))
            res["sizes"][str(n)] = {}
            try:
                measure_size(n, args, work, res["sizes"][str(n)], lambda: write(args.out, name, res))
            finally:
                shutil.rmtree(work, ignore_errors=True)
            res["growth"] = growth_fit.growth_table(res["sizes"])
            written = write(args.out, name, res)
        if "pydriller" not in args.skip:
            work = Path(tempfile.mkdtemp(prefix="tmp-", dir=args.out))
            try:
                print(f"pydriller loop vs procmetrics on {args.small} commits ...", file=sys.stderr)
                small = history(args.small, prefixes=[], extra=0, small_tree=True)
                res["pydriller"] = pydriller_ratio(small, work, args.repeats)
            finally:
                shutil.rmtree(work, ignore_errors=True)
        res["gate"] = gate.gate(res["sizes"], baselines, args.tolerance)
        res["gate"]["enforced"] = not args.no_gate
    finally:
        res["load_avg_end"] = os.getloadavg()
        res["finished"] = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
        written = write(args.out, name, res)
        print(f"wrote {written} and {written.with_suffix('.json').name}", file=sys.stderr)
    print("\n".join(report_md.growth_lines(res)), file=sys.stderr)
    print("\n".join(gate.summary(res["gate"])), file=sys.stderr)
    return 0 if res["gate"]["passed"] or args.no_gate else 1


if __name__ == "__main__":
    sys.exit(main())
