"""Repository-supplied regular expressions (MAINTAINERS ``N:``) in linear time.

A repository is data, and its MAINTAINERS file may carry a pattern such as
``(a+)+$`` that makes a backtracking engine (Python's ``re``) run for ever on a
40-character path. These patterns are compiled with RE2 (``google-re2``), whose
matching time is linear in the path length for every pattern. RE2 has no
backreferences or look-around; a pattern that needs them, or that is longer
than :data:`MAX_PATTERN_CHARS`, is refused with an error naming the entry and
line. Python's ``\\Z`` is RE2's ``\\z`` and is translated.
"""
from __future__ import annotations

import re

import re2

from procmetrics.errors import ConfigError

#: Longest ``N:`` pattern accepted (the kernel's longest is well under 100 characters).
MAX_PATTERN_CHARS = 256


def _options() -> "re2.Options":
    opts = re2.Options()
    opts.log_errors = False          # RE2 would otherwise log to stderr itself
    opts.max_mem = 8 << 20           # bounded memory per pattern as well as linear time
    return opts


def _translate(pattern: str) -> str:
    r"""Python's end-of-text ``\Z`` becomes RE2's ``\z`` (an escaped backslash stays)."""
    out, i = [], 0
    while i < len(pattern):
        c = pattern[i]
        if c == "\\" and i + 1 < len(pattern):
            nxt = pattern[i + 1]
            out.append("\\z" if nxt == "Z" else c + nxt)
            i += 2
            continue
        out.append(c)
        i += 1
    return "".join(out)


def glob_regex_linear(pattern: str):
    """A glob's regex (already in RE2 syntax; ``.`` crosses newlines) compiled by RE2."""
    opts = _options()
    opts.dot_nl = True
    return re2.compile(pattern, opts)


def without_repetition(pattern: str) -> bool:
    """True when ``pattern`` repeats nothing (no ``*``, ``+``, ``{m,n}`` or optional
    ``?`` outside character classes). Such a pattern cannot make a backtracking engine
    take more than (pattern length) x (path length) steps, so Python's ``re`` (faster
    per call than the RE2 binding) runs it; anything that repeats runs on RE2."""
    i, in_class = 0, False
    while i < len(pattern):
        c = pattern[i]
        if c == "\\":
            i += 2
            continue
        if in_class:
            in_class = c != "]"
        elif c == "[":
            in_class = True
            if pattern.startswith("]", i + 1):
                i += 1
            elif pattern.startswith("^]", i + 1):
                i += 2
        elif c in "*+{":
            return False
        elif c == "?" and not (i > 0 and pattern[i - 1] == "("):
            return False
        i += 1
    return True


class LinearRegex:
    """One compiled ``N:`` pattern: ``search`` on one path, ``finditer`` over many.

    Every pattern must compile under RE2 (so the accepted language is RE2's whatever
    engine runs it); patterns that repeat nothing run on Python's ``re`` (bounded
    time, and about four times faster through its binding), the others on RE2.
    """

    def __init__(self, text: str) -> None:
        self.text = text
        self.pattern = _translate(text)
        linear = re2.compile(self.pattern, _options())
        self.anchored = "\\A" in self.pattern or "\\z" in self.pattern
        fast = None
        if without_repetition(text):
            try:
                fast = re.compile(text), re.compile(text, re.M)
            except re.error:        # RE2-only syntax: run it on RE2
                fast = None
        if fast is not None:
            # the multi-line twin has ^ and $ at line ends, for one scan over joined paths
            self.regex, self.multi = fast
        else:
            self.regex = linear
            self.multi = re2.compile("(?m)" + self.pattern, _options())

    def search(self, path: str):
        return self.regex.search(path)


def compile_path_regex(text: str, *, source: str, line: int | None,
                       entry: str | None) -> LinearRegex:
    """Compile a repository-supplied regex or raise :class:`ConfigError` naming it."""
    where = f"N: pattern {text[:60]!r}" + ("…" if len(text) > 60 else "")
    if len(text) > MAX_PATTERN_CHARS:
        raise ConfigError(f"{where} is {len(text)} characters long; at most "
                          f"{MAX_PATTERN_CHARS} are accepted (use --subsystem-rules or "
                          "--no-maintainers to mine without it)",
                          path=source, line=line, key=entry)
    try:
        return LinearRegex(text)
    except re2.error as exc:
        reason = exc.args[0].decode("utf-8", "replace") if exc.args and \
            isinstance(exc.args[0], bytes) else str(exc)
        raise ConfigError(f"{where} is not supported by the linear-time matcher ({reason}; "
                          "backreferences and look-around are not available); use "
                          "--subsystem-rules or --no-maintainers to mine without it",
                          path=source, line=line, key=entry) from exc
