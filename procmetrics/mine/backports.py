"""Backport lines: what a backporter writes to name the upstream commit a change
carries over. Styles (case-insensitive, whole line, leading spaces and ``[ ]``
brackets allowed; hashes of 7 to 40 hex digits):

* ``cherry-picked``   - ``(cherry picked from commit <id>)`` (``git cherry-pick -x``)
* ``commit-upstream`` - ``commit <id> upstream.`` (a stable-tree convention)
* ``upstream-commit`` - ``Upstream commit <id>`` / ``[ Upstream commit <id> ]``
* ``backported-from`` - ``Backported from commit <id>`` / ``(backported from commit <id>)``

Measured on the libbpf mirror (2,875 commits): 0 cherry-picked, 0 commit-upstream,
2 upstream-commit lines; its sync commits name kernel ranges ("Baseline bpf-next
commit", 195) which are not per-commit backport lines and are not read here.
"""
from __future__ import annotations

import re

_HASH = r"([0-9a-fA-F]{7,40})\b"
STYLES: tuple[tuple[str, re.Pattern[str]], ...] = (
    ("cherry-picked", re.compile(r"^\s*\(?\s*cherry[- ]picked from commit " + _HASH, re.I | re.M)),
    ("commit-upstream", re.compile(r"^\s*\[?\s*commit " + _HASH + r"\s+upstream\b", re.I | re.M)),
    ("upstream-commit", re.compile(r"^\s*\[?\s*upstream commit:?\s+" + _HASH, re.I | re.M)),
    ("backported-from", re.compile(r"^\s*\(?\s*backported from (?:commit )?" + _HASH,
                                   re.I | re.M)),
)


def backport_lines(message: str) -> list[tuple[str, str]]:
    """``(style, cited hash lower-cased)`` for each backport line in ``message``."""
    out: list[tuple[str, str]] = []
    for style, pattern in STYLES:
        for m in pattern.finditer(message):
            item = (style, m.group(1).lower())
            if item not in out:
                out.append(item)
    return out
