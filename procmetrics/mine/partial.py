"""Incomplete clones: partial clones mined paths-only, missing objects named.

A blobless partial clone (``git clone --filter=blob:none``) has every commit and
tree but no file contents (:meth:`GitRepo.is_partial_clone`: promisor packs or
remote, and blobs of the tip's tree absent). procmetrics never fetches (``GIT_NO_LAZY_FETCH``, no
transport allowed), so such a clone is mined **paths only**: no line counts,
renames only where the content is identical (``-M100%`` compares object ids and
reads no blob), and a ``.mailmap`` whose blob is absent is skipped with a warning
(identities as committed). The run records the mode in its message
(:data:`PARTIAL_NOTE`) and the report flags every figure with it.

A full clone that lacks a few objects fails ``git log --numstat`` with
``unable to read <id>``; :func:`explain_missing_object` names the object, the
commit and path it belongs to, and the remedies.
"""
from __future__ import annotations

import re
import warnings
from dataclasses import replace
from typing import Any, Iterator

from procmetrics.errors import DataQualityWarning, GitFailed
from procmetrics.mine.logstream import parse_log

PARTIAL_NOTE = ("partial clone: paths only (no line counts, renames only where the "
                "content is identical, nothing fetched)")


def paths_only(git: Any, tip: str, opts: Any) -> tuple[Any, Any]:
    """Options and repository handle for mining a partial clone without fetching."""
    if opts.line_counts:
        opts = replace(opts, line_counts=False)
    warnings.warn(f"partial clone: {git.path} has no file contents (a --filter clone) and "
                  "procmetrics never fetches: mined paths only, without line counts, and "
                  "renames count only where the content is identical", DataQualityWarning,
                  stacklevel=3)
    rev = git.mailmap_rev or tip
    proc = git._run(["rev-parse", "--verify", "--quiet", f"{rev}:.mailmap"], check=False)
    oid = proc.stdout.decode("ascii", "replace").strip() if proc.returncode == 0 else ""
    if oid and not git.has_object(oid):
        warnings.warn(f"partial clone: the .mailmap blob {oid[:12]} is not in the clone, so "
                      ".mailmap was skipped: author and committer identities are stored as "
                      "committed", DataQualityWarning, stacklevel=3)
        git = git.without_mailmap()
    return git, opts


_UNREADABLE = re.compile(r"(?:unable to read|could not fetch|missing blob)\s+([0-9a-f]{40,64})")


def explain_missing_object(git: Any, tip: str, message: str, opts: Any) -> str:
    """``message`` of a failed ``git log`` with the missing object's commit and path and
    the remedies, when git named an object it could not read."""
    m = _UNREADABLE.search(message)
    if not m:
        return message
    oid = m.group(1)
    where = _find_blob(git, tip, oid)
    place = (f"the content of {where[1]!r} in commit {where[0][:12]}" if where
             else "an object of the history")
    remedy = ("mine with --no-line-counts (no file contents are read), or repair the clone "
              "(fetch the object again, or clone afresh)" if opts.line_counts
              else "repair the clone (fetch the object again, or clone afresh)")
    return (f"{message}: object {oid} ({place}) is missing from the clone; {remedy}")


def _find_blob(git: Any, tip: str, oid: str) -> tuple[str, str] | None:
    """The first commit (newest first) whose raw diff names blob ``oid``, and its path
    (``git log --raw`` reads trees only, so it works while the blob is missing)."""
    args = ["log", "-z", "--raw", "--no-abbrev", "--no-renames", "--format=%x01%H", tip, "--"]
    commit = None
    try:
        out = git._run(args, check=False).stdout
    except Exception:  # noqa: BLE001 - only an explanation: never mask the first error
        return None
    fields = out.split(b"\0")
    i = 0
    while i < len(fields):
        f = fields[i]
        if b"\x01" in f:                    # a commit header, maybe with its first raw line
            head = f.split(b"\x01", 1)[1].split(b"\n")
            commit = head[0].strip().decode("ascii", "replace")
            f = b"\n".join(head[1:])
        f = f.lstrip(b"\n")                   # a raw line follows its header's NUL
        if f.startswith(b":"):
            meta = f.split()
            path = fields[i + 1].decode("utf-8", "replace") if i + 1 < len(fields) else "?"
            if len(meta) >= 4 and oid.encode() in (meta[2], meta[3]) and commit:
                return commit, path
            i += 2
            continue
        i += 1
    return None


# -- a full clone missing a few blobs: mine on, those commits without line counts -----------

def commits_of_part(git: Any, args: list[str], rev_range: list[str], *, line_counts: bool,
                    lacking: list[tuple[str, str]]) -> Iterator[Any]:
    """The commits ``git log ARGS`` gives; when it stops because a blob is missing (line
    counts read contents), the rest of ``rev_range`` commit by commit: a commit whose
    blob is missing is mined paths-only and listed in ``lacking`` as (commit, object).

    parse_log yields a commit only once the next header or the end is in view, and a
    failing git raises before the end: every commit yielded is complete.
    """
    seen: set[str] = set()
    try:
        for c in parse_log(git.stream(args)):
            seen.add(c.hash)
            yield c
        return
    except GitFailed as exc:
        if not line_counts or not _UNREADABLE.search(str(exc)):
            raise
    rest = [h for h in git.text("rev-list", *rev_range).split() if h not in seen]
    i = 0
    while i < len(rest):
        chunk = rest[i:i + _CHUNK]
        got = 0
        try:
            for c in parse_log(git.stream(_no_walk(args, chunk, line_counts=True))):
                got += 1
                yield c
            i += len(chunk)
            continue
        except GitFailed as exc:
            m = _UNREADABLE.search(str(exc))
            if not m:
                raise
        # --no-walk=unsorted shows the chunk in the order given, so the failing commit is
        # chunk[got] or later: git may die before its buffered output shows the header
        # of the commit it failed on, and then the last complete commit is not yielded
        # either. Try chunk[got] alone first; only a commit that fails alone lacks a blob.
        cand = chunk[got]
        try:
            alone = list(parse_log(git.stream(_no_walk(args, [cand], line_counts=True))))
        except GitFailed as exc:
            m = _UNREADABLE.search(str(exc))
            if not m:
                raise
            yield from parse_log(git.stream(_no_walk(args, [cand], line_counts=False)))
            lacking.append((cand, m.group(1)))
        else:
            yield from alone
        i += got + 1


_CHUNK = 200


def _no_walk(args: list[str], commits: list[str], *, line_counts: bool) -> list[str]:
    """``args`` of :func:`log_args` made to show exactly ``commits``, in that order."""
    end = args.index("--")
    start = next(i for i, a in enumerate(args) if i > 0 and not a.startswith("-"))
    head = [a for a in args[:start] if line_counts or a != "--numstat"]
    head = [a for a in head if not a.startswith(("--since", "--until"))]
    return [*head, "--no-walk=unsorted", *commits, "--"] + args[end + 1:]


def lacking_note(lacking: list[tuple[str, str]]) -> str:
    first_commit, first_oid = lacking[0]
    return (f"line counts missing for {len(lacking)} commit(s) whose blobs are absent "
            f"from the clone (first: object {first_oid} in commit {first_commit[:12]})")
