"""Commit-hash prefix look-up shared by the miner (fix references) and the carry-over
analysis (backport lines): a bisect over sorted full hashes."""
from __future__ import annotations

import bisect
from typing import Sequence


def prefix_matches(sorted_hashes: Sequence[str], prefix: str, limit: int = 2) -> list[str]:
    """Up to ``limit`` hashes of ``sorted_hashes`` starting with ``prefix`` (bisect)."""
    i = bisect.bisect_left(sorted_hashes, prefix)
    out = []
    while i < len(sorted_hashes) and sorted_hashes[i].startswith(prefix) and len(out) < limit:
        out.append(sorted_hashes[i])
        i += 1
    return out
