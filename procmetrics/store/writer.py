"""Bulk loader: the only module that writes to the store.

Interruption design
-------------------
Every mining run gets a ``mining_run`` row (status ``running``) and every
commit row carries its ``run_id``. Commits are written in batches, one
transaction per batch, and ``repository.tip_hash`` only moves (together with
``status = 'complete'``) in the run's final transaction. A run that dies at
any point therefore leaves whole batches of a ``running``/``failed`` run and
an unchanged tip. The next run first calls :meth:`StoreWriter.cleanup_incomplete`,
which deletes every row belonging to commits of those runs (and marks the runs
``failed``), prunes the path->subsystem rows nobody needs any more, and then
mines from the unchanged tip - so it ends with exactly the store a clean run
gives. A failure after the final transaction (an interrupt, planner statistics
that could not be refreshed) leaves the run complete: rows, tip and digests
were committed together. Links of older runs that the dead run had re-resolved are re-resolved
again because their target is no longer stored or their status is not final.

Run bookkeeping and repair live in :mod:`procmetrics.store.runbook`, index and
bulk-load handling in :mod:`procmetrics.store.bulkload`, link resolution queries
in :mod:`procmetrics.store.linkstore`; :class:`StoreWriter` combines them.

Commit ids are assigned here (max + 1 inside the batch transaction, after
taking the store's write lock, so miners of different repositories can share
a store); :mod:`procmetrics.store.runlock` keeps a second run of the SAME
repository out. Status values of ``mining_run``: ``running``, ``complete``,
``failed`` (message says why; ``rows removed: ...`` once cleaned) and
``superseded`` (its rows were deleted by a re-mine after a rewrite).
"""
from __future__ import annotations

from typing import Iterable, NamedTuple, Sequence

from sqlalchemy import delete, exists, func, insert, select
from sqlalchemy.engine import Connection, Engine

from procmetrics.store import schema as s
from procmetrics.store.bulkload import BulkLoad, _bulk_insert, _chunks
from procmetrics.store.linkstore import LinkQueries, LinkRow
from procmetrics.store.runbook import RunBook
from procmetrics.store.readsql import snapshot

__all__ = ["CommitRow", "FileRow", "FixRow", "LinkRow", "StoreWriter", "TagRow", "TrailerRow"]


class FileRow(NamedTuple):
    path: str
    old_path: str | None
    change_type: str
    lines_added: int | None
    lines_deleted: int | None
    is_binary: bool | None


class TrailerRow(NamedTuple):
    key: str
    raw_key: str
    value: str
    person: tuple[str, str] | None      # (name, e-mail)


class FixRow(NamedTuple):
    ref_hash: str
    cited_subject: str | None
    in_trailer_block: bool
    raw_text: str


class CommitRow(NamedTuple):
    hash: str
    parents: tuple[str, ...]
    author: tuple[str, str]
    committer: tuple[str, str]
    author_time: int
    author_offset_min: int
    committer_time: int
    committer_offset_min: int
    subject: str
    message: str
    stable_request: bool
    message_was_utf8: bool
    files: Sequence[FileRow]
    trailers: Sequence[TrailerRow]
    fixes: Sequence[FixRow]
    reverts: Sequence[str]
    unparsed: Sequence[tuple[str, str]]


class TagRow(NamedTuple):
    name: str
    commit_hash: str
    tag_time: int | None
    tag_offset_min: int | None
    is_annotated: bool


_COLUMNS = {
    s.commit.name: ("commit_id", "repo_id", "run_id", "hash", "author_id", "committer_id",
                    "author_time", "author_offset_min", "committer_time",
                    "committer_offset_min", "subject", "message", "n_parents", "is_merge",
                    "stable_request", "message_was_utf8", "n_files", "lines_added",
                    "lines_deleted"),
    s.commit_parent.name: ("commit_id", "position", "parent_hash"),
    s.file_change.name: ("commit_id",) + FileRow._fields,
    s.trailer.name: ("commit_id", "position", "key", "raw_key", "value", "person_id"),
    s.fix_link.name: ("commit_id", "position", "ref_hash", "status", "introducer_hash",
                      "cited_subject", "subject_match", "in_trailer_block", "raw_text"),
    s.revert_link.name: ("commit_id", "ref_hash", "status", "reverted_hash"),
    s.unparsed_reference.name: ("commit_id", "kind", "raw_text"),
}


