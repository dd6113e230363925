"""Loading helpers the CLI commands share: one repository's tidy tables, tag
ancestry from its clone, and the ``--links-from`` option.

Sits below ``cli`` (every command imports it; it imports no command) and above
``store`` and ``mine``, whose calls it wraps; a notebook can use it too.
"""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.errors import ProcmetricsError, StoreError


def load_tables(store: str | None, repo: str | None) -> tuple[dict[str, pd.DataFrame], str]:
    """Read the tidy tables the lifetime and growth commands need (one repository)."""
    from procmetrics.store import open_store
    from procmetrics.store.tables import read_table

    engine = open_store(store, create=False, readonly=True)
    try:
        repos = read_table(engine, "repositories", repo)
        if repos.empty:
            raise StoreError(f"repository {repo!r} not in the store" if repo
                             else "the store holds no repository: run 'procmetrics mine' first")
        if repo is None and len(repos) > 1:
            raise ProcmetricsError("the store holds several repositories ("
                                   + ", ".join(repos["repo"]) + "); choose one with --repo")
        name = str(repos["repo"].iloc[0])
        tables = {t: read_table(engine, t, name) for t in
                  ("fix_links", "commits", "commit_subsystems", "trailers", "tags")}
        tables["repositories"] = repos
    finally:
        engine.dispose()
    return tables, name


def containment(tables: dict[str, pd.DataFrame], commits: list[str],
                tags: list[str] | None = None) -> pd.DataFrame:
    """Tag ancestry from the clone recorded in the store (read-only git)."""
    from procmetrics.mine.ancestry import tag_containment

    path = str(tables["repositories"]["path"].iloc[0])
    if tags is None:
        tags = list(tables["tags"]["name"])
    return tag_containment(path, commits, tags)


def links_from(value: str | None) -> Any:
    """``--links-from`` as :func:`procmetrics.analyse.lifetimes.defects.build_defects` takes it."""
    if value is None or value == "first":
        return "first_link"
    if value == "all":
        return None
    try:
        return pd.Timestamp(value)
    except ValueError as exc:
        raise ProcmetricsError(f"--links-from: not a date, 'first' or 'all': {value!r}") from exc
