"""Blame the lines a fixing commit removed or changed (input to SZZ-style linking).

For a fix commit ``F`` with one parent ``P``: ``git diff -U0 -M P F`` lists the
hunks; every line removed or changed in ``P`` is blamed with
``git blame --porcelain [-w] -L a,b P -- path``. The commit that last touched
such a line is a *candidate* introducer (Śliwerski, Zimmermann & Zeller 2005).

Runs through :class:`procmetrics.mine.git.GitRepo` (read-only, controlled
environment). pydriller's ``Git`` is deliberately not used: opening a
repository with it writes ``blame.markUnblamableLines`` into the repository's
``.git/config``.

Rows (:data:`BLAME_COLUMNS`): ``fix_hash``, ``path`` (in the parent), ``line``
(line number in the parent), ``blamed_hash``, ``blamed_path``. Fixes that only
add lines, merges and root commits give no rows; they are counted in
:class:`BlameRun`.
"""
from __future__ import annotations

import re
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Iterable

import pandas as pd

from procmetrics.errors import GitFailed
from procmetrics.mine.git import GitRepo

BLAME_COLUMNS = ["fix_hash", "path", "line", "blamed_hash", "blamed_path"]
_HUNK = re.compile(r"^@@ -(\d+)(?:,(\d+))? \+\d+(?:,\d+)? @@")
_PORCELAIN = re.compile(r"^([0-9a-f]{40}) (\d+) (\d+)(?: (\d+))?$")


@dataclass(frozen=True)
class BlameRun:
    """Blame rows for a set of fixes and the fixes that could not be blamed."""

    rows: pd.DataFrame
    n_fixes: int
    added_only: tuple[str, ...] = field(default_factory=tuple)     # nothing to blame
    skipped_merges: tuple[str, ...] = field(default_factory=tuple)
    skipped_roots: tuple[str, ...] = field(default_factory=tuple)
    failed: tuple[str, ...] = field(default_factory=tuple)


def removed_lines(git: GitRepo, fix_hash: str, parent: str) -> dict[str, list[tuple[int, int]]]:
    """Line ranges (start, count) in the parent removed or changed by the fix, per path."""
    out = git.text("-c", "core.quotePath=false", "diff", "-U0", "--no-color", "--no-ext-diff",
                   "--no-textconv", "-M", parent, fix_hash, "--")
    ranges: dict[str, list[tuple[int, int]]] = {}
    path: str | None = None
    for line in out.splitlines():
        if line.startswith("--- "):
            src = line[4:]
            path = None if src == "/dev/null" else (src[2:] if src.startswith("a/") else src)
        elif line.startswith("@@") and path is not None:
            m = _HUNK.match(line)
            if m:
                start, count = int(m.group(1)), int(m.group(2) or 1)
                if count > 0:
                    ranges.setdefault(path, []).append((start, count))
    return ranges


def _blame(git: GitRepo, parent: str, path: str, ranges: list[tuple[int, int]],
           ignore_whitespace: bool) -> list[tuple[int, str, str]]:
    # --no-ignore-revs-file: drop files named by blame.ignoreRevsFile in the repository's
    # config (untrusted; /dev/zero would hang git); --no-textconv: blame would otherwise
    # run textconv and filter programs the repository's attributes and config name
    args = ["blame", "--porcelain", "--no-ignore-revs-file", "--no-textconv"] + \
        (["-w"] if ignore_whitespace else [])
    for start, count in ranges:
        args += ["-L", f"{start},{start + count - 1}"]
    out = git.text(*args, parent, "--", path)
    rows: list[tuple[int, str, str]] = []
    names: dict[str, str] = {}
    current: tuple[int, str] | None = None
    for line in out.splitlines():
        m = _PORCELAIN.match(line)
        if m:
            current = (int(m.group(3)), m.group(1))   # line number in the blamed revision
        elif line.startswith("filename ") and current is not None:
            names[current[1]] = line[len("filename "):]
        elif line.startswith("\t") and current is not None:
            rows.append((current[0], current[1], names.get(current[1], path)))
            current = None
    return rows


def _blame_one(git: GitRepo, fix: str, ignore_whitespace: bool
               ) -> tuple[str, list[tuple[str, str, int, str, str]]]:
    """Blame one fix: (outcome, rows); outcome is ok, added_only, merge, root or failed."""
    try:
        parents = git.text("rev-list", "--parents", "-n", "1", fix, "--").split()[1:]
    except GitFailed:
        return "failed", []
    if len(parents) == 0:
        return "root", []
    if len(parents) > 1:
        return "merge", []
    rows: list[tuple[str, str, int, str, str]] = []
    try:
        ranges = removed_lines(git, fix, parents[0])
        if not ranges:
            return "added_only", []
        for path, rr in sorted(ranges.items()):
            # the blame line number printed is the final (parent) line number
            for line_no, h, bpath in _blame(git, parents[0], path, rr, ignore_whitespace):
                rows.append((fix, path, line_no, h, bpath))
    except GitFailed:
        return "failed", []
    return "ok", rows


def blame_fixes(repo: str | GitRepo, fix_hashes: Iterable[str], *,
                ignore_whitespace: bool = True, jobs: int = 1) -> BlameRun:
    """Blame the removed/changed lines of each fix in its (single) parent.

    Never writes to the repository. Cost grows with file history depth:
    roughly 0.05-1 s per fix on real histories; ``jobs > 1`` runs that many
    git processes at once (the result does not depend on ``jobs``).
    """
    git = repo if isinstance(repo, GitRepo) else GitRepo.open(repo)
    fixes = list(dict.fromkeys(fix_hashes))
    if jobs > 1 and len(fixes) > 1:
        with ThreadPoolExecutor(max_workers=jobs) as pool:
            done = list(pool.map(lambda f: _blame_one(git, f, ignore_whitespace), fixes))
    else:
        done = [_blame_one(git, f, ignore_whitespace) for f in fixes]
    rows: list[tuple[str, str, int, str, str]] = []
    kinds: dict[str, list[str]] = {"added_only": [], "merge": [], "root": [], "failed": []}
    for fix, (kind, r) in zip(fixes, done):
        rows += r
        if kind != "ok":
            kinds[kind].append(fix)
    df = pd.DataFrame(rows, columns=BLAME_COLUMNS)
    return BlameRun(df, len(fixes), tuple(kinds["added_only"]), tuple(kinds["merge"]),
                    tuple(kinds["root"]), tuple(kinds["failed"]))
