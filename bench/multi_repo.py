"""Measure parallel mining of several repositories (the design of procmetrics.mine.multi).

Four synthetic histories (``--commits`` each, small tree) are mined into one
store: one after another (``--jobs 1``) and with ``--jobs 2``, on SQLite and,
when PostgreSQL is installed, on a throw-away server started with ``.ci/pg``.
The share of a single run spent inside the store writer bounds what any
parallel design can gain when writes are serialised (Amdahl): that share is
measured too, by timing ``StoreWriter`` calls in one run.

    python bench/multi_repo.py --commits 5000
"""
from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import run  # noqa: E402

WRITER_SHARE = r"""
import sys, time, json
import procmetrics.store.writer as W
from procmetrics.mine import MineOptions, mine_repository
spent = [0.0]
for name in ("write_batch", "update_links", "add_path_subsystems", "replace_tags",
             "ensure_indexes", "drop_indexes_if_empty", "complete_run", "unmapped_paths",
             "links_to_check", "stored_matches", "totals", "refresh_statistics"):
    f = getattr(W.StoreWriter, name, None)
    if f is None:
        continue
    def wrap(*a, _f=f, **k):
        t = time.perf_counter()
        try:
            return _f(*a, **k)
        finally:
            spent[0] += time.perf_counter() - t
    setattr(W.StoreWriter, name, wrap)
t = time.perf_counter()
mine_repository(sys.argv[1], store=sys.argv[2], options=MineOptions(ref="main",
                progress=False, line_counts=False))
total = time.perf_counter() - t
print(json.dumps({"total_s": total, "store_s": spent[0]}))
"""


def histories(commits: int, k: int) -> list[Path]:
    out = []
    for seed in range(1, k + 1):
        path = run.CACHE / f"multi-{commits}-s{seed}"
        if not (path / ".git" / "bench-complete.json").exists():
            shutil.rmtree(path, ignore_errors=True)
            run.generate.main(["--commits", str(commits), "--extra", "0", "--out", str(path),
                               "--seed", str(seed), *run.SMALL_TREE])
        out.append(path)
    return out


def mine_all(paths: list[Path], store: str, jobs: int) -> float:
    start = time.perf_counter()
    subprocess.run(run.procmetrics("mine", *map(str, paths), "--store", store, "--ref", "main",
                                   "--no-line-counts", "--no-progress", "--jobs", str(jobs)),
                   check=True, stdout=subprocess.DEVNULL)
    return round(time.perf_counter() - start, 2)


def fresh_pg_schema(base_url: str, name: str) -> str:
    from sqlalchemy import create_engine, text
    eng = create_engine(base_url, isolation_level="AUTOCOMMIT")
    with eng.connect() as c:
        c.execute(text(f'DROP SCHEMA IF EXISTS "{name}" CASCADE'))
        c.execute(text(f'CREATE SCHEMA "{name}"'))
    eng.dispose()
    return f"{base_url}?options=-csearch_path%3D{name}"


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--commits", type=int, default=5000)
    ap.add_argument("--repos", type=int, default=4)
    ap.add_argument("--out", type=Path, default=run.RESULTS / "multi_repo.json")
    args = ap.parse_args(argv)
    paths = histories(args.commits, args.repos)
    work = Path(tempfile.mkdtemp(prefix="tmp-multi-", dir=run.RESULTS))
    res: dict[str, object] = {"machine": run.machine(), "repos": args.repos,
                              "commits_each": args.commits, "load_avg_start": os.getloadavg()}
    pgdir = work / "pg"
    try:
        share = subprocess.run([sys.executable, "-c", WRITER_SHARE, str(paths[0]),
                                str(work / "share.sqlite")], check=True, capture_output=True,
                               text=True).stdout
        res["single_run"] = json.loads(share.strip().splitlines()[-1])
        for jobs in (1, 2):
            store = work / f"s{jobs}.sqlite"
            res[f"sqlite_jobs{jobs}_s"] = mine_all(paths, str(store), jobs)
        try:
            url = subprocess.run(["sh", str(HERE.parent / ".ci" / "pg"), "start", str(pgdir)],
                                 check=True, capture_output=True, text=True).stdout.strip()
        except (subprocess.CalledProcessError, OSError) as exc:
            res["postgresql"] = f"not measured: {exc}"
        else:
            for jobs in (1, 2):
                res[f"postgresql_jobs{jobs}_s"] = mine_all(
                    paths, fresh_pg_schema(url, f"bench{jobs}"), jobs)
    finally:
        subprocess.run(["sh", str(HERE.parent / ".ci" / "pg"), "stop", str(pgdir)],
                       capture_output=True)
        shutil.rmtree(work, ignore_errors=True)
        res["load_avg_end"] = os.getloadavg()
        args.out.write_text(json.dumps(res, indent=2, sort_keys=True) + "\n")
        print(json.dumps(res, indent=2, sort_keys=True))
    return 0


if __name__ == "__main__":
    sys.exit(main())
