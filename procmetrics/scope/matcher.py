"""Path globs of a scope, matched once per distinct stored path.

Glob semantics (the README states the same): patterns are matched against
repository-relative paths with ``/`` separators, case-sensitively, over the whole
path. ``*`` matches any run of characters within one path segment (never ``/``),
``?`` one character other than ``/``, ``[abc]``/``[a-z]``/``[!abc]`` one character
of (or not of) a set; ``**`` as a whole segment matches zero or more directories
(``**/x.c``, ``a/**/x.c``, ``a/**``). A pattern without wildcards names a file
or a directory and also matches everything below it (``drivers/net`` =
``drivers/net/**``); a pattern with wildcards must match the whole path
(``drivers/*`` matches ``drivers/Kconfig`` but not ``drivers/net/x.c``). These
are the rules of git's ``:(glob)`` pathspec magic, which the tests use as the
oracle. A trailing ``/`` is ignored. A *literal* entry (from a path list or a
compilation database) has no wildcards: its characters mean themselves.

Matching cost: literal patterns are a set lookup of the path and its ancestor
directories; a wildcard pattern is only tried on paths below its literal leading
directory (``src/net/*.c`` only on paths under ``src/net``), so a few thousand
globs over tens of thousands of paths stay cheap.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Iterable, Sequence

from procmetrics.errors import ConfigError

_WILD = re.compile(r"[*?\[]")


def normalise(pattern: str) -> str:
    """A pattern as matched: stripped, ``./`` and trailing ``/`` removed, ``//`` collapsed."""
    p = pattern.strip()
    while p.startswith("./"):
        p = p[2:]
    p = re.sub(r"/{2,}", "/", p).rstrip("/")
    return p


def is_wild(pattern: str) -> bool:
    return bool(_WILD.search(pattern))


def _segment(seg: str, where: str) -> str:
    out, i = [], 0
    while i < len(seg):
        ch = seg[i]
        if ch == "*":
            out.append("[^/]*")
            while i + 1 < len(seg) and seg[i + 1] == "*":
                i += 1
        elif ch == "?":
            out.append("[^/]")
        elif ch == "[":
            j = i + 1
            if j < len(seg) and seg[j] in "!^":
                j += 1
            if j < len(seg) and seg[j] == "]":
                j += 1
            while j < len(seg) and seg[j] != "]":
                j += 1
            if j >= len(seg):
                raise ConfigError(f"{where}: unclosed '[' in the glob {seg!r}")
            body = seg[i + 1:j]
            neg = body[:1] in ("!", "^")
            if neg:
                body = body[1:]
            body = body.replace("\\", "\\\\")
            out.append("[" + ("^/" if neg else "") + body + "]")
            i = j
        else:
            out.append(re.escape(ch))
        i += 1
    return "".join(out)


def glob_regex(pattern: str, where: str = "scope") -> str:
    """The regular expression for one normalised glob (to be matched in full)."""
    segs = pattern.split("/")
    # collapse runs of '**' (they mean the same and would only add backtracking)
    clean: list[str] = []
    for s in segs:
        if s == "**" and clean and clean[-1] == "**":
            continue
        clean.append(s)
    parts: list[str] = []
    n = len(clean)
    for k, s in enumerate(clean):
        last = k == n - 1
        if s == "**":
            if n == 1:
                parts.append(".*")
            elif last:
                parts.append("/.*" if k else ".*")
            else:
                parts.append("(?:.*/)?" if k == 0 else "/(?:.*/)?")
            continue
        sep = "" if k == 0 or clean[k - 1] == "**" else "/"
        parts.append(sep + _segment(s, where))
    return "".join(parts)


def literal_prefix(pattern: str) -> str:
    """The leading directories of a glob that hold no wildcard (``""`` if none)."""
    segs = pattern.split("/")
    keep = []
    for s in segs[:-1]:
        if is_wild(s):
            break
        keep.append(s)
    return "/".join(keep)


def _ancestors(path: str) -> list[str]:
    """``a/b/c`` -> ``["", "a", "a/b", "a/b/c"]``."""
    out = [""]
    pos = path.find("/")
    while pos != -1:
        out.append(path[:pos])
        pos = path.find("/", pos + 1)
    out.append(path)
    return out


@dataclass(frozen=True)
class PatternSet:
    """Include or exclude patterns, each either a glob or a literal path."""

    patterns: tuple[str, ...]
    literal: tuple[bool, ...]

    @classmethod
    def build(cls, patterns: Iterable[str], *, literal: bool = False,
              where: str = "scope") -> "PatternSet":
        pats, lits = [], []
        for raw in patterns:
            if not isinstance(raw, str):
                raise ConfigError(f"{where}: a pattern must be a string, got {raw!r}")
            p = normalise(raw)
            if not p:
                raise ConfigError(f"{where}: an empty pattern would match the whole tree; "
                                  "write '**' to mean that")
            if p.startswith("/") or p == ".." or p.startswith("../"):
                raise ConfigError(f"{where}: {raw!r} is not repository-relative")
            lit = literal or not is_wild(p)
            if not lit:
                re.compile(glob_regex(p, where))     # a malformed glob fails here, early
            pats.append(p)
            lits.append(lit)
        return cls(tuple(pats), tuple(lits))

    def match(self, paths: Sequence[str], where: str = "scope") -> tuple[list[bool], list[int]]:
        """For each path, whether a pattern matches it; and how many paths each pattern
        matched (so patterns matching nothing can be named)."""
        lit_index: dict[str, list[int]] = {}
        by_prefix: dict[str, list[tuple[int, re.Pattern[str]]]] = {}
        for i, (p, lit) in enumerate(zip(self.patterns, self.literal)):
            if lit:
                lit_index.setdefault(p, []).append(i)
            else:
                rx = re.compile(glob_regex(p, where))
                by_prefix.setdefault(literal_prefix(p), []).append((i, rx))
        hits = [0] * len(self.patterns)
        out = []
        for path in paths:
            found = False
            for anc in _ancestors(path):
                for i in lit_index.get(anc, ()):
                    hits[i] += 1
                    found = True
                for i, rx in by_prefix.get(anc, ()):
                    if rx.fullmatch(path):
                        hits[i] += 1
                        found = True
            out.append(found)
        return out, hits
