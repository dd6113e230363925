"""Fix references, revert references and stable requests in a commit message.

``Fixes:`` lines are looked for in the WHOLE message (a few percent sit outside
the final trailer block); each records whether it lies inside that block.
Accepted forms of the value (case-insensitive key, 7-64 hex digits)::

    Fixes: 1234567890ab ("subsys: subject")
    Fixes: commit 1234567890ab ("subject")
    Fixes: 1234567890ab subject without parentheses
    Fixes: 1234567 ("one"), 89abcdef ("two")        (several, also with "and")
    Fixes: 1234567890ab ("subject wrapped
      over two lines")

A line whose value does not start with a hash (issue numbers, URLs, prose) is
kept verbatim as an unparsed reference of kind ``fixes``. ``This reverts
commit <hash>`` gives revert references (kind ``revert`` when no hash
follows). ``Cc:`` lines naming a ``stable@`` address set ``stable_request``.
"""
from __future__ import annotations

import re
from typing import NamedTuple

from procmetrics.mine.trailers import TrailerBlock
from procmetrics.store.writer import FixRow

HEX_MIN, HEX_MAX = 7, 64

_FIXES_LINE = re.compile(r"^[ \t]*fixes[ \t]*:[ \t]*(.*)$", re.I | re.M)
_HASH = re.compile(r"(?:commit[ \t]+)?([0-9a-fA-F]{%d,%d})(?![0-9A-Za-z_])" % (HEX_MIN, HEX_MAX),
                   re.I)
_SEP = re.compile(r"(?:[\s,;&+/]|\band\b)+", re.I)
_REVERT = re.compile(r"this[ \t]+reverts[ \t]+commit\b[ \t]*(.*)$", re.I | re.M)
_REVERT_HASH = re.compile(r"([0-9a-fA-F]{%d,%d})(?![0-9A-Za-z_])" % (HEX_MIN, HEX_MAX))
_STABLE = re.compile(r"^[ \t]*cc[ \t]*:.*(?<![\w.+-])stable@", re.I | re.M)
_MAX_JOIN = 3


# A parsed Fixes: reference (ref_hash as written, lower-case; raw_text = the whole
# line): the store's own row type, so references pass through unchanged.
FixRef = FixRow


class MessageRefs(NamedTuple):
    fixes: list[FixRef]
    reverts: list[str]
    unparsed: list[tuple[str, str]]     # (kind, raw text)
    stable_request: bool


def _closing_quote_paren(v: str, start: int, closer: str) -> int:
    """Index of the ``closer`` ending a subject begun before ``start``, or -1."""
    last = -1
    i = v.find(closer, start)
    while i >= 0:
        rest = v[i + len(closer):].lstrip()
        if not rest or rest[0] in ",;#[&" or rest.lower().startswith("and ") \
                or _HASH.match(rest):
            return i
        last = i
        i = v.find(closer, i + 1)
    return last


def _subject(v: str, pos: int) -> tuple[str | None, int]:
    """The subject cited after a hash at ``pos``; returns (subject, new position)."""
    while pos < len(v) and v[pos] in " \t":
        pos += 1
    rest = v[pos:]
    if not rest:
        return None, pos
    if rest[:2] in ('("', "('", "(\u201c"):
        closer = {'"': '")', "'": "')", "\u201c": "\u201d)"}[rest[1]]
        end = _closing_quote_paren(v, pos + 2, closer)
        if end < 0:
            return rest[2:].rstrip(")\"' \t") or None, len(v)
        return v[pos + 2:end], end + len(closer)
    if rest[0] == "(":
        depth = 0
        for i in range(pos, len(v)):
            depth += (v[i] == "(") - (v[i] == ")")
            if depth == 0:
                return v[pos + 1:i].strip().strip("\"'") or None, i + 1
        return rest[1:].strip().strip("\"'") or None, len(v)
    if rest[0] in "\"'\u201c":
        closer = "\u201d" if rest[0] == "\u201c" else rest[0]
        end = _closing_quote_paren(v, pos + 1, closer)
        if end < 0:
            return rest[1:].strip() or None, len(v)
        return v[pos + 1:end], end + 1
    if rest[0] in ",;&#[" or _SEP.match(rest) or _HASH.match(rest):
        return None, pos
    return rest.strip() or None, len(v)      # subject without parentheses


def parse_fixes_value(value: str) -> list[tuple[str, str | None]] | None:
    """``[(hash, cited subject or None), ...]`` of a ``Fixes:`` value; None if none parse."""
    refs: list[tuple[str, str | None]] = []
    pos, n = 0, len(value)
    while pos < n:
        sep = _SEP.match(value, pos)
        if sep:
            pos = sep.end()
            if pos >= n:
                break
        m = _HASH.match(value, pos)
        if m is None:
            break          # trailing text (a comment, a version) after the last reference
        subject, pos = _subject(value, m.end())
        refs.append((m.group(1).lower(), subject))
    return refs or None


def _logical_line(message: str, m: re.Match[str]) -> tuple[str, str]:
    """The Fixes line with its continuation lines; returns (value, raw text)."""
    value, end = m.group(1), m.end()
    raw = m.group(0).strip()
    for _ in range(_MAX_JOIN):
        if end >= len(message):
            break
        nl = message.find("\n", end + 1)
        nxt = message[end + 1: nl if nl >= 0 else len(message)]
        unclosed = value.count("(") > value.count(")") or value.count('"') % 2 == 1
        if not nxt.strip() or _FIXES_LINE.match(nxt) or not (unclosed or nxt[:1] in " \t"):
            break
        value = value.rstrip() + " " + nxt.strip()
        raw = raw + " " + nxt.strip()
        end = nl if nl >= 0 else len(message)
    return value.strip(), raw


def scan_message(message: str, block: TrailerBlock) -> MessageRefs:
    """Find fix and revert references and the stable request in ``message``."""
    fixes: list[FixRef] = []
    unparsed: list[tuple[str, str]] = []
    if "ixes" in message or "IXES" in message:
        for m in _FIXES_LINE.finditer(message):
            value, raw = _logical_line(message, m)
            inside = block.start <= m.start() < block.end
            parsed = parse_fixes_value(value)
            if parsed is None:
                unparsed.append(("fixes", raw))
                continue
            fixes.extend(FixRef(h, s, inside, raw) for h, s in parsed)
    reverts: list[str] = []
    if "evert" in message or "EVERT" in message:
        for m in _REVERT.finditer(message):
            hm = _REVERT_HASH.match(m.group(1))
            if hm is None:
                unparsed.append(("revert", m.group(0).strip()))
            elif hm.group(1).lower() not in reverts:
                reverts.append(hm.group(1).lower())
    stable = bool(_STABLE.search(message)) if "table@" in message.lower() else False
    return MessageRefs(fixes, reverts, unparsed, stable)
