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
_PERSON_RE = re.compile(r"^(?P<name>[^<>]*?)\s*<(?P<email>[^<>\s]*@[^<>\s]*)>")
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


def find_separator(line: str) -> int:
    """Index of the ``:`` ending a trailer token, or -1 (git's ``find_separator``)."""
    whitespace_found = False
    for i, c in enumerate(line):
        if c == ":":
            return i
        if not whitespace_found and (c == "-" or (c.isascii() and c.isalnum())):
            continue
        if i != 0 and c in " \t":
            whitespace_found = True
            continue
        break
    return -1


def _end_of_log_message(msg: str) -> int:
    """Length of ``msg`` without trailing comments/blank lines/Conflicts block."""
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
            if not boc:
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


def _line_starts(msg: str, end: int) -> list[int]:
    starts = [0] if end > 0 else []
    pos = msg.find("\n", 0, end)
    while pos >= 0 and pos + 1 < end:
        starts.append(pos + 1)
        pos = msg.find("\n", pos + 1, end)
    return starts


def _block_start(msg: str, end: int, starts: list[int]) -> int:
    """git's ``find_trailer_block_start``: offset where the block starts, or ``end``."""
    # the first paragraph is the title and cannot be trailers
    end_of_title = end
    for s in starts:
        if msg[s] == COMMENT_CHAR:
            continue
        if _is_blank(_line(msg, s, end)):
            end_of_title = s
            break
    only_spaces = True
    recognized = False
    trailer_lines = non_trailer_lines = possible_continuation = 0
    for s in reversed(starts):
        if s < end_of_title:
            break
        line = _line(msg, s, end)
        if line[:1] == COMMENT_CHAR:
            non_trailer_lines += possible_continuation
            possible_continuation = 0
            continue
        if _is_blank(line):
            if only_spaces:
                continue
            non_trailer_lines += possible_continuation
            nxt = msg.find("\n", s, end)
            block = end if nxt < 0 else nxt + 1
            if recognized and trailer_lines * 3 >= non_trailer_lines:
                return block
            if trailer_lines and not non_trailer_lines:
                return block
            return end
        only_spaces = False
        if line.startswith(_GIT_GENERATED):
            trailer_lines += 1
            possible_continuation = 0
            recognized = True
            continue
        if find_separator(line) >= 1 and not line[0] in _WS:
            trailer_lines += 1
            possible_continuation = 0
        elif line[0] in _WS:
            possible_continuation += 1
        else:
            non_trailer_lines += 1 + possible_continuation
            possible_continuation = 0
    return end


def _line(msg: str, start: int, end: int) -> str:
    nl = msg.find("\n", start, end)
    return msg[start:end] if nl < 0 else msg[start:nl + 1]


def _unfold(value: str) -> str:
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


def parse_trailers(message: str) -> TrailerBlock:
    """Trailers of the final trailer block, as ``git interpret-trailers --parse`` lists them."""
    end = _end_of_log_message(message)
    starts = _line_starts(message, end)
    start = _block_start(message, end, starts)
    if start >= end:
        return TrailerBlock([], end, end)
    raw: list[str] = []
    last_is_trailer = False
    for s in starts:
        if s < start:
            continue
        line = _line(message, s, end)
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
