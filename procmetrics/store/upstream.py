"""Rows for upstream reference histories: which clone is whose reference, each
commit's ``git patch-id --stable`` (computed once per commit) and the backport
lines of a tree's commit messages. The only SQL for these tables."""
from __future__ import annotations

from typing import Iterable, Iterator

from sqlalchemy import and_, delete, insert, select, update
from sqlalchemy.engine import Engine

from procmetrics.errors import StoreError
from procmetrics.store import schema as s

_CHUNK = 5000


def repo_id(engine: Engine, name: str) -> int:
    with engine.connect() as conn:
        found = conn.execute(select(s.repository.c.repo_id)
                             .where(s.repository.c.name == name)).scalar()
    if found is None:
        raise StoreError(f"repository {name!r} not in the store")
    return int(found)


def link_reference(engine: Engine, tree: int, upstream: int, path_map: str | None = None
                   ) -> bool:
    """Record ``upstream`` as a reference history of ``tree`` with its path map (JSON or
    None). Returns True when the path map changed (the upstream's patch ids, computed
    under the old map, must then be computed again)."""
    r = s.upstream_reference
    with engine.begin() as conn:
        known = conn.execute(select(r.c.path_map).where(
            r.c.repo_id == tree, r.c.upstream_repo_id == upstream)).first()
        if known is None:
            conn.execute(insert(r).values(repo_id=tree, upstream_repo_id=upstream,
                                          path_map=path_map))
            others = conn.execute(select(r.c.path_map).where(
                r.c.upstream_repo_id == upstream, r.c.repo_id != tree)).scalars().all()
            return any(o != path_map for o in others)
        if known[0] != path_map:
            conn.execute(update(r).where(r.c.repo_id == tree, r.c.upstream_repo_id == upstream)
                         .values(path_map=path_map))
            return True
    return False


def forget_patch_ids(engine: Engine, repo: int) -> None:
    """Drop the stored patch ids of ``repo`` (its path map changed)."""
    with engine.begin() as conn:
        conn.execute(delete(s.patch_id).where(s.patch_id.c.repo_id == repo))


def commits_without_patch_id(engine: Engine, repo: int) -> list[str]:
    """Stored non-merge commits of complete runs that have no patch id row yet."""
    g, p = s.commit, s.patch_id
    done = select(p.c.hash).where(p.c.repo_id == repo)
    complete = select(s.mining_run.c.run_id).where(s.mining_run.c.status == "complete")
    stmt = (select(g.c.hash).where(g.c.repo_id == repo, g.c.is_merge.is_(False),
                                   g.c.run_id.in_(complete), g.c.hash.not_in(done))
            .order_by(g.c.hash))
    with engine.connect() as conn:
        return list(conn.execute(stmt).scalars())


def add_patch_ids(engine: Engine, repo: int, rows: Iterable[tuple[str, str]]) -> int:
    rows = [{"repo_id": repo, "hash": h, "patch_id": pid} for h, pid in rows]
    with engine.begin() as conn:
        for part in _parts(rows):
            conn.execute(insert(s.patch_id), part)
    return len(rows)


def messages(engine: Engine, repo: int) -> Iterator[tuple[str, str]]:
    """``(hash, message)`` of every stored commit of complete runs (streamed)."""
    g = s.commit
    complete = select(s.mining_run.c.run_id).where(s.mining_run.c.status == "complete")
    stmt = (select(g.c.hash, g.c.message).where(and_(g.c.repo_id == repo,
                                                     g.c.run_id.in_(complete)))
            .order_by(g.c.hash))
    with engine.connect() as conn:
        result = conn.execution_options(yield_per=_CHUNK).execute(stmt)
        for h, msg in result:
            yield h, msg


def replace_backport_lines(engine: Engine, repo: int,
                           rows: Iterable[tuple[str, str, str]]) -> int:
    """Replace the repository's backport lines with ``(hash, style, cited hash)`` rows."""
    rows = [{"repo_id": repo, "hash": h, "style": st, "cited_hash": c} for h, st, c in rows]
    with engine.begin() as conn:
        conn.execute(delete(s.backport_line).where(s.backport_line.c.repo_id == repo))
        for part in _parts(rows):
            conn.execute(insert(s.backport_line), part)
    return len(rows)


def _parts(rows: list[dict]) -> Iterator[list[dict]]:
    for i in range(0, len(rows), _CHUNK):
        yield rows[i:i + _CHUNK]


def carryover_tables(engine: Engine, repo: str | None, upstream: str | None = None
                     ) -> dict:
    """The tidy tables the carry-over questions need, for one tree and one upstream:
    ``{"tree", "upstream", "tree_tables", "upstream_tables"}``. Raises
    :class:`StoreError` when no upstream reference is recorded, and
    :class:`~procmetrics.errors.ConfigError` when the choice is not unique."""
    from procmetrics.errors import ConfigError
    from procmetrics.store.tables import read_tables

    refs = read_tables(engine, ["upstream_references"], repo)["upstream_references"]
    if refs.empty:
        raise StoreError(f"no upstream reference recorded for {repo or 'any repository'}: "
                         "run 'procmetrics mine TREE --upstream UPSTREAM' first")
    if repo is None and refs["repo"].nunique() > 1:
        raise ConfigError("several trees have upstream references ("
                          + ", ".join(sorted(set(refs["repo"]))) + "); choose one with --repo")
    tree = str(refs["repo"].iloc[0])
    ups = list(refs["upstream_repo"])
    if upstream is None and len(ups) > 1:
        raise ConfigError(f"{tree} has several upstream references ({', '.join(ups)}); "
                          "choose one with --upstream")
    up_name = upstream or ups[0]
    if up_name not in ups:
        raise StoreError(f"{up_name!r} is not an upstream reference of {tree}")
    t = read_tables(engine, ["commits", "backport_lines", "patch_ids", "fix_links",
                             "repositories"], tree)
    pm = refs.loc[refs["upstream_repo"] == up_name, "path_map"].iloc[0]
    names = ["commits", "patch_ids", "fix_links", "commit_subsystems"]
    u = read_tables(engine, names + (["file_changes"] if isinstance(pm, str) else []), up_name)
    return {"tree": tree, "upstream": up_name, "tree_tables": t, "upstream_tables": u,
            "path_map": pm if isinstance(pm, str) else None}
