"""Loading helpers the CLI commands share: one repository's tidy tables, tag
ancestry from its clone, and the ``--links-from`` option.

Sits below ``cli`` (every command imports it; it imports no command) and above
``store`` and ``mine``, whose calls it wraps; a notebook can use it too.
"""
from __future__ import annotations

from typing import Any, Iterable

import pandas as pd

from procmetrics.errors import ConfigError, InsufficientData


#: the tidy tables the analysis commands read (each command names the ones it uses)
ANALYSIS_TABLES: tuple[str, ...] = ("fix_links", "commits", "commit_subsystems", "trailers",
                                    "tags")


def load_tables(store: str | None, repo: str | None, scope: Any = None, *,
                names: Iterable[str] = ANALYSIS_TABLES,
                trailer_keys: Iterable[str] | None = None
                ) -> tuple[dict[str, pd.DataFrame], str]:
    """Read the tidy tables the analysis commands need (one repository), cut to
    ``scope`` (a :class:`procmetrics.scope.apply.ScopeRequest`) when one is active; the
    scope's summary is then ``tables["scope_summary"]`` (and the whole-tree tables
    ``tables["whole_tree"]``).

    ``names`` are the tables to read (``repositories`` always comes too): a table not
    read is absent, never empty, so a command that forgets one fails loudly.
    ``trailer_keys`` keeps only the trailer lines with those keys (case-blind), for a
    command that only counts review trailers (see :func:`procmetrics.store.tables.trailers`).
    """
    from procmetrics.store import open_store
    from procmetrics.store.tables import read_table, snapshot

    from procmetrics import progress

    progress.advance("reading the store")
    engine = open_store(store, create=False, readonly=True)
    try:
        repos = read_table(engine, "repositories", repo)
        if repos.empty:
            if repo:
                raise ConfigError(f"repository {repo!r} is not in the store", key="--repo")
            raise InsufficientData("the store holds no repository: run 'procmetrics mine' first")
        if repo is None and len(repos) > 1:
            raise ConfigError("the store holds several repositories ("
                                   + ", ".join(repos["repo"]) + "); choose one with --repo")
        name = str(repos["repo"].iloc[0])
        with snapshot(engine) as conn:
            wanted = list(names)
            unknown = sorted(set(wanted) - set(ANALYSIS_TABLES))
            if unknown:
                raise ValueError(f"load_tables cannot read {unknown}")
            tables = {t: read_table(conn, t, name, **(
                {"keys": tuple(trailer_keys)} if t == "trailers" and trailer_keys is not None
                else {})) for t in ANALYSIS_TABLES if t in wanted}
            tables["repositories"] = repos
            if scope is not None and scope.active:
                whole = dict(tables)
                tables, summary = scope(conn, name, tables)
                tables["scope_summary"] = summary
                tables["whole_tree"] = whole
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


def links_from(value: str | None, tables: dict[str, Any] | None = None) -> Any:
    """``--links-from`` as :func:`procmetrics.analyse.lifetimes.defects.build_defects` takes
    it: ``settled``, ``first``, ``all``, or a date, tag or commit (the one date parser)."""
    from procmetrics.analyse.measures.periods import resolve_when
    if value is None or value == "first":
        return "first_link"
    if value == "settled":
        return "settled"
    if value == "all":
        return None
    tables = tables or {}
    tables = tables.get("whole_tree", tables)    # a commit outside a scope still names a date
    return resolve_when(value, commits=tables.get("commits"), tags=tables.get("tags"),
                        option="--links-from")


def change_date(value: str | None, tables: dict[str, Any]) -> Any:
    """``--change-date``: a date, tag or commit (the one date parser), or None."""
    from procmetrics.analyse.measures.periods import resolve_when
    if value is None:
        return None
    tables = tables.get("whole_tree", tables)    # a commit outside a scope still names a date
    return resolve_when(value, commits=tables.get("commits"), tags=tables.get("tags"),
                        option="--change-date")


def read_exclusions(path: str | None) -> list[Any]:
    """The exclusions file (see :func:`procmetrics.claims.carryover_source.read_exclusions`)."""
    from procmetrics.claims.carryover_source import read_exclusions as read

    return read(path)


def load_carryover(store: str | None, repo: str | None, upstream: str | None = None,
                   exclusions: str | None = None, as_of: str | None = None) -> dict[str, Any]:
    """Everything the carry-over questions need for one tree and one upstream reference:
    the per-fix table (``table``), the matches, the tree's fix references resolved
    upstream (``tree_refs_upstream``), the tip date, and the names of both (the one
    computation the claims and the report use too:
    :func:`procmetrics.claims.carryover_source.carryover_from_engine`)."""
    from procmetrics.claims.carryover_source import carryover_from_engine, parse_as_of
    from procmetrics.store import open_store

    excl = read_exclusions(exclusions)
    when = parse_as_of(as_of)
    engine = open_store(store, create=False)
    try:
        return carryover_from_engine(engine, repo, upstream, excl, when)
    finally:
        engine.dispose()