def _line_sums(files: Sequence[FileRow]) -> tuple[int | None, int | None]:
    """A commit's lines added and deleted as SQL's ``SUM`` gives them over its file
    rows: rows without a count are skipped, and no count at all is NULL (None)."""
    added = [f.lines_added for f in files if f.lines_added is not None]
    deleted = [f.lines_deleted for f in files if f.lines_deleted is not None]
    return (sum(added) if added else None), (sum(deleted) if deleted else None)


class StoreWriter(RunBook, LinkQueries, BulkLoad):
    """Writes one repository's mined rows; see the module docstring."""

    def __init__(self, engine: Engine) -> None:
        self.engine = engine
        self._persons: dict[tuple[str, str], int] | None = None
        self._first_ids: dict[int, int] = {}

    def run_first_id(self, run_id: int) -> int | None:
        """The lowest commit id of ``run_id``'s committed batches written by this writer
        (None: none seen). Every later batch gets higher ids (the next id is one past the
        highest under the write lock, and these rows stay), so ``commit_id >= it`` bounds
        the run's rows to a primary-key range: a run's own reads then skip the million
        older commits instead of scanning them for ``run_id`` (0.27 s a read at 1M)."""
        return self._first_ids.get(run_id)

    # -- bulk rows ----------------------------------------------------------------------
    def _person_ids(self, conn: Connection, people: Iterable[tuple[str, str]]) -> dict:
        if self._persons is None:
            p = s.person
            self._persons = {(n, e): i for i, n, e in
                             conn.execute(select(p.c.person_id, p.c.name, p.c.email))}
        missing = sorted(set(people).difference(self._persons))
        if missing:     # another miner may have added them: refresh under the write lock
            p = s.person
            self._persons = {(n, e): i for i, n, e in
                             conn.execute(select(p.c.person_id, p.c.name, p.c.email))}
            missing = sorted(set(people).difference(self._persons))
        if missing:
            p = s.person
            rows = conn.execute(
                insert(p).returning(p.c.person_id, p.c.name, p.c.email,
                                    sort_by_parameter_order=True),
                [{"name": n, "email": e} for n, e in missing])
            for i, n, e in rows:
                self._persons[(n, e)] = i
        return self._persons

    def write_batch(self, repo_id: int, run_id: int, rows: Sequence[CommitRow], *,
                    durable: bool = True) -> dict:
        """Insert one batch of commits and their child rows in one transaction
        (``durable=False`` during a first load: see :mod:`procmetrics.store.bulkload`)."""
        counts = {"n_commits": len(rows), "n_file_changes": 0, "n_trailers": 0,
                  "n_fix_refs": 0}
        if not rows:
            return counts
        people = {r.author for r in rows} | {r.committer for r in rows}
        people.update(t.person for r in rows for t in r.trailers if t.person)
        try:
            with self._batch_transaction(durable) as conn:
                self._write_lock(conn)      # before max(commit_id): ids stay unique
                ids = self._person_ids(conn, people)
                next_id = (conn.execute(select(func.max(s.commit.c.commit_id))).scalar() or 0) + 1
                commits, parents, files, trailers, fixes, reverts, unparsed = \
                    [], [], [], [], [], [], []
                for cid, r in enumerate(rows, start=next_id):
                    commits.append((
                        cid, repo_id, run_id, r.hash, ids[r.author], ids[r.committer],
                        r.author_time, r.author_offset_min, r.committer_time,
                        r.committer_offset_min, r.subject, r.message, len(r.parents),
                        len(r.parents) > 1, r.stable_request, r.message_was_utf8,
                        len(r.files), *_line_sums(r.files)))
                    parents += [(cid, i, h) for i, h in enumerate(r.parents)]
                    files += [(cid, *f) for f in r.files]
                    trailers += [(cid, i, t.key, t.raw_key, t.value,
                                  ids[t.person] if t.person else None)
                                 for i, t in enumerate(r.trailers)]
                    fixes += [(cid, i, f.ref_hash, "unresolved", None, f.cited_subject, None,
                               f.in_trailer_block, f.raw_text) for i, f in enumerate(r.fixes)]
                    reverts += [(cid, h, "unresolved", None) for h in r.reverts]
                    unparsed += [(cid, k, t) for k, t in r.unparsed]
                for table, data in ((s.commit, commits), (s.commit_parent, parents),
                                    (s.file_change, files), (s.trailer, trailers),
                                    (s.fix_link, fixes), (s.revert_link, reverts),
                                    (s.unparsed_reference, unparsed)):
                    _bulk_insert(conn, table, _COLUMNS[table.name], data)
        except BaseException:
            self._persons = None        # the cache may hold ids of rolled-back rows
            raise
        self._first_ids.setdefault(run_id, next_id)     # only once the batch committed
        counts.update(n_file_changes=len(files), n_trailers=len(trailers),
                      n_fix_refs=len(fixes))
        return counts

    # -- tags and subsystems ------------------------------------------------------------
    def replace_tags(self, repo_id: int, tags: Sequence[TagRow]) -> None:
        with self.engine.begin() as conn:
            conn.execute(delete(s.tag).where(s.tag.c.repo_id == repo_id))
            _bulk_insert(conn, s.tag, ("repo_id",) + TagRow._fields,
                         [(repo_id, *t) for t in tags])

    def mapping_of(self, repo_id: int) -> tuple[str | None, str | None]:
        r = s.repository
        with self.engine.connect() as conn:
            row = conn.execute(select(r.c.mapping_kind, r.c.mapping_source)
                               .where(r.c.repo_id == repo_id)).one()
        return row[0], row[1]

    def unmapped_paths(self, repo_id: int, run_id: int | None = None) -> list[str]:
        """Touched paths without a subsystem row (only those of ``run_id`` when given)."""
        g, fc, ps = s.commit, s.file_change, s.path_subsystem
        stmt = (select(fc.c.path).distinct().select_from(fc)
                .join(g, g.c.commit_id == fc.c.commit_id)
                .where(g.c.repo_id == repo_id)
                .where(~exists().where(ps.c.repo_id == repo_id, ps.c.path == fc.c.path)))
        if run_id is not None:
            stmt = stmt.where(g.c.run_id == run_id)
            first = self.run_first_id(run_id)
            if first is not None:
                stmt = stmt.where(g.c.commit_id >= first)
        with self.engine.connect() as conn:
            return sorted(conn.execute(stmt).scalars())

    def stored_mapping(self, repo_id: int, paths: Sequence[str] | None = None
                       ) -> dict[str, list[str]]:
        """path -> sorted subsystem names, as stored (only ``paths`` when given)."""
        ps, sub = s.path_subsystem, s.subsystem
        stmt = (select(ps.c.path, sub.c.name)
                .join(sub, sub.c.subsystem_id == ps.c.subsystem_id)
                .where(ps.c.repo_id == repo_id))
        out: dict[str, list[str]] = {}
        with self.engine.connect() as conn:
            for part in [None] if paths is None else _chunks(list(paths)):
                for path, name in conn.execute(
                        stmt if part is None else stmt.where(ps.c.path.in_(part))):
                    out.setdefault(path, []).append(name)
        for names in out.values():
            names.sort()
        return out

    def mapped_paths(self, repo_id: int) -> list[str]:
        """Every path the stored mapping covers, sorted (read from its index)."""
        ps = s.path_subsystem
        with self.engine.connect() as conn:
            return list(conn.execute(select(ps.c.path).distinct()
                                     .where(ps.c.repo_id == repo_id)
                                     .order_by(ps.c.path)).scalars())

    def remap_paths(self, repo_id: int, pairs: Sequence[tuple[str, Sequence[str]]]) -> None:
        """Replace the subsystem rows of the given paths (no names: the path's rows go)."""
        ps = s.path_subsystem
        with self.engine.begin() as conn:
            for part in _chunks([p for p, _ in pairs]):
                conn.execute(delete(ps).where(ps.c.repo_id == repo_id, ps.c.path.in_(part)))
            self._insert_path_subsystems(conn, repo_id, [x for x in pairs if x[1]])

    def drop_unused_subsystems(self, repo_id: int) -> None:
        """Delete subsystems no path maps to (an uncorrelated NOT IN: one pass over the
        mapping, not one per subsystem - path_subsystem has no subsystem_id index)."""
        ps, sub = s.path_subsystem, s.subsystem
        used = select(ps.c.subsystem_id).where(ps.c.repo_id == repo_id).distinct()
        with self.engine.begin() as conn:
            conn.execute(delete(sub).where(sub.c.repo_id == repo_id,
                                           sub.c.subsystem_id.not_in(used)))

    def add_path_subsystems(self, repo_id: int, pairs: Sequence[tuple[str, Sequence[str]]]
                            ) -> None:
        with self.engine.begin() as conn:
            self._insert_path_subsystems(conn, repo_id, pairs)

    def _insert_path_subsystems(self, conn: Connection, repo_id: int,
                                pairs: Sequence[tuple[str, Sequence[str]]]) -> None:
        sub = s.subsystem
        known = dict(conn.execute(select(sub.c.name, sub.c.subsystem_id)
                                  .where(sub.c.repo_id == repo_id)).all())
        new = sorted({n for _, names in pairs for n in names} - set(known))
        if new:
            for sid, name in conn.execute(
                    insert(sub).returning(sub.c.subsystem_id, sub.c.name,
                                          sort_by_parameter_order=True),
                    [{"repo_id": repo_id, "name": n} for n in new]):
                known[name] = sid
        rows = [(repo_id, p, known[n]) for p, names in pairs for n in names]
        _bulk_insert(conn, s.path_subsystem, ("repo_id", "path", "subsystem_id"), rows)

    # -- summary ------------------------------------------------------------------------
    def totals(self, repo_id: int) -> dict[str, object]:
        """Row counts of the repository (for the summary after a run), read in one
        snapshot. When it is the store's only repository, every per-commit row is one of
        its commits', so those tables are counted whole (SQLite counts 2.3 million file
        changes from an index in 0.01 s; the join to the commits took 0.77 s per table
        at a million commits) and a merge is a commit with a second parent row (0.1 s
        on the narrow parent table; 0.86 s scanning the commits for ``is_merge``)."""
        g, fl, cp = s.commit, s.fix_link, s.commit_parent
        with snapshot(self.engine) as conn:
            def count(stmt) -> int:
                return int(conn.execute(stmt).scalar() or 0)

            alone = count(select(func.count()).select_from(s.repository)
                          .where(s.repository.c.repo_id != repo_id)) == 0

            def child(t, *where) -> int:
                stmt = select(func.count()).select_from(t).where(*where)
                if alone:
                    return count(stmt)
                return count(stmt.join(g, g.c.commit_id == t.c.commit_id)
                             .where(g.c.repo_id == repo_id))
            by_status = select(fl.c.status, func.count()).select_from(fl).group_by(fl.c.status)
            if not alone:
                by_status = by_status.join(g, g.c.commit_id == fl.c.commit_id).where(
                    g.c.repo_id == repo_id)
            status = dict(conn.execute(by_status).all())
            merges = (child(cp, cp.c.position == 1) if alone else
                      count(select(func.count()).select_from(g)
                            .where(g.c.repo_id == repo_id, g.c.is_merge.is_(True))))
            return {
                "commits": count(select(func.count()).select_from(g).where(g.c.repo_id == repo_id)),
                "merges": merges,
                "file_changes": child(s.file_change), "trailers": child(s.trailer),
                "fix_status": {k: int(v) for k, v in status.items()},
                "reverts": child(s.revert_link), "unparsed": child(s.unparsed_reference),
                "tags": count(select(func.count()).select_from(s.tag)
                              .where(s.tag.c.repo_id == repo_id)),
            }
