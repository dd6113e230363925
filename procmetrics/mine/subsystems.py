"""Map touched paths to subsystems.

Three sources, first applicable wins:

(b) ``--subsystem-rules FILE`` (TOML)::

        [subsystems]
        networking = ["net/", "drivers/net/**", "include/net/*.h"]
        docs = "Documentation/"

(a) a kernel-style ``MAINTAINERS`` file at the top of the mined tip (read from
    git objects, so bare repositories work): sections start with a title line
    followed by ``F:`` patterns, ``X:`` exclusions and ``N:`` regular
    expressions on the path;
(c) otherwise the first ``prefix_depth`` directories of the path (files at the
    top level -> ``(top-level)``).

Pattern language (MAINTAINERS and rules alike): ``*`` and ``?`` match within
one path component, ``**`` any number of components (rules only), a trailing
``/`` matches everything below that folder, a pattern without wildcards
matches that file or everything below that folder.

Specificity: a pattern's specificity is the number of leading path characters
it fixes literally (everything before its first wildcard, or the whole pattern
when it has none; a final ``/`` is not counted, so ``lib/x`` and ``lib/x/``
tie); for an ``N:`` regex it is the offset where its leftmost
match on the path ends. A path goes to the subsystem(s) whose matching
pattern has the highest specificity; ties keep every tied subsystem. A
section whose ``X:`` pattern matches the path does not apply to it. A path
no rule or section matches goes to ``(unmapped)``.
"""
from __future__ import annotations

import bisect
import hashlib
import re
import tomllib
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Sequence

from procmetrics.errors import ConfigError
from procmetrics.mine.pathregex import LinearRegex, compile_path_regex, glob_regex_linear

UNMAPPED = "(unmapped)"
TOP_LEVEL = "(top-level)"
_GLOB_CHARS = "*?["


@dataclass(frozen=True)
class Pattern:
    text: str
    regex: Any   # re.Pattern, or an RE2 pattern for globs with many stars
    specificity: int
    bucket: str          # literal folder prefix and the next literal character, if any
    literal: bool = False   # no wildcard: matches by prefix look-up, no regex needed


def compile_glob(text: str, *, allow_globstar: bool = False) -> Pattern:
    """Compile one path pattern (see module docstring)."""
    text = text.strip().lstrip("/")
    cut = min((text.find(c) for c in _GLOB_CHARS if c in text), default=-1)
    literal = text if cut < 0 else text[:cut]
    folder = literal.rfind("/") + 1
    bucket = literal[: folder + 1]      # literal folder prefix plus one more literal character
    out, i = [], 0
    body = text[:-1] if text.endswith("/") else text
    while i < len(body):
        c = body[i]
        if body.startswith("**/", i) and allow_globstar:
            out.append("(?:.*/)?")
            i += 3
            continue
        if body.startswith("**", i) and allow_globstar:
            out.append(".*")
            i += 2
            continue
        out.append("[^/]*" if c == "*" else "[^/]" if c == "?" else re.escape(c))
        i += 1
    core = "".join(out)
    if text.endswith("/"):
        tail = "/.*"                # everything below the folder
    elif cut < 0:
        tail = "(?:/.*)?"           # no wildcard: that file, or everything below that folder
    else:
        tail = ""
    if text.count("*") > 2:
        # three or more stars backtrack polynomially in Python's re (a repository's F: line
        # like a*a*a*a*b on a long path): linear-time RE2, slower per call, for these only
        regex = glob_regex_linear(core + tail + r"\z")
    else:
        regex = re.compile(core + tail + r"\Z", re.S)
    return Pattern(text, regex, len(literal.rstrip("/")), bucket, cut < 0)


def _buckets(path: str) -> list[str]:
    out = [""]
    i = path.find("/")
    while i >= 0:
        out.append(path[: i + 1])
        i = path.find("/", i + 1)
    return out


