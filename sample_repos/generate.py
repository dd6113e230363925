#!/usr/bin/env python3
"""Write the synthetic demo history "aurora-fw" with ``git fast-import``.

aurora-fw is the invented motor-controller firmware of the invented company
Halvard Motion Systems.  Every person, address and subsystem in it is made up.
The history carries one planted process change (review becomes mandatory on
CHANGE_DATE; defects introduced afterwards are rarer and are fixed sooner), so
procmetrics' analyses can be checked against a known ground truth, written as
JSON beside the repository.

Usage::

    python sample_repos/generate.py --out DIR [--seed N] [--commits N]
    python sample_repos/generate.py --print-change-date

Only the standard library is used, and only ``random.Random.random()`` draws
numbers (its sequence for a given seed is stable across Python versions), so
the same seed gives byte-identical commits (same hashes) everywhere.
"""
from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _aurora_model import (  # noqa: E402  (sibling module of this script)
    CHANGE_DATE,
    DEFAULT_COMMITS,
    DEFAULT_SEED,
    MIN_COMMITS,
    PROJECT,
    History,
    plan_history,
)
from _aurora_stream import write_stream  # noqa: E402

GENERATOR_ID = "procmetrics sample_repos/generate.py"
MARKER_NAME = "aurora-demo-generator.marker"   # written inside DIR/.git
MARKER_TEXT = f"{GENERATOR_ID}: this repository is rebuilt on every run\n"


class RefusedOutput(Exception):
    """The output location exists and was not made by this generator."""


def git_env() -> dict[str, str]:
    """A minimal environment for git: no system/global config, fixed locale."""
    env = {
        "PATH": os.environ.get("PATH", "/usr/local/bin:/usr/bin:/bin"),
        "GIT_CONFIG_NOSYSTEM": "1",
        "GIT_CONFIG_GLOBAL": os.devnull,
        "GIT_TERMINAL_PROMPT": "0",
        "LC_ALL": "C",
        "TZ": "UTC",
    }
    if "HOME" in os.environ:
        env["HOME"] = os.environ["HOME"]
    return env


def truth_path_for(out: Path) -> Path:
    """The ground-truth file lives beside the repository: ``DIR.truth.json``."""
    return out.parent / (out.name + ".truth.json")


def prepare_output(out: Path) -> None:
    """Remove a previous demo build at ``out``; refuse anything else."""
    truth = truth_path_for(out)
    if truth.exists():
        try:
            ours = json.loads(truth.read_text(encoding="utf-8")).get("generator") == GENERATOR_ID
        except (ValueError, OSError, AttributeError):
            ours = False
        if not ours:
            raise RefusedOutput(f"refusing to overwrite {truth}: not written by this generator")
    if out.is_symlink():
        raise RefusedOutput(f"refusing to use {out}: it is a symbolic link")
    if not out.exists():
        return
    if not out.is_dir():
        raise RefusedOutput(f"refusing to replace {out}: it is not a directory")
    marker = out / ".git" / MARKER_NAME
    if marker.is_file() and marker.read_text(encoding="utf-8", errors="replace") == MARKER_TEXT:
        shutil.rmtree(out)
        return
    if any(out.iterdir()):
        raise RefusedOutput(
            f"refusing to delete {out}: it is not empty and has no marker from this generator")


def git(args: list[str], cwd: Path, **kw) -> subprocess.CompletedProcess:
    return subprocess.run(["git", *args], cwd=cwd, env=git_env(), check=True,
                          stdout=subprocess.PIPE, stderr=subprocess.PIPE, **kw)


def build(out: Path, seed: int, commits: int) -> tuple[Path, dict]:
    """Build the repository at ``out`` and its truth file; return (truth path, truth)."""
    history: History = plan_history(seed=seed, n_commits=commits)
    prepare_output(out)
    out.mkdir(parents=True, exist_ok=True)
    git(["init", "--quiet", "--template=", "--initial-branch=main", str(out)], cwd=out.parent)
    (out / ".git" / MARKER_NAME).write_text(MARKER_TEXT, encoding="utf-8")
    with tempfile.TemporaryDirectory(prefix="aurora-fi-") as tmp:
        marks_file = Path(tmp) / "marks"
        err_file = Path(tmp) / "stderr"
        with open(err_file, "wb") as err:
            proc = subprocess.Popen(
                ["git", "fast-import", "--quiet", "--done", "--date-format=raw",
                 f"--export-marks={marks_file}"],
                cwd=out, env=git_env(), stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                stderr=err)
            try:
                write_stream(history, proc.stdin, proc.stdout)
                proc.stdin.close()
                rc = proc.wait()
            except BaseException:
                proc.kill()
                proc.wait()
                raise
        if rc != 0:
            raise RuntimeError("git fast-import failed: "
                               + err_file.read_text(encoding="utf-8", errors="replace"))
        marks = {}
        for line in marks_file.read_text(encoding="ascii").splitlines():
            mark, sha = line.split()
            marks[int(mark[1:])] = sha
    for ref in history.scratch_refs:
        git(["update-ref", "-d", ref], cwd=out)
    git(["reset", "--quiet", "--hard", "main"], cwd=out)
    head = git(["rev-parse", "HEAD"], cwd=out).stdout.decode().strip()
    truth = history.truth(marks, head=head, seed=seed, requested=commits)
    truth = {"generator": GENERATOR_ID, **truth}
    tpath = truth_path_for(out)
    tpath.write_text(json.dumps(truth, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
    return tpath, truth


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(
        prog="generate.py",
        description=f"Write the synthetic demo git history '{PROJECT}' and its ground truth.")
    ap.add_argument("--out", type=Path, help="repository directory to (re)build")
    ap.add_argument("--seed", type=int, default=DEFAULT_SEED,
                    help=f"random seed (default {DEFAULT_SEED})")
    ap.add_argument("--commits", type=int, default=DEFAULT_COMMITS,
                    help=f"total commits incl. merges (default {DEFAULT_COMMITS}, "
                         f"minimum {MIN_COMMITS})")
    ap.add_argument("--print-change-date", action="store_true",
                    help="print the planted process-change date (YYYY-MM-DD) and exit")
    args = ap.parse_args(argv)
    if args.print_change_date:
        print(CHANGE_DATE.isoformat())
        return 0
    if args.out is None:
        ap.error("--out DIR is required")
    if args.commits < MIN_COMMITS:
        ap.error(f"--commits must be at least {MIN_COMMITS}")
    if args.seed < 0:
        ap.error("--seed must be >= 0")
    out = args.out.resolve()
    try:
        tpath, truth = build(out, args.seed, args.commits)
    except RefusedOutput as exc:
        print(f"generate.py: {exc}", file=sys.stderr)
        return 3
    except (subprocess.CalledProcessError, RuntimeError) as exc:
        detail = getattr(exc, "stderr", b"") or b""
        print(f"generate.py: {exc} {detail.decode(errors='replace')}".rstrip(), file=sys.stderr)
        return 4
    h = truth["history"]
    print(f"{PROJECT}: {h['commits']} commits ({h['merges']} merges), "
          f"{len(truth['tags'])} tags, HEAD {truth['head'][:12]} in {out}")
    print(f"ground truth: {tpath}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
