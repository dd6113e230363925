"""Measure commit equivalence by patch id on a large generated upstream against
``git log -p`` of the same range (the cost of carry-over's content matching).

    python bench/patch_ids.py --commits 100000      # default; builds the history once
    python bench/patch_ids.py --commits 20000 --repeats 1

Figures (each the median of ``--repeats`` runs, wall seconds, peak RSS of the
process tree), on the synthetic history of ``bench/generate.py`` (small tree):

* ``git log -p --no-merges main`` to /dev/null: the baseline;
* procmetrics' patch ids of every non-merge commit, in the batches ``mine
  --upstream`` uses (``procmetrics.mine.git.patch_ids``: one ``git log -p`` piped
  into one ``git patch-id --stable`` per batch), without the store writes;
* the same under a path map of one folder (``mapped_patch_ids``) against
  ``git log -p --no-merges main -- <folder>``;
* the matching itself (``analyse.carryover.match_commits``) of the upstream against
  a tree holding a tenth of its patch ids under other hashes.

The ratio procmetrics / baseline is printed and written to
``bench/results/patch-ids-<N>.{json,md}``. No test asserts a time.
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))
import run  # noqa: E402

CHILD = r"""
import sys, time
from procmetrics.mine.git import GitRepo, mapped_patch_ids, patch_ids
from procmetrics.mine.upstream import PATCH_ID_BATCH
repo = GitRepo.open(sys.argv[1])
commits = repo.text("rev-list", "--no-merges", "main").split()
folder = sys.argv[2]
n = 0
for i in range(0, len(commits), PATCH_ID_BATCH):
    part = commits[i:i + PATCH_ID_BATCH]
    n += len(patch_ids(repo, part) if not folder else
             mapped_patch_ids(repo, part, [(folder, "mirror/")]))
print(n)
"""

MATCH = r"""
import sys, time
import numpy as np, pandas as pd
from procmetrics.analyse.carryover.equivalence import match_commits
from procmetrics.mine.git import GitRepo, patch_ids
repo = GitRepo.open(sys.argv[1])
commits = repo.text("rev-list", "--no-merges", "main").split()
rows = patch_ids(repo, commits)
up = pd.DataFrame(rows, columns=["hash", "patch_id"])
dates = pd.date_range("2010-01-01", periods=len(up), freq="min", tz="UTC")
upc = pd.DataFrame({"hash": up["hash"], "committer_date": dates})
pick = up.sample(frac=0.1, random_state=1)
tree = pd.DataFrame({"hash": [f"{i:040x}" for i in range(len(pick))],
                     "patch_id": pick["patch_id"].to_numpy()})
treec = pd.DataFrame({"hash": tree["hash"], "committer_date": dates[:len(tree)]})
bl = pd.DataFrame(columns=["hash", "style", "cited_hash"])
t = time.perf_counter()
m = match_commits(upc, treec, bl, up, tree)
print(f"{time.perf_counter() - t:.3f} {len(m)} {len(up)} {len(tree)}")
"""


def top_folder(repo: Path) -> str:
    """The folder with the most files at the tip (for the path-map figure)."""
    names = subprocess.run(["git", "-C", str(repo), "ls-tree", "-r", "--name-only", "main"],
                           capture_output=True, text=True, check=True,
                           env=run.git_env()).stdout.split()
    counts: dict[str, int] = {}
    for n in names:
        if "/" in n:
            d = n.split("/", 1)[0] + "/"
            counts[d] = counts.get(d, 0) + 1
    return max(sorted(counts), key=counts.get)


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--commits", type=int, default=100_000)
    p.add_argument("--repeats", type=int, default=3)
    a = p.parse_args(argv)
    repo = run.history(a.commits, prefixes=[], extra=0, small_tree=True)
    folder = top_folder(repo)
    py = [sys.executable, "-c"]
    env = {**run.git_env(), "PYTHONPATH": str(HERE.parent)}
    res: dict[str, object] = {"commits": a.commits, "repeats": a.repeats,
                              "machine": run.machine(), "folder": folder}
    res["git_log_p"] = run.median_of([run.timed(["git", "-C", str(repo), "log", "-p",
                                                 "--no-merges", "main"], env=run.git_env())
                                      for _ in range(a.repeats)])
    res["git_log_p_no_renames"] = run.median_of([run.timed(
        ["git", "-C", str(repo), "log", "-p", "--no-renames", "--no-merges", "main"],
        env=run.git_env()) for _ in range(a.repeats)])
    res["patch_ids"] = run.median_of([run.timed(py + [CHILD, str(repo), ""], env=env)
                                      for _ in range(a.repeats)])
    res["git_log_p_folder"] = run.median_of([run.timed(
        ["git", "-C", str(repo), "log", "-p", "--no-merges", "main", "--", folder],
        env=run.git_env()) for _ in range(a.repeats)])
    res["mapped_patch_ids"] = run.median_of([run.timed(py + [CHILD, str(repo), folder],
                                                       env=env) for _ in range(a.repeats)])
    out = subprocess.run(py + [MATCH, str(repo)], capture_output=True, text=True, env=env,
                         check=True).stdout.split()
    res["match_seconds"], res["matched"] = float(out[0]), int(out[1])
    res["upstream_patch_ids"], res["tree_patch_ids"] = int(out[2]), int(out[3])
    base, ours = res["git_log_p"]["seconds"], res["patch_ids"]["seconds"]
    fbase, fours = res["git_log_p_folder"]["seconds"], res["mapped_patch_ids"]["seconds"]
    nr = res["git_log_p_no_renames"]["seconds"]
    res["ratio"] = round(ours / base, 2) if base else None
    res["ratio_no_renames"] = round(ours / nr, 2) if nr else None
    res["ratio_mapped"] = round(fours / fbase, 2) if fbase else None
    load = [round(x, 2) for x in os.getloadavg()]
    res["load_avg_end"] = load
    lines = [f"# Patch-id equivalence, {a.commits:,} commits (median of {a.repeats})", "",
             "| figure | seconds | peak RSS (MiB) |", "|---|---|---|",
             f"| `git log -p --no-merges main` | {base} | {res['git_log_p']['peak_rss_mib']} |",
             f"| `git log -p --no-renames --no-merges main` (the diff work procmetrics asks "
             f"for) | {nr} | {res['git_log_p_no_renames']['peak_rss_mib']} |",
             f"| procmetrics patch ids (log -p piped to patch-id --stable, batches) | {ours} "
             f"| {res['patch_ids']['peak_rss_mib']} |",
             f"| `git log -p --no-merges main -- {folder}` | {fbase} | "
             f"{res['git_log_p_folder']['peak_rss_mib']} |",
             f"| procmetrics patch ids under the path map {folder} -> mirror/ | {fours} | "
             f"{res['mapped_patch_ids']['peak_rss_mib']} |",
             f"| matching {res['upstream_patch_ids']:,} upstream against "
             f"{res['tree_patch_ids']:,} tree patch ids | {res['match_seconds']} | – |", "",
             f"Ratio procmetrics / `git log -p`: {res['ratio']} (whole history; "
             f"{res['ratio_no_renames']} against `git log -p --no-renames`, which skips the "
             "rename detection plain `git log -p` does by default), "
             f"{res['ratio_mapped']} (one folder under a path map). Load average after: "
             f"{load}."]
    results = HERE / "results"
    results.mkdir(exist_ok=True)
    (results / f"patch-ids-{a.commits}.json").write_text(json.dumps(res, indent=2) + "\n")
    (results / f"patch-ids-{a.commits}.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
