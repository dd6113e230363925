#!/usr/bin/env python3
"""What a scope of a few thousand globs costs, as a ratio against the unscoped command.

Builds (or reuses) the synthetic history of ``bench/generate.py`` in
``bench/cache/kernel-<N>/``, mines it paths-only into a fresh SQLite store, writes a
scope file of ``--globs`` patterns drawn from the stored folders (a third directory
globs ``leaf/**`` for 50 folders without subfolders, a third ``dir/x*.[ch]``-style globs,
the rest literal files: a scope of some thousands of the tens of thousands of paths,
as a product's is; plus two ``**`` excludes and five patterns matching nothing), and
times, in the same run (median of ``--repeat``):

- loading the tidy tables (``procmetrics.session.load_tables``) without and with the
  scope, the selection step alone (glob matching + SQL) and the glob matching alone
  (once per distinct path), and
- the whole ``procmetrics series --no-trend`` command, without and with ``--scope``.

Results go to ``bench/results/scope-<N>.json`` and ``.md`` with the machine's load
average before and after. Not part of the test suite.
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import random
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))


def _history(n: int) -> Path:
    repo = HERE / "cache" / f"kernel-{n}"
    if not (repo / ".git" / "bench-complete.json").is_file():
        subprocess.run([sys.executable, str(HERE / "generate.py"), "--out", str(repo),
                        "--commits", str(n)], check=True)
    return repo


def _store(repo: Path, n: int) -> Path:
    store = HERE / "cache" / f"scope-{n}.sqlite"
    if not store.is_file():
        subprocess.run([sys.executable, "-m", "procmetrics", "mine", str(repo), "--store",
                        str(store), "--no-line-counts", "--no-progress"], check=True,
                       env={**os.environ, "PYTHONPATH": str(ROOT)})
    return store


def _scope_file(store: Path, n_globs: int, seed: int) -> tuple[Path, int]:
    from procmetrics.store import open_store
    from procmetrics.store.scopesql import distinct_paths
    from procmetrics.store.tables import snapshot

    engine = open_store(str(store), create=False, readonly=True)
    try:
        with snapshot(engine) as conn:
            paths = distinct_paths(conn, "kernel-" + store.stem.split("-")[1])
    finally:
        engine.dispose()
    rng = random.Random(seed)
    dirs = sorted({p.rsplit("/", 1)[0] for p in paths if "/" in p})
    leaves = [d for d in dirs if not any(o.startswith(d + "/") for o in dirs)]
    pats: list[str] = [d + "/**" for d in rng.sample(leaves, min(50, len(leaves)))]
    for k in range(n_globs - len(pats)):
        if k % 3 == 0:
            d = rng.choice(dirs)
            pats.append(f"{d}/{rng.choice('abcdefghilmnoprstu')}*.[ch]")
        else:
            pats.append(rng.choice(paths))
    pats += [f"no/such/folder-{i}/**" for i in range(5)]
    out = HERE / "cache" / f"scope-{len(pats)}-globs.toml"
    body = ",\n  ".join(json.dumps(p) for p in pats)
    out.write_text(f"[scope.big]\ninclude = [\n  {body}\n]\nexclude = [\"**/*_test.c\", "
                   "\"**/tests/**\"]\n", encoding="utf-8")
    return out, len(paths)


def _stored(store: Path, name: str) -> list[str]:
    from procmetrics.store import open_store
    from procmetrics.store.scopesql import distinct_paths
    from procmetrics.store.tables import snapshot

    engine = open_store(str(store), create=False, readonly=True)
    try:
        with snapshot(engine) as conn:
            return distinct_paths(conn, name)
    finally:
        engine.dispose()


def _time(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--commits", type=int, default=200_000)
    p.add_argument("--globs", type=int, default=3000)
    p.add_argument("--repeat", type=int, default=3)
    p.add_argument("--seed", type=int, default=20240601)
    args = p.parse_args(argv)

    from procmetrics.scope.apply import ScopeRequest
    from procmetrics.scope.definition import read_scope
    from procmetrics.scope.select import select_scope
    from procmetrics.session import load_tables
    from procmetrics.store import open_store
    from procmetrics.store.tables import snapshot

    repo = _history(args.commits)
    store = _store(repo, args.commits)
    scope, n_paths = _scope_file(store, args.globs, args.seed)
    load0 = os.getloadavg()
    name = f"kernel-{args.commits}"
    req = ScopeRequest(f"{scope}:big")
    sel_holder = {}

    def select_only() -> None:
        engine = open_store(str(store), create=False, readonly=True)
        try:
            with snapshot(engine) as conn:
                sel_holder["sel"] = select_scope(conn, name, read_scope(f"{scope}:big"))
        finally:
            engine.dispose()

    def cli(*extra: str) -> None:
        subprocess.run([sys.executable, "-m", "procmetrics", "series", "--store", str(store),
                        "--no-trend", "--metric", "review_coverage", *extra], check=True,
                       capture_output=True, env={**os.environ, "PYTHONPATH": str(ROOT)})

    rows = {}
    rows["load, unscoped"] = _time(lambda: load_tables(str(store), None), args.repeat)
    rows["load, scoped"] = _time(lambda: load_tables(str(store), None, req), args.repeat)
    rows["selection alone (match + SQL)"] = _time(select_only, args.repeat)
    sd = read_scope(f"{scope}:big")
    stored = _stored(store, name)
    rows["glob matching alone"] = _time(lambda: (sd.include.match(stored),
                                                 sd.exclude.match(stored)), args.repeat)
    rows["series command, unscoped"] = _time(lambda: cli(), args.repeat)
    rows["series command, scoped"] = _time(lambda: cli("--scope", f"{scope}:big"),
                                           args.repeat)
    load1 = os.getloadavg()
    sel = sel_holder["sel"]
    res = {
        "commits": args.commits, "globs": len(read_scope(f"{scope}:big").include.patterns),
        "stored_paths": n_paths, "paths_selected": len(sel.paths),
        "commits_selected": int((~sel.commits["is_merge"]).sum()),
        "unmatched_patterns": len(sel.unmatched_include),
        "seconds": {k: round(v, 3) for k, v in rows.items()},
        "ratio_load": round(rows["load, scoped"] / rows["load, unscoped"], 3),
        "ratio_series": round(rows["series command, scoped"]
                              / rows["series command, unscoped"], 3),
        "added_seconds_series": round(rows["series command, scoped"]
                                      - rows["series command, unscoped"], 3),
        "machine": {"cpu": platform.processor() or platform.machine(),
                    "cores": os.cpu_count(), "python": platform.python_version()},
        "load_average": {"before": [round(x, 2) for x in load0],
                         "after": [round(x, 2) for x in load1]},
        "repeat": args.repeat,
    }
    out = HERE / "results" / f"scope-{args.commits}"
    out.with_suffix(".json").write_text(json.dumps(res, indent=1) + "\n", encoding="utf-8")
    md = [f"# Scope benchmark: {args.commits:,} commits, {res['globs']:,} globs", "",
          f"{res['stored_paths']:,} stored paths; the scope selects {res['paths_selected']:,} "
          f"paths and {res['commits_selected']:,} non-merge commits; "
          f"{res['unmatched_patterns']} patterns match nothing (listed, by design).", "",
          "| step | seconds (median of %d) |" % args.repeat, "|---|---|"]
    md += [f"| {k} | {v:.3f} |" for k, v in res["seconds"].items()]
    md += ["", f"Ratio scoped/unscoped: loading {res['ratio_load']}, series command "
               f"{res['ratio_series']} (+{res['added_seconds_series']} s). Load average "
               f"{res['load_average']['before']} before, {res['load_average']['after']} after."]
    out.with_suffix(".md").write_text("\n".join(md) + "\n", encoding="utf-8")
    print("\n".join(md))
    return 0


if __name__ == "__main__":
    sys.exit(main())
