"""Scopes: which part of a tree (and which time window) the evidence is about.

A question-free utility: a scope file (TOML), a path list or a JSON compilation
database become a :class:`~procmetrics.scope.definition.ScopeDef`
(``definition``, ``compdb``); its globs are matched once per distinct stored
path (``matcher``); the commits touching the matched paths are selected in SQL
(``select``, through ``store.scopesql``) and the tidy tables cut to them and to
a committer-date window (``apply``).

Imports: ``errors``, ``store`` (SQL stays there) and the one date parser
``analyse.measures.periods``; ``session``, ``claims``, ``report`` and ``cli``
import it, ``analyse`` and ``store`` never do.
"""
from __future__ import annotations

from procmetrics.lazyexports import lazy_getattr

_EXPORTS: dict[str, str] = {
    "ScopeDef": "definition", "read_scope": "definition",
    "PatternSet": "matcher",
    "ScopeSelection": "select", "select_scope": "select",
    "ScopeSummary": "apply", "apply_scope": "apply", "RULE": "apply", "DEFECT_RULE": "apply",
}
__all__ = sorted(_EXPORTS)

__getattr__ = lazy_getattr(__name__, _EXPORTS)