@dataclass
class PathMapper:
    """Map paths to subsystems. ``kind`` and ``source`` go to the repository row."""

    kind: str
    source: str
    depth: int = 1
    titles: list[str] = field(default_factory=list)
    by_bucket: dict[str, list[tuple[Pattern, int]]] = field(default_factory=dict)
    exact: dict[str, list[tuple[Pattern, int]]] = field(default_factory=dict)
    excludes: dict[int, list[Pattern]] = field(default_factory=dict)
    regexes: list[tuple[LinearRegex, int]] = field(default_factory=list)
    #: each section as added: (title, patterns, excludes, regexes), for :meth:`differing`
    sections: list[tuple[str, tuple[Pattern, ...], tuple[Pattern, ...],
                         tuple[LinearRegex, ...]]] = field(default_factory=list)

    def add(self, title: str, patterns: Iterable[Pattern], excludes: Iterable[Pattern] = (),
            regexes: Iterable[LinearRegex] = ()) -> None:
        patterns, excludes, regexes = tuple(patterns), tuple(excludes), tuple(regexes)
        self.sections.append((title, patterns, excludes, regexes))
        idx = len(self.titles)
        self.titles.append(title)
        for p in patterns:
            if p.literal:
                self.exact.setdefault(p.text.rstrip("/"), []).append((p, idx))
            else:
                self.by_bucket.setdefault(p.bucket, []).append((p, idx))
        ex = list(excludes)
        if ex:
            self.excludes[idx] = ex
        self.regexes.extend((r, idx) for r in regexes)

    def finish(self) -> "PathMapper":
        return self

    def differing(self, other: "PathMapper") -> "PathMapper":
        """The sections of this mapper and ``other`` that the other one lacks (as a
        multiset of title, ``F:``, ``X:`` and ``N:`` entries), with their ``F:`` and ``N:``
        entries and no exclusions: every path it maps to a section (not to
        :data:`UNMAPPED`) is hit by a section that changed.

        A path's subsystems are a function of the sections that hit it (their
        specificity, title and exclusions), so a path that no changed section hits,
        before or after, keeps its subsystems when the file changes.
        """
        def key(section) -> tuple:
            title, pats, excl, rxs = section
            return (title, tuple(sorted(p.text for p in pats)),
                    tuple(sorted(x.text for x in excl)), tuple(sorted(r.text for r in rxs)))

        mine, theirs = Counter(map(key, self.sections)), Counter(map(key, other.sections))
        only = (mine - theirs) + (theirs - mine)
        out = PathMapper("changed-sections", f"{other.source} -> {self.source}")
        for section in (*self.sections, *other.sections):
            k = key(section)
            if only[k] > 0:
                only[k] -= 1
                out.add(section[0], section[1], (), section[3])
        return out

    def map(self, path: str) -> list[str]:
        """Subsystems of one path (see :meth:`map_many`)."""
        return self.map_many([path])[0]

    def map_many(self, paths: Sequence[str]) -> list[list[str]]:
        """Subsystems of each path (sorted names; never empty)."""
        if self.kind == "path-prefix":
            out = []
            for path in paths:
                parts = path.split("/")[:-1][: self.depth]
                out.append(["/".join(parts) if parts else TOP_LEVEL])
            return out
        hits: list[list[tuple[int, int]]] = [[] for _ in paths]
        exact, by_bucket = self.exact, self.by_bucket
        per_folder: dict[str, tuple[list[tuple[int, int]], list[tuple[Pattern, int]]]] = {}
        for i, path in enumerate(paths):
            cut = path.rfind("/") + 1
            folder = path[:cut]
            known = per_folder.get(folder)
            if known is None:
                known = per_folder[folder] = self._folder_candidates(folder)
            fixed, wild = known
            found = hits[i]
            found.extend(fixed)
            for pat, idx in wild:
                if pat.regex.match(path):
                    found.append((pat.specificity, idx))
            # the one bucket key that depends on the file name: folder + its first character
            for pat, idx in by_bucket.get(path[:cut + 1], ()):
                if pat.regex.match(path):
                    found.append((pat.specificity, idx))
            for pat, idx in exact.get(path, ()):
                if not pat.text.endswith("/"):
                    found.append((pat.specificity, idx))
        if self.regexes:
            self._regex_hits(paths, hits)
        out = []
        excludes, titles = self.excludes, self.titles
        for path, found in zip(paths, hits):
            # the highest specificity among hits whose section does not exclude the
            # path, and every such section with it: walk down from the top specificity
            # and check exclusions only until a level keeps a section
            found.sort(reverse=True)
            chosen: set[int] = set()
            best = -1
            for spec, idx in found:
                if spec < best:
                    break
                ex = excludes.get(idx)
                if ex and any(x.regex.match(path) for x in ex):
                    continue
                best = spec
                chosen.add(idx)
            out.append(sorted({titles[i] for i in chosen}) if chosen else [UNMAPPED])
        return out

    def _folder_candidates(self, folder: str
                           ) -> tuple[list[tuple[int, int]], list[tuple[Pattern, int]]]:
        """What every path directly in ``folder`` (``""`` or ending in ``/``) shares: the
        hits of literal patterns naming the folder or one above it, and the wildcard
        patterns of every bucket key that lies inside the folder part of the path
        (each bucket ``b``, and ``b`` plus the next character while that is still
        in the folder)."""
        fixed: list[tuple[int, int]] = []
        wild: list[tuple[Pattern, int]] = []
        for b in _buckets(folder):
            wild.extend(self.by_bucket.get(b, ()))
            if len(b) < len(folder):
                wild.extend(self.by_bucket.get(folder[:len(b) + 1], ()))
            if b:       # literal patterns naming this folder (or a file of that name)
                fixed.extend((pat.specificity, idx) for pat, idx in self.exact.get(b[:-1], ()))
        return fixed, wild

    def _regex_hits(self, paths: Sequence[str], hits: list[list[tuple[int, int]]]) -> None:
        """Leftmost match of every N: regex in every path: one ``finditer`` per regex over
        all paths joined by newlines (paths never contain one), instead of one
        ``search`` per (path, regex)."""
        joined = "\n".join(paths)
        starts = [0]
        for path in paths[:-1]:
            starts.append(starts[-1] + len(path) + 1)
        for rx, idx in self.regexes:
            if rx.anchored:
                for i, path in enumerate(paths):
                    m = rx.search(path)
                    if m:
                        hits[i].append((m.end(), idx))
                continue
            done = -1
            for m in rx.multi.finditer(joined):
                i = bisect.bisect_right(starts, m.start()) - 1
                if "\n" in m.group():      # spans paths: fall back for the paths it covers
                    j = bisect.bisect_right(starts, m.end()) - 1
                    for k in range(max(i, done + 1), j + 1):
                        single = rx.search(paths[k])
                        if single:
                            hits[k].append((single.end(), idx))
                    done = j
                    continue
                if i <= done:
                    continue
                done = i
                hits[i].append((m.end() - starts[i], idx))


