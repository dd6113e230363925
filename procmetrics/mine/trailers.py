"""Find and parse a commit message's final trailer block the way git does.

This follows git's own trailer rules (``trailer.c``, as used by
``git interpret-trailers --parse --no-divider`` and the ``%(trailers)``
pretty format) with no ``trailer.*`` configuration:

1. Trailing blank lines, trailing ``#`` comment lines and an old-style
   ``Conflicts:`` block at the end are ignored.
2. The first paragraph (the title) can never hold trailers.
3. Walking back from the last line to the previous blank line, the paragraph
   is the trailer block when every non-blank line is a trailer (or a
   continuation line, starting with whitespace, of one), or when it holds a
   git-generated line (``Signed-off-by: `` exactly, or ``(cherry picked from
   commit ``) and at least 25 % of its lines are trailers.
4. A trailer line is ``token<ws>*:value`` where the token is ASCII letters,
   digits and ``-`` (optionally followed by blanks before the colon).
   Continuation lines are appended to the trailer above them and unfolded to
   one space; token and value are trimmed.

Keys are then normalised: known keys get their canonical spelling (matched
case-insensitively); any other key becomes first letter upper, rest lower.
"""
from __future__ import annotations

import functools
import re
from typing import NamedTuple

COMMENT_CHAR = "#"
_GIT_GENERATED = ("Signed-off-by: ", "(cherry picked from commit ")

KNOWN_KEYS: tuple[str, ...] = (
    "Signed-off-by", "Reviewed-by", "Acked-by", "Tested-by", "Reported-by",
    "Suggested-by", "Co-developed-by", "Co-authored-by", "Fixes", "Cc", "Link", "Closes",
    "Reported-and-tested-by", "Reviewed-and-tested-by", "Requested-by", "Helped-by",
    "Mentored-by", "Debugged-by", "Bisected-by", "Analyzed-by", "Originally-by",
    "Based-on-patch-by", "Change-Id", "Bug", "Message-Id", "Refs", "See-also",
)
_CANONICAL = {k.lower(): k for k in KNOWN_KEYS}

# "Name <mail>" (anything after the closing bracket, e.g. "# v5.10+", is dropped)
_PERSON_RE = re.compile(r"^(?P<name>[^<>]*)<(?P<email>[^<>\s]*@[^<>\s]*)>")
_BARE_MAIL_RE = re.compile(r"^(?P<email>[^\s<>@\"(),;]+@[^\s<>@\"(),;]+)(?:\s|$)")


class Trailer(NamedTuple):
    """One parsed trailer: ``key`` normalised, ``raw_key`` as written."""

    key: str
    raw_key: str
    value: str


class TrailerBlock(NamedTuple):
    """The trailers and the character span ``[start, end)`` of the block."""

    trailers: list[Trailer]
    start: int
    end: int


def normalise_key(raw_key: str) -> str:
    """Canonical spelling for known keys, else ``Capitalised`` (rest lower)."""
    low = raw_key.lower()
    known = _CANONICAL.get(low)
    if known is not None:
        return known
    return raw_key[:1].upper() + raw_key[1:].lower()


@functools.lru_cache(maxsize=1 << 16)   # reviewers repeat: most values are seen before
def split_person(value: str) -> tuple[str, str] | None:
    """``"Jo Doe <jo@x.org> # note"`` -> ``("Jo Doe", "jo@x.org")``; bare e-mail -> ``("", mail)``."""
    m = _PERSON_RE.match(value)
    if m:
        return m.group("name").strip().strip('"').strip(), m.group("email")
    m = _BARE_MAIL_RE.match(value)
    if m:
        return "", m.group("email")
    return None


_WS = " \t\n\r"  # git's isspace() (sane_ctype): no \v, \f or Unicode spaces


def _is_blank(line: str) -> bool:
    return line.strip(_WS) == ""


# token = ASCII letters, digits, '-'; then blanks; then ':' (git's find_separator;
# leading blanks are not allowed, a ':' at offset 0 gives 0)
_SEPARATOR = re.compile(r"(?:[A-Za-z0-9-]+[ \t]*)?:")


def find_separator(line: str) -> int:
    """Index of the ``:`` ending a trailer token, or -1 (git's ``find_separator``)."""
    m = _SEPARATOR.match(line)
    return m.end() - 1 if m else -1


def _end_of_log_message(msg: str) -> int:
    """Length of ``msg`` without trailing comments/blank lines/Conflicts block."""
    if not msg.startswith(COMMENT_CHAR) and "\n" + COMMENT_CHAR not in msg \
            and "Conflicts:\n" not in msg:
        stripped = len(msg.rstrip("\n"))       # fast path: only empty lines to drop
        if stripped:
            return stripped if stripped == len(msg) else stripped + 1
    cutoff = len(msg)
    scissors = msg.find("# ------------------------ >8 ------------------------\n")
    if scissors == 0 or (scissors > 0 and msg[scissors - 1] == "\n"):
        cutoff = scissors
    boc = 0
    bol = 0
    in_conflicts = False
    while bol < cutoff:
        nl = msg.find("\n", bol, cutoff)
        nxt = cutoff if nl < 0 else nl + 1
        ch = msg[bol]
        if ch == COMMENT_CHAR or ch == "\n":
            if not boc:     # (sic) git's test: a run starting at offset 0 is not noticed
                boc = bol
        elif msg.startswith("Conflicts:\n", bol):
            in_conflicts = True
            if not boc:
                boc = bol
        elif in_conflicts and ch == "\t":
            pass
        elif boc:
            boc = 0
            in_conflicts = False
        bol = nxt
    return boc if boc else cutoff


