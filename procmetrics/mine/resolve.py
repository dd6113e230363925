"""Resolve cited commit hashes (``Fixes:``, ``This reverts commit``).

A reference resolves against the commits reachable from the repository's
branches, tags and remote-tracking branches (pull-request refs such as
``*/pull/*`` and ``*/pr/*`` excluded) plus the mined tip:

* ``resolved``  - exactly one such commit has the cited hash as prefix;
* ``self``      - that one commit is the citing commit itself;
* ``ambiguous`` - two or more such commits share the cited prefix;
* ``unresolved``- none does (amended before merge, another project's history...).

Stored hashes answer most references (an indexed range query per prefix).
References the store cannot settle - unknown hashes, and short prefixes that
might also match a commit outside the mined range - go to ONE
``git cat-file --batch-check`` process. When that finds a commit outside the
store (or an ambiguous prefix), a few such references are settled one by one
(the objects git lists for the prefix, and for each commit among them whether
the tip or a ref contains it); many are settled by streaming the reachable
history once with ``git rev-list`` and counting prefix matches.
"""
from __future__ import annotations

from procmetrics.hexprefix import prefix_matches  # noqa: F401 - used and re-exported

import fnmatch
from typing import Callable, Iterable, Sequence

from procmetrics.errors import GitFailed
from procmetrics.mine.git import GitRepo

RESOLVED, UNRESOLVED, AMBIGUOUS, SELF = "resolved", "unresolved", "ambiguous", "self"
EXCLUDED_REF_GLOBS = ("*/pull/*", "*/pr/*", "pull/*", "pr/*")


def classify(matches: Sequence[str], citing_hash: str) -> tuple[str, str | None]:
    """Status and full target hash of a reference given every commit matching it."""
    unique = sorted(set(matches))
    if not unique:
        return UNRESOLVED, None
    if len(unique) > 1:
        return AMBIGUOUS, None
    target = unique[0]
    return (SELF if target == citing_hash else RESOLVED), target


def normalise_subject(text: str) -> str:
    return " ".join(text.split()).strip("\"'\u201c\u201d ").rstrip(".").casefold()


def subject_match(cited: str | None, actual: str | None) -> bool | None:
    """Cited subject equals the target's (whitespace/case/quotes/final period ignored;
    a cited subject ending in '...' matches as a prefix). None when either is missing."""
    if cited is None or actual is None:
        return None
    a = normalise_subject(actual)
    bare = " ".join(cited.split()).strip("\"'\u201c\u201d ")
    for ell in ("...", "\u2026"):
        if bare.endswith(ell):
            stem = normalise_subject(bare[: -len(ell)])
            return bool(stem) and a.startswith(stem)
    c = normalise_subject(cited)
    return c == a


def reachable_args(tip: str) -> list[str]:
    args = ["rev-list"]
    for opt in ("--branches", "--tags", "--remotes"):
        args += [f"--exclude={g}" for g in EXCLUDED_REF_GLOBS] + [opt]
    return args + [tip, "--"]


def reachable_tips(git: GitRepo, tip: str) -> list[str]:
    """The objects :func:`reachable_args` walks from (branches, tags and remote-tracking
    branches without pull-request refs, and the tip), as ``git rev-parse`` names them."""
    return sorted(set(git.text(*(["rev-parse"] + reachable_args(tip)[1:-1])).split()))


#: most commits new to the reachable history for which a run checks only the links they
#: could change; more (a large fetch), and every unsettled link is checked again. Each
#: commit adds its 40 prefixes to a set
MOST_NEW_COMMITS = 20000


def commits_since(git: GitRepo, before: Sequence[str], after: Sequence[str]
                  ) -> list[str] | None:
    """Commits reachable from ``after`` and not from ``before`` (two sets of tips), or
    None when that is not the whole change: some commit reachable from ``before`` is
    not from ``after`` (a branch or tag deleted or rewound), a tip is gone from the
    object store, or there are more than :data:`MOST_NEW_COMMITS`."""
    try:
        if git.batch(["rev-list", "--max-count=1", "--stdin"],
                     list(before) + ["^" + h for h in after]):
            return None
        new = git.batch(["rev-list", f"--max-count={MOST_NEW_COMMITS + 1}", "--stdin"],
                        list(after) + ["^" + h for h in before])
    except GitFailed:
        return None
    return None if len(new) > MOST_NEW_COMMITS else new


