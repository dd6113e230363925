"""Which stored paths and commits a scope selects (globs matched once per path)."""
from __future__ import annotations

from dataclasses import dataclass

import pandas as pd
from sqlalchemy.engine import Connection

from procmetrics.scope.definition import ScopeDef


@dataclass(frozen=True)
class ScopeSelection:
    """The outcome of matching a scope against one repository's stored paths."""

    scope: ScopeDef
    #: distinct paths the history touched
    n_stored_paths: int
    #: the in-scope paths among them (sorted)
    paths: tuple[str, ...]
    #: commits touching an in-scope path: ``hash``, ``is_merge``, ``scope_lines``
    commits: pd.DataFrame
    #: include / exclude patterns (or listed paths) that match no stored path
    unmatched_include: tuple[str, ...]
    unmatched_exclude: tuple[str, ...]


def match_paths(scope: ScopeDef, stored: list[str]
                ) -> tuple[list[str], tuple[str, ...], tuple[str, ...]]:
    """In-scope paths among ``stored`` and the patterns that matched nothing."""
    inc, inc_hits = scope.include.match(stored, scope.source)
    exc, exc_hits = scope.exclude.match(stored, scope.source)
    paths = [p for p, i, e in zip(stored, inc, exc) if i and not e]
    miss_i = tuple(p for p, h in zip(scope.include.patterns, inc_hits) if h == 0)
    miss_e = tuple(p for p, h in zip(scope.exclude.patterns, exc_hits) if h == 0)
    return paths, miss_i, miss_e


def select_scope(conn: Connection, repo: str, scope: ScopeDef) -> ScopeSelection:
    """Match the scope's patterns against every distinct stored path of ``repo`` (once
    each) and select the commits touching the matched ones in SQL."""
    from procmetrics.store.scopesql import commits_touching, distinct_paths

    stored = distinct_paths(conn, repo)
    paths, miss_i, miss_e = match_paths(scope, stored)
    commits = commits_touching(conn, repo, paths)
    return ScopeSelection(scope, len(stored), tuple(paths), commits, miss_i, miss_e)
