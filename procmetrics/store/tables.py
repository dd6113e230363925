"""Tidy tables read from the store: one observation a row, fixed columns.

Every reader takes an engine and an optional repository name (``None`` = every
repository in the store) and returns a :class:`pandas.DataFrame` whose columns
are listed in :data:`COLUMNS` (and in the README's data-model section).
Dates are timezone-aware UTC ``Timestamp``; the original offset is kept in a
``*_offset_min`` column.
"""
from __future__ import annotations

from operator import itemgetter
from typing import Any, Callable, Iterable

import numpy as np
import pandas as pd
from sqlalchemy import and_, case, func, select
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.sql import Select

from procmetrics.errors import StoreError
from procmetrics.store import schema as s
from procmetrics.store.frames import (as_text, fetch_by_ids, fetch_frame, fetch_rows,
                                      positions, row_order, share_equal_values, to_utc)
from procmetrics.store.readsql import (  # noqa: F401 - re-exported: the readers' names
    COLUMNS, _complete_runs, _repo_filter, snapshot)


_DATE_COLUMNS = {"author_date", "committer_date", "fix_author_date", "fix_committer_date",
                 "intro_author_date", "intro_committer_date", "tag_date", "started", "ended"}
_BOOL_COLUMNS = {"is_merge", "stable_request", "is_revert", "is_binary", "subject_match",
                 "in_trailer_block", "is_annotated", "is_shallow"}


#: text columns whose values repeat from row to row (people, keys, names, the repository):
#: the driver makes a new string for every cell; :func:`_read_frame` lets equal values
#: share one (at a million commits the per-cell copies of these columns were over a GiB)
_REPEATED_TEXT: dict[str, tuple[str, ...]] = {
    "commits": (),                 # looked up from ids: its strings are shared already
    "commit_subsystems": (),       # looked up from ids: its strings are shared already
    "file_changes": ("repo", "hash", "path", "old_path", "change_type"),
    "trailers": ("hash", "key", "raw_key", "value"),     # people and repository: from ids
    "fix_links": ("repo", "status", "introducer_hash"),
    "reverts": ("repo", "status"),
    "unparsed_references": ("repo", "hash", "kind"),
    "tags": ("repo",),
    "patch_ids": ("repo",),
    "backport_lines": ("repo", "hash", "style"),
}


def _read(engine: Engine | Connection, stmt: Select, name: str,
          order: list[str] | None = None) -> pd.DataFrame:
    """Run ``stmt`` and shape the rows as the tidy table ``name``.

    ``order`` (columns that identify a row, none of them NULL) sorts the rows here
    rather than in the database: an ``ORDER BY`` on text columns of a join makes
    SQLite build a temporary B-tree over every row, which costs several times the
    query itself at kernel scale (see DEVELOPERS.md, "Reading the store"). The
    sort is on the raw values (text by code point, which is UTF-8 byte order, as
    SQLite's BINARY collation; dates as epoch seconds), so the rows come out in
    the order the ``ORDER BY`` gave.
    """
    if isinstance(engine, Connection):
        df = fetch_frame(engine, stmt)
    else:
        with engine.connect() as conn:
            df = fetch_frame(conn, stmt)
    return _read_frame(df, name, order)


def _read_frame(df: pd.DataFrame, name: str, order: list[str] | None = None) -> pd.DataFrame:
    """Rows fetched for the tidy table ``name`` in its shape (see :func:`_read`)."""
    if order:
        df = df.take(row_order(df, order)).reset_index(drop=True)
    cols = COLUMNS[name]
    df = df.reindex(columns=cols)
    share_equal_values(df, _REPEATED_TEXT.get(name, ()))
    for c in cols:
        if c in _DATE_COLUMNS:
            df[c] = to_utc(df[c])
        elif c in _BOOL_COLUMNS:
            df[c] = df[c].astype("boolean")
    return df