def find_candidates(git: GitRepo, tip: str, refs: Iterable[str],
                    stored: Callable[[list[str]], dict[str, list[str]]]) -> dict[str, list[str]]:
    """Every reachable commit (up to two) matching each reference.

    ``stored(refs)`` returns the stored hashes matching each reference.
    """
    refs = sorted(set(refs))
    found: dict[str, list[str]] = {r: list(v) for r, v in stored(refs).items()}
    for r in refs:
        found.setdefault(r, [])
    full_len = len(tip)
    ask = [r for r in refs if len(r) < full_len or not found[r]]
    if not ask:
        return found
    # plain names, not "<ref>^{commit}": git reports a peeled ambiguous prefix as missing
    lines = git.batch(["cat-file", "--batch-check"], ask)
    need_walk: set[str] = set()
    for r, line in zip(ask, lines):
        parts = line.split()
        if len(parts) == 2 and parts[1] == "ambiguous":
            need_walk.add(r)            # several objects: count the reachable commits
        elif len(parts) == 3 and parts[1] == "commit" and parts[0] not in found[r]:
            need_walk.add(r)            # a commit outside the store: is it reachable?
    if need_walk and (len(need_walk) > ONE_BY_ONE or min(map(len, need_walk)) < 4):
        by_head: dict[str, list[str]] = {}
        for r in need_walk:
            by_head.setdefault(r[:4], []).append(r)
        for h in _stream_lines(git, reachable_args(tip)):
            for r in by_head.get(h[:4], ()):
                if h.startswith(r) and h not in found[r]:
                    found[r].append(h)
    elif need_walk:
        for r in sorted(need_walk):
            found[r].extend(h for h in _objects_with_prefix(git, r, "commit")
                            if h not in found[r] and _reachable(git, h, tip))
    return found


#: references that git must settle (an ambiguous prefix, a commit outside the store) up
#: to which each is asked about on its own; more, and the reachable history is walked
#: once. One walk of a 1,000,000-commit history is about 8 s, and a single ambiguous
#: prefix among the rechecked references made every incremental run pay it
ONE_BY_ONE = 16


def _objects_with_prefix(git: GitRepo, prefix: str, kind: str) -> list[str]:
    """Objects of type ``kind`` whose name starts with ``prefix`` (at least 4 digits):
    every object git lists for it, typed by ``cat-file``."""
    listed = git._run(["rev-parse", f"--disambiguate={prefix}"], check=False).stdout.split()
    listed = [x.decode("ascii", "replace") for x in listed]
    if not listed:
        return []
    typed = git.batch(["cat-file", "--batch-check=%(objectname) %(objecttype)"], listed)
    return sorted(oid for oid, _, t in (line.partition(" ") for line in typed) if t == kind)


def _reachable(git: GitRepo, commit: str, tip: str) -> bool:
    """Whether ``commit`` is reachable from the tip, a branch, a tag or a remote-tracking
    branch (pull-request refs excluded), as :func:`reachable_args` walks them."""
    if git.is_ancestor(commit, tip):
        return True
    names = git.text("for-each-ref", f"--contains={commit}", "--format=%(refname)",
                     "refs/heads/", "refs/tags/", "refs/remotes/").split()
    for name in names:
        short = name.split("/", 2)[2]
        if not any(fnmatch.fnmatchcase(short, g) for g in EXCLUDED_REF_GLOBS):
            return True
    return False


def _stream_lines(git: GitRepo, args: list[str]) -> Iterable[str]:
    rest = b""
    for chunk in git.stream(args):
        lines = (rest + chunk).split(b"\n")
        rest = lines.pop()
        for line in lines:
            yield line.decode("ascii", "replace")
    if rest:
        yield rest.decode("ascii", "replace")