def prefix_mapper(depth: int = 1) -> PathMapper:
    if depth < 1:
        raise ConfigError(f"prefix depth must be at least 1, got {depth}")
    return PathMapper("path-prefix", f"depth={depth}", depth=depth)


_ENTRY = re.compile(r"^([A-Z]):\s*(.*?)\s*$")


def maintainers_mapper(text: str, source: str) -> PathMapper:
    """Parse a kernel-style maintainers file (sections of title + ``F:``/``X:``/``N:``)."""
    mapper = PathMapper("maintainers", source)
    title: str | None = None
    pats: list[Pattern] = []
    excl: list[Pattern] = []
    rxs: list[LinearRegex] = []

    def flush() -> None:
        if title is not None and (pats or rxs):
            mapper.add(title, pats, excl, rxs)

    for lineno, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            flush()
            title, pats, excl, rxs = None, [], [], []
            continue
        m = _ENTRY.match(line)
        if m and title is not None:
            kind, value = m.groups()
            if kind == "F" and value:
                pats.append(compile_glob(value))
            elif kind == "X" and value:
                excl.append(compile_glob(value))
            elif kind == "N" and value:
                # linear time whatever the pattern (a repository is data)
                rxs.append(compile_path_regex(value, source=source, line=lineno, entry=title))
        elif not line[0].isspace() and title is None and not m:
            title = line.strip()
    flush()
    return mapper.finish()


def rules_mapper(path: str | Path) -> PathMapper:
    """Read a TOML rules file (``[subsystems] name = [globs]``)."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read subsystem rules: {exc.strerror}", path=str(p)) from exc
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except RecursionError as exc:
        raise ConfigError("not usable TOML: nested too deeply", path=str(p)) from exc
    except (UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        line = re.search(r"line (\d+)", str(exc))
        raise ConfigError(f"not valid TOML: {exc}", path=str(p),
                          line=int(line.group(1)) if line else None) from exc
    unknown = sorted(set(data) - {"subsystems"})
    if unknown:
        raise ConfigError("unknown table; only [subsystems] is allowed", path=str(p),
                          key=unknown[0])
    subs = data.get("subsystems")
    if not isinstance(subs, dict) or not subs:
        raise ConfigError("needs a non-empty [subsystems] table", path=str(p), key="subsystems")
    digest = hashlib.sha256(raw).hexdigest()[:16]
    mapper = PathMapper("rules", f"{p.resolve()} sha256:{digest}")
    for name, globs in subs.items():
        if isinstance(globs, str):
            globs = [globs]
        if not isinstance(globs, list) or not globs or \
                not all(isinstance(g, str) and g.strip() for g in globs):
            raise ConfigError("value must be a glob or a non-empty list of globs",
                              path=str(p), key=f"subsystems.{name}")
        mapper.add(name, [compile_glob(g, allow_globstar=True) for g in globs])
    return mapper.finish()