_BLANK_LINE = re.compile(r"^[ \t\r]*(?:\n|\Z)", re.M)


def _last_line(msg: str, length: int) -> int:
    """Start of the last line of ``msg[:length]`` (git's ``last_line``); -1 if empty."""
    if length <= 0:
        return -1
    if length == 1:
        return 0
    return msg.rfind("\n", 0, length - 1) + 1


def _block_start(msg: str, end: int) -> int:
    """git's ``find_trailer_block_start``: offset where the block starts, or ``end``."""
    # the first paragraph is the title and cannot be trailers (comment lines are never blank)
    m = _BLANK_LINE.search(msg, 0, end)
    end_of_title = m.start() if m else end
    only_spaces = True
    recognized = False
    trailer_lines = non_trailer_lines = possible_continuation = 0
    s = _last_line(msg, end)
    while s >= end_of_title:
        nl = msg.find("\n", s, end)
        line = msg[s:end] if nl < 0 else msg[s:nl + 1]
        prev = _last_line(msg, s)
        if line[:1] == COMMENT_CHAR:
            non_trailer_lines += possible_continuation
            possible_continuation = 0
        elif _is_blank(line):
            if not only_spaces:
                non_trailer_lines += possible_continuation
                block = end if nl < 0 else nl + 1
                if recognized and trailer_lines * 3 >= non_trailer_lines:
                    return block
                if trailer_lines and not non_trailer_lines:
                    return block
                return end
        else:
            only_spaces = False
            if line.startswith(_GIT_GENERATED):
                trailer_lines += 1
                possible_continuation = 0
                recognized = True
            elif line[0] in _WS:
                possible_continuation += 1
            elif find_separator(line) >= 1:
                trailer_lines += 1
                possible_continuation = 0
            else:
                non_trailer_lines += 1 + possible_continuation
                possible_continuation = 0
        if s == 0:
            break
        s = prev
    return end


def _lines(msg: str, start: int, end: int) -> list[str]:
    """Lines of ``msg[start:end]``, each with its newline (split on "\\n" only)."""
    parts = msg[start:end].split("\n")
    out = [p + "\n" for p in parts[:-1]]
    if parts[-1]:
        out.append(parts[-1])
    return out


def _unfold(value: str) -> str:
    if "\n" not in value:
        return value.strip(_WS)
    out = []
    i, n = 0, len(value)
    while i < n:
        c = value[i]
        i += 1
        if c == "\n":
            while i < n and value[i] in _WS:
                i += 1
            out.append(" ")
        else:
            out.append(c)
    return "".join(out).strip(_WS)


# Fast path: after a blank line (not the message's first line), a last paragraph whose
# every line is one whole "Token: value" trailer (no continuation, comment or
# git-generated line without a colon). Git's walk (_block_start) then always takes that
# paragraph as the block: it has trailer lines and no other lines. Anything else takes
# the general walk.
_SIMPLE_BLOCK = re.compile(r"\n[ \t\r]*\n((?:[A-Za-z0-9-]+[ \t]*:[^\n]*\n)*"
                           r"[A-Za-z0-9-]+[ \t]*:[^\n]*\n?)\Z")


def parse_trailers(message: str) -> TrailerBlock:
    """Trailers of the final trailer block, as ``git interpret-trailers --parse`` lists them."""
    end = _end_of_log_message(message)
    fast = _SIMPLE_BLOCK.search(message, 0, end)
    if fast is not None:    # the common case, same result as the general walk below
        start = fast.start(1)
        simple: list[Trailer] = []
        for line in message[start:end].split("\n"):
            if line:        # "Token<blanks>:value"; the token holds no ':'
                key, _, value = line.partition(":")
                key = key.rstrip(" \t")
                simple.append(Trailer(normalise_key(key), key, value.strip(_WS)))
        return TrailerBlock(simple, start, end)
    start = _block_start(message, end)
    if start >= end:
        return TrailerBlock([], end, end)
    raw: list[str] = []
    last_is_trailer = False
    for line in _lines(message, start, end):
        if last_is_trailer and line[:1] in _WS and line[:1] != "":
            raw[-1] += line
            continue
        raw.append(line)
        last_is_trailer = find_separator(line) >= 1
    out: list[Trailer] = []
    for item in raw:
        if item[:1] == COMMENT_CHAR:
            continue
        sep = find_separator(item)
        if sep < 1:
            continue
        raw_key = item[:sep].strip(_WS)
        value = _unfold(item[sep + 1:].strip(_WS))
        out.append(Trailer(normalise_key(raw_key), raw_key, value))
    return TrailerBlock(out, start, end)
