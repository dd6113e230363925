"""Path maps between an upstream history and a tree that mirrors part of it.

A mirror of a subtree ships some upstream folders under other names (upstream
``tools/lib/orbit/`` is the tree's ``src/``). A path map is a list of
``(upstream prefix, tree prefix)`` pairs. It is given by the user
(``--upstream-path-map UPSTREAM_PREFIX=TREE_PREFIX``, repeatable) or inferred from
the files at both tips (:func:`infer_path_map`); the store records which, so every
output can say how it was obtained. Under a map, only upstream changes to mapped
paths count: the upstream patch ids are computed on those paths only, renamed
into the tree's (``git log -p --relative`` with rewritten prefixes), and upstream
fixes that touch no mapped path are not the tree's concern.
"""
from __future__ import annotations

import json
from collections import Counter, defaultdict
from dataclasses import dataclass
from typing import Iterable, Sequence

from procmetrics.errors import ConfigError

INFER = "infer"


@dataclass(frozen=True)
class PathMap:
    """``pairs`` of (upstream prefix, tree prefix); ``how`` is ``given`` or ``inferred``."""

    pairs: tuple[tuple[str, str], ...]
    how: str
    note: str = ""

    def to_json(self) -> str:
        return json.dumps({"pairs": [list(p) for p in self.pairs], "how": self.how,
                           "note": self.note}, sort_keys=True)

    def describe(self) -> str:
        maps = ", ".join(f"{u or '(root)'} -> {t or '(root)'}" for u, t in self.pairs)
        return f"{maps} ({self.how}{'; ' + self.note if self.note else ''})"


def _prefix(p: str) -> str:
    p = p.strip().strip("/")
    return "" if p in ("", ".") else p + "/"


def parse_path_map(values: Sequence[str]) -> PathMap:
    """``UPSTREAM_PREFIX=TREE_PREFIX`` items (folders; either side may be empty for the
    root, not both)."""
    pairs = []
    for v in values:
        up, sep, tree = v.partition("=")
        if not sep:
            raise ConfigError(f"--upstream-path-map {v!r}: expected UPSTREAM_PREFIX="
                              "TREE_PREFIX (or 'infer')", key="--upstream-path-map")
        pair = (_prefix(up), _prefix(tree))
        if pair == ("", "") or any(".." in x.split("/") for x in pair):
            raise ConfigError(f"--upstream-path-map {v!r}: give a folder on at least one "
                              "side, without '..'", key="--upstream-path-map")
        pairs.append(pair)
    ups = [u for u, _ in pairs]
    for a in ups:
        for b in ups:
            if a != b and b.startswith(a):
                raise ConfigError(f"--upstream-path-map: upstream prefixes {a!r} and {b!r} "
                                  "overlap", key="--upstream-path-map")
    if len(set(ups)) != len(ups):
        raise ConfigError("--upstream-path-map: an upstream prefix is mapped twice",
                          key="--upstream-path-map")
    return PathMap(tuple(pairs), "given")


def _common_suffix(a: list[str], b: list[str]) -> int:
    k = 0
    while k < min(len(a), len(b)) and a[-1 - k] == b[-1 - k]:
        k += 1
    return k


def infer_path_map(tree_files: Iterable[str], upstream_files: Iterable[str], *,
                   min_files: int = 3, min_share: float = 0.05) -> PathMap:
    """Infer the folders the tree mirrors from the file names at both tips.

    Each tree file is paired with the upstream files of the same name; the pair with the
    longest common tail of path components (unique, else the file does not vote) votes
    for the prefixes left over (a file at the same path votes for its top folder). Pairs
    with at least ``max(min_files, min_share * tree files)`` votes are kept, most votes
    first, skipping one whose upstream prefix overlaps a kept one.
    """
    tree = [t for t in tree_files if t]
    by_name: dict[str, list[list[str]]] = defaultdict(list)
    for u in upstream_files:
        if u:
            by_name[u.rsplit("/", 1)[-1]].append(u.split("/"))
    votes: Counter[tuple[str, str]] = Counter()
    for t in tree:
        tp = t.split("/")
        best: dict[tuple[str, str], int] = {}
        top = 0
        for up in by_name.get(tp[-1], ()):
            k = _common_suffix(tp, up)
            if k < top:
                continue
            if k > top:
                best, top = {}, k
            pair = ("/".join(up[:-k]) + "/" if len(up) > k else "",
                    "/".join(tp[:-k]) + "/" if len(tp) > k else "")
            best[pair] = k
        if len(best) != 1:
            continue
        pair = next(iter(best))
        if pair == ("", ""):
            if len(tp) < 2:
                continue        # the same file at the root of both: says nothing
            pair = (tp[0] + "/", tp[0] + "/")
        votes[pair] += 1
    need = max(min_files, min_share * len(tree))
    chosen: list[tuple[str, str]] = []
    for pair, n in sorted(votes.items(), key=lambda kv: (-kv[1], kv[0])):
        if n < need:
            break
        if any(pair[0].startswith(u) or u.startswith(pair[0]) for u, _ in chosen):
            continue
        chosen.append(pair)
    if not chosen:
        raise ConfigError("--upstream-path-map infer: no folder of the tree matches the "
                          f"upstream's file names (at least {need:.0f} files each); give "
                          "the map as UPSTREAM_PREFIX=TREE_PREFIX", key="--upstream-path-map")
    explained = sum(votes[p] for p in chosen)
    return PathMap(tuple(chosen), "inferred",
                   f"from the file names at both tips: {explained} of {len(tree)} tree "
                   "files explained")
