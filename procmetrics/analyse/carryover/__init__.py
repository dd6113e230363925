"""Are upstream fixes carried over into a tree, and how fast: commit equivalence
between an upstream reference history and a tree (same id, backport lines, patch
ids), the list of upstream fixes the tree lacks, and carry-over latency as
right-censored survival data (Kaplan–Meier, log-rank).

May import: ``procmetrics.analyse.measures``, the shared modules and ``errors``.
"""
from __future__ import annotations

from procmetrics.lazyexports import lazy_getattr

_EXPORTS: dict[str, str] = {
    "MATCH_COLUMNS": "equivalence",
    "match_commits": "equivalence",
    "resolve_upstream_refs": "equivalence",
    "CARRYOVER_COLUMNS": "missing",
    "Exclusion": "missing",
    "carryover_table": "missing",
    "missing_fixes": "missing",
    "LatencyResult": "latency",
    "carryover_latency": "latency",
    "km_curve": "latency",
    "logrank_one_sided": "latency",
    "build_carryover": "build",
}
__all__ = sorted(_EXPORTS)

__getattr__ = lazy_getattr(__name__, _EXPORTS)