def commits(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    """One row per commit (merges included and flagged by ``is_merge``).

    The commits are fetched with their people's ids, and the names and e-mails looked
    up from one read of the ``person`` table: joined in SQL, every row brought four
    strings of its own, which cost a third of the read at a million commits (and the
    commits of one person now share hers). File counts and line sums are the ones the
    writer stored with each commit (schema 6), not a ``GROUP BY`` over every file row.
    """
    fx = (select(s.fix_link.c.commit_id,
                 func.count().label("n_fix_refs"),
                 func.sum(case((s.fix_link.c.status == "resolved", 1), else_=0))
                 .label("n_resolved_fixes"))
          .group_by(s.fix_link.c.commit_id).subquery())
    rv = (select(s.revert_link.c.commit_id, func.count().label("n_reverts"))
          .group_by(s.revert_link.c.commit_id).subquery())
    g = s.commit
    stmt = (
        select(
            g.c.repo_id, g.c.hash, g.c.author_id, g.c.committer_id,
            g.c.author_time.label("author_date"), g.c.author_offset_min,
            g.c.committer_time.label("committer_date"), g.c.committer_offset_min,
            g.c.subject, g.c.n_parents, g.c.is_merge, g.c.stable_request,
            g.c.n_files, g.c.lines_added, g.c.lines_deleted,
            func.coalesce(fx.c.n_fix_refs, 0).label("n_fix_refs"),
            func.coalesce(fx.c.n_resolved_fixes, 0).label("n_resolved_fixes"),
            (func.coalesce(rv.c.n_reverts, 0) > 0).label("is_revert"),
        )
        .select_from(g)
        .outerjoin(fx, fx.c.commit_id == g.c.commit_id)
        .outerjoin(rv, rv.c.commit_id == g.c.commit_id)
        .where(g.c.run_id.in_(_complete_runs()))
    )
    df, person_rows = fetch_by_ids(engine, stmt, g.c.repo_id, repo, people=True)
    names, emails = as_text(person_rows["name"]), as_text(person_rows["email"])
    for role in ("author", "committer"):
        at = positions(person_rows["person_id"], df[f"{role}_id"])
        df[f"{role}_name"], df[f"{role}_email"] = names[at], emails[at]
    df = _read_frame(df, "commits", order=["repo", "committer_date", "hash"])
    for col in ("n_files", "n_fix_refs", "n_resolved_fixes", "n_parents"):
        df[col] = df[col].astype("int64")
    for col in ("lines_added", "lines_deleted"):
        df[col] = df[col].astype("Int64")
    return df


def commit_subsystems(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    """One row per (commit, subsystem) the commit touched.

    The file rows are fetched as bare (commit id, path) tuples and joined here: each
    commit id to the visible commits (one read of them, which also gives each pair's
    hash and repository), each path to an index of its repository's
    mapped paths (``path_subsystem``, tens of thousands of paths for a kernel), and the
    distinct (commit, subsystem) id pairs found in numpy. The same join in SQL made SQLite
    look every file row's commit and path up in an index, and took 14.5 s at a million
    commits. The subsystem names are looked up from one read of the subsystems; the
    pairs of one commit share its strings.
    """
    fc, ps, sub, r = s.file_change, s.path_subsystem, s.subsystem, s.repository
    g = s.commit
    files = select(fc.c.commit_id, fc.c.path)
    mapped = select(ps.c.repo_id, ps.c.path, ps.c.subsystem_id)
    visible = (select(g.c.commit_id, g.c.hash, g.c.repo_id)
               .where(g.c.run_id.in_(_complete_runs())))
    names = select(sub.c.subsystem_id, sub.c.name)
    repos = select(r.c.repo_id, r.c.name)
    if repo is not None:
        wanted = select(r.c.repo_id).where(r.c.name == repo).scalar_subquery()
        mapped = mapped.where(ps.c.repo_id == wanted)
        visible = visible.where(g.c.repo_id == wanted)
        names = names.where(sub.c.repo_id == wanted)
        repos = repos.where(r.c.repo_id == wanted)

    def fetch(conn: Connection) -> tuple[Any, ...]:
        commit_rows, paths, subsystem_rows, repo_rows = (
            fetch_frame(conn, q) for q in (visible, mapped, names, repos))
        wanted_files = files
        if repo is not None and conn.execute(
                select(func.count()).select_from(r)).scalar_one() > 1:
            # other repositories' file rows stay in the database
            wanted_files = files.where(fc.c.commit_id.in_(
                select(g.c.commit_id).where(g.c.repo_id == wanted)))
        pairs = _subsystem_pairs(fetch_rows(conn, wanted_files), commit_rows, paths)
        return pairs, commit_rows, subsystem_rows, repo_rows

    if isinstance(engine, Connection):
        ids, commit_rows, subsystem_rows, repo_rows = fetch(engine)
    else:       # the reads from one snapshot, so every id is found
        with snapshot(engine) as conn:
            ids, commit_rows, subsystem_rows, repo_rows = fetch(conn)
    at = positions(commit_rows["commit_id"], ids["commit_id"])
    repo_at = positions(repo_rows["repo_id"], commit_rows["repo_id"])
    df = pd.DataFrame({
        "repo": as_text(repo_rows["name"])[repo_at][at],
        "hash": as_text(commit_rows["hash"])[at],
        "subsystem": as_text(subsystem_rows["name"])[
            positions(subsystem_rows["subsystem_id"], ids["subsystem_id"])],
    })
    return _read_frame(df, "commit_subsystems", order=["repo", "hash", "subsystem"])


def _subsystem_pairs(files: Iterable[list[tuple[Any, Any]]], commits: pd.DataFrame,
                     mapped: pd.DataFrame) -> pd.DataFrame:
    """The distinct (commit_id, subsystem_id) pairs of the file rows ``files`` (chunks of
    (commit_id, path) tuples) whose commit is one of ``commits`` (commit_id, repo_id: the
    visible commits) and whose (repo_id, path) is a row of ``mapped`` (repo_id, path,
    subsystem_id): the rows of ``SELECT DISTINCT fc.commit_id, ps.subsystem_id`` over the
    join of the three on commit, repository and path (text compared exactly, as SQLite's
    BINARY collation and Python's ``==`` both do)."""
    # (no drop_duplicates: pandas' string hash table takes "fw" and "fw\x00" for one
    # value; a repeated row only repeats pairs, which the final distinct removes)
    # each distinct (repo, path) gets a code; its subsystems sit at offsets[code]...
    keys = list(zip(mapped["repo_id"].tolist(), mapped["path"].tolist()))
    code_of: dict[tuple[Any, Any], int] = {}
    codes = np.fromiter((code_of.setdefault(k, len(code_of)) for k in keys), np.int64,
                        len(keys))
    by_code = np.argsort(codes, kind="stable")
    subsystem_ids = mapped["subsystem_id"].to_numpy(dtype=np.int64)[by_code]
    counts = np.bincount(codes, minlength=len(code_of))
    offsets = np.concatenate([[0], np.cumsum(counts)])
    per_repo: dict[Any, tuple[list[Any], list[int]]] = {}
    for (repo_id, path), code in code_of.items():
        paths_codes = per_repo.setdefault(repo_id, ([], []))
        paths_codes[0].append(path)
        paths_codes[1].append(code)
    # pandas' Index looks text up with Python's own equality (unlike its factorize:
    # tests/store/test_read_order.py pins both)
    lookups = {repo_id: (pd.Index(np.asarray(p, dtype=object)), np.asarray(c, dtype=np.int64))
               for repo_id, (p, c) in per_repo.items()}
    commit_index = pd.Index(commits["commit_id"].to_numpy(dtype=np.int64))
    commit_repo = commits["repo_id"].to_numpy()
    found: list[tuple[np.ndarray, np.ndarray]] = []
    first, second = itemgetter(0), itemgetter(1)
    for rows in files:
        if not rows or not lookups:
            continue
        ids = np.fromiter(map(first, rows), np.int64, len(rows))
        at = commit_index.get_indexer(ids)
        seen = at >= 0                        # a hidden run's or another repository's commit
        commit_ids = ids[seen]
        repo_ids = commit_repo[at[seen]]
        paths = np.fromiter(map(second, rows), object, len(rows))[seen]
        file_codes = np.full(len(commit_ids), -1, dtype=np.int64)
        for repo_id in pd.unique(repo_ids):
            if repo_id not in lookups:
                continue
            repo_paths, repo_codes = lookups[repo_id]
            mine = np.flatnonzero(repo_ids == repo_id)
            where = repo_paths.get_indexer(paths[mine])
            file_codes[mine] = np.where(where >= 0, repo_codes[where], -1)
        hit = file_codes >= 0
        commit_ids, file_codes = commit_ids[hit], file_codes[hit]
        n_subs = counts[file_codes]
        # one row per (file row, subsystem of its path)
        starts = np.repeat(offsets[file_codes], n_subs)
        within = np.arange(len(starts)) - np.repeat(np.cumsum(n_subs) - n_subs, n_subs)
        found.append((np.repeat(commit_ids, n_subs), subsystem_ids[starts + within]))
    commit_ids, subsystem_ids = _distinct_pairs(
        np.concatenate([c for c, _ in found] or [np.empty(0, np.int64)]),
        np.concatenate([s for _, s in found] or [np.empty(0, np.int64)]))
    return pd.DataFrame({"commit_id": commit_ids, "subsystem_id": subsystem_ids})


def _distinct_pairs(commit_ids: np.ndarray, subsystem_ids: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
    """The distinct (commit id, subsystem id) pairs, sorted: through one int64 key (the
    commit id in the high bits) when both ids fit, else through a structured array."""
    if not len(commit_ids):
        return commit_ids, subsystem_ids
    if (commit_ids.min() >= 0 and commit_ids.max() < 2 ** 31
            and subsystem_ids.min() >= 0 and subsystem_ids.max() < 2 ** 32):
        keys = np.sort((commit_ids << 32) | subsystem_ids)
        keys = keys[np.concatenate([[True], keys[1:] != keys[:-1]])]
        return keys >> 32, keys & 0xFFFFFFFF
    pairs = np.empty(len(commit_ids), dtype=[("c", np.int64), ("s", np.int64)])
    pairs["c"], pairs["s"] = commit_ids, subsystem_ids
    pairs = np.unique(pairs)
    return pairs["c"], pairs["s"]


def file_changes(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    """One row per (commit, touched path)."""
    g, fc = s.commit, s.file_change
    stmt = (
        select(s.repository.c.name.label("repo"), g.c.hash, fc.c.path, fc.c.old_path,
               fc.c.change_type, fc.c.lines_added, fc.c.lines_deleted, fc.c.is_binary)
        .select_from(fc).join(g, g.c.commit_id == fc.c.commit_id)
        .join(s.repository, s.repository.c.repo_id == g.c.repo_id)
    )
    df = _read(engine, _repo_filter(stmt.where(g.c.run_id.in_(_complete_runs())), repo),
               "file_changes", order=["repo", "hash", "path"])
    for col in ("lines_added", "lines_deleted"):
        df[col] = df[col].astype("Int64")
    return df


def trailers(engine: Engine, repo: str | None = None,
             keys: Iterable[str] | None = None) -> pd.DataFrame:
    """One row per trailer line of a commit's final trailer block.

    ``keys``, when given, keeps only the lines whose key is one of them, compared
    case-blind: an analysis that looks at review trailers only reads those rows
    (Signed-off-by lines alone are about two thirds of a kernel-style history). The
    miner stores ASCII keys only (``[A-Za-z0-9-]``), so SQL ``lower`` gives what
    Python's ``str.lower`` and ``str.casefold`` give; both forms of each wanted key
    are asked for.
    """
    g, t = s.commit, s.trailer
    stmt = (
        select(g.c.repo_id, g.c.hash, t.c.position, t.c.key, t.c.raw_key, t.c.value,
               t.c.person_id)
        .select_from(t).join(g, g.c.commit_id == t.c.commit_id)
        .where(g.c.run_id.in_(_complete_runs()))
    )
    if keys is not None:
        wanted = sorted({k.lower() for k in keys} | {k.casefold() for k in keys})
        stmt = stmt.where(func.lower(t.c.key).in_(wanted))
    df, person_rows = fetch_by_ids(engine, stmt, g.c.repo_id, repo, people=True)
    # a trailer line without a person (no e-mail in its value) keeps None in both
    has = df["person_id"].notna().to_numpy()
    at = positions(person_rows["person_id"], df["person_id"][has].astype("int64"))
    for column, source in (("person_name", "name"), ("person_email", "email")):
        values = np.full(len(df), None, dtype=object)
        values[has] = as_text(person_rows[source])[at]
        df[column] = values
    return _read_frame(df, "trailers", order=["repo", "hash", "position"])


def fix_links(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    """One row per fix reference (resolved or not) with both commits' dates.

    The repository is filtered by id and its name looked up: joined by name, SQLite
    (without planner statistics) walked every commit of the repository and searched
    its links: 5 s at a million commits, against 1.4 s now.
    """
    g, fl = s.commit, s.fix_link
    intro = s.commit.alias("intro")
    stmt = (
        select(g.c.repo_id, g.c.hash.label("fix_hash"), fl.c.position,
               fl.c.ref_hash, fl.c.status, fl.c.introducer_hash, fl.c.cited_subject,
               fl.c.subject_match, fl.c.in_trailer_block, fl.c.raw_text,
               g.c.author_time.label("fix_author_date"),
               g.c.committer_time.label("fix_committer_date"),
               intro.c.author_time.label("intro_author_date"),
               intro.c.committer_time.label("intro_committer_date"))
        .select_from(fl).join(g, g.c.commit_id == fl.c.commit_id)
        .outerjoin(intro, and_(intro.c.repo_id == g.c.repo_id,
                               intro.c.hash == fl.c.introducer_hash,
                               intro.c.run_id.in_(_complete_runs())))
        .where(g.c.run_id.in_(_complete_runs()))
    )
    df, _ = fetch_by_ids(engine, stmt, g.c.repo_id, repo)
    return _read_frame(df, "fix_links",
                       order=["repo", "fix_committer_date", "fix_hash", "position"])


def reverts(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    g, r = s.commit, s.revert_link
    stmt = (
        select(s.repository.c.name.label("repo"), g.c.hash, r.c.ref_hash, r.c.status,
               r.c.reverted_hash)
        .select_from(r).join(g, g.c.commit_id == r.c.commit_id)
        .join(s.repository, s.repository.c.repo_id == g.c.repo_id)
        .order_by(s.repository.c.name, g.c.hash)
    )
    return _read(engine, _repo_filter(stmt.where(g.c.run_id.in_(_complete_runs())), repo),
                 "reverts")


def unparsed_references(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    g, u = s.commit, s.unparsed_reference
    stmt = (
        select(s.repository.c.name.label("repo"), g.c.hash, u.c.kind, u.c.raw_text)
        .select_from(u).join(g, g.c.commit_id == u.c.commit_id)
        .join(s.repository, s.repository.c.repo_id == g.c.repo_id)
        .order_by(s.repository.c.name, g.c.hash)
    )
    return _read(engine, _repo_filter(stmt.where(g.c.run_id.in_(_complete_runs())), repo),
                 "unparsed_references")


def tags(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    t = s.tag
    stmt = (
        select(s.repository.c.name.label("repo"), t.c.name, t.c.commit_hash,
               t.c.tag_time.label("tag_date"), t.c.tag_offset_min, t.c.is_annotated)
        .select_from(t).join(s.repository, s.repository.c.repo_id == t.c.repo_id)
        .order_by(s.repository.c.name, t.c.tag_time, t.c.name)
    )
    return _read(engine, _repo_filter(stmt, repo), "tags")


def mining_runs(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    m = s.mining_run
    stmt = (
        select(s.repository.c.name.label("repo"), m.c.run_id, m.c.status,
               m.c.started_utc.label("started"), m.c.ended_utc.label("ended"), m.c.ref,
               m.c.head_hash, m.c.base_hash, m.c.is_shallow, m.c.options_json,
               m.c.versions_json, m.c.n_commits, m.c.n_file_changes, m.c.n_trailers,
               m.c.n_fix_refs, m.c.message)
        .select_from(m).join(s.repository, s.repository.c.repo_id == m.c.repo_id)
        .order_by(s.repository.c.name, m.c.run_id)
    )
    return _read(engine, _repo_filter(stmt, repo), "mining_runs")


def repositories(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    r = s.repository
    stmt = select(r.c.name.label("repo"), r.c.path, r.c.remote_url, r.c.tip_hash,
                  r.c.tip_ref, r.c.is_shallow, r.c.mapping_kind,
                  r.c.mapping_source).order_by(r.c.name)
    return _read(engine, _repo_filter(stmt, repo), "repositories")


def upstream_references(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    """One row per (tree repository, upstream clone mined as its reference)."""
    t, u, r = s.repository, s.repository.alias("u"), s.upstream_reference
    stmt = (select(t.c.name.label("repo"), u.c.name.label("upstream_repo"), r.c.path_map)
            .select_from(r).join(t, t.c.repo_id == r.c.repo_id)
            .join(u, u.c.repo_id == r.c.upstream_repo_id).order_by(t.c.name, u.c.name))
    return _read(engine, _repo_filter(stmt, repo), "upstream_references")


def _per_commit(engine: Engine, table, cols, repo: str | None, name: str) -> pd.DataFrame:
    """Rows of a per-commit table whose commit is stored by a complete run."""
    g = s.commit
    stmt = (select(s.repository.c.name.label("repo"), table.c.hash, *cols)
            .select_from(table).join(s.repository, s.repository.c.repo_id == table.c.repo_id)
            .join(g, and_(g.c.repo_id == table.c.repo_id, g.c.hash == table.c.hash))
            .where(g.c.run_id.in_(_complete_runs()))
            .order_by(s.repository.c.name, table.c.hash, *cols))
    return _read(engine, _repo_filter(stmt, repo), name)


def patch_ids(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    """One row per non-merge commit with a diff: its ``git patch-id --stable``."""
    df = _per_commit(engine, s.patch_id, [s.patch_id.c.patch_id], repo, "patch_ids")
    return df[df["patch_id"] != ""].reset_index(drop=True)     # "" = no diff (see mine.upstream)


def backport_lines(engine: Engine, repo: str | None = None) -> pd.DataFrame:
    """One row per backport line (style, cited hash as written) in a commit message."""
    b = s.backport_line
    return _per_commit(engine, b, [b.c.style, b.c.cited_hash], repo, "backport_lines")


READERS: dict[str, Callable[..., pd.DataFrame]] = {
    "commits": commits, "commit_subsystems": commit_subsystems,
    "file_changes": file_changes, "trailers": trailers, "fix_links": fix_links,
    "reverts": reverts, "unparsed_references": unparsed_references, "tags": tags,
    "mining_runs": mining_runs, "repositories": repositories,
    "upstream_references": upstream_references, "patch_ids": patch_ids,
    "backport_lines": backport_lines,
}


def read_tables(engine: Engine, names: Iterable[str], repo: str | None = None
                ) -> dict[str, pd.DataFrame]:
    """Read several tidy tables from one consistent snapshot of the store."""
    with snapshot(engine) as conn:
        return {name: read_table(conn, name, repo) for name in names}


def read_table(engine: Engine | Connection, name: str,
               repo: str | None = None, **options: Any) -> pd.DataFrame:
    """Read one tidy table by name (see :data:`COLUMNS`); ``options`` go to its reader
    (``keys`` for ``trailers``)."""
    try:
        reader = READERS[name]
    except KeyError:
        raise StoreError(f"unknown table {name!r}; known: {', '.join(sorted(READERS))}") from None
    return reader(engine, repo, **options)
