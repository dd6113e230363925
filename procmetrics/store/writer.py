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
gives. Links of older runs that the dead run had re-resolved are re-resolved
again because their target is no longer stored or their status is not final.

Indexes (``schema.INDEXES``) are dropped before the first bulk load into an
empty store and rebuilt after it (``ensure_indexes`` also runs at the start of
every run, so an interrupted first load gets them back). The unique
(repo_id, hash) index stays: prefix look-ups need it.

Commit ids are assigned here (max + 1 inside the batch transaction, after
taking the store's write lock, so miners of different repositories can share
a store); :mod:`procmetrics.store.runlock` keeps a second run of the SAME
repository out. Status values of ``mining_run``: ``running``, ``complete``,
``failed`` (message says why; ``rows removed: ...`` once cleaned) and
``superseded`` (its rows were deleted by a re-mine after a rewrite).
"""
from __future__ import annotations

import time
from typing import Iterable, NamedTuple, Sequence

from sqlalchemy import and_, bindparam, delete, exists, func, insert, or_, select, update
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.schema import CreateIndex, DropIndex

from procmetrics.store import schema as s

CHUNK = 500
MANY_REFS = 20000     # above this many short references, scan stored hashes once


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


class LinkRow(NamedTuple):
    """A fix (``kind='fix'``, key = position) or revert (key = ref hash) reference."""

    kind: str
    commit_id: int
    key: int | str
    ref_hash: str
    citing_hash: str
    cited_subject: str | None
    status: str
    target: str | None
    target_stored: bool
    is_new: bool


_COLUMNS = {
    s.commit.name: ("commit_id", "repo_id", "run_id", "hash", "author_id", "committer_id",
                    "author_time", "author_offset_min", "committer_time",
                    "committer_offset_min", "subject", "message", "n_parents", "is_merge",
                    "stable_request", "message_was_utf8"),
    s.commit_parent.name: ("commit_id", "position", "parent_hash"),
    s.file_change.name: ("commit_id",) + FileRow._fields,
    s.trailer.name: ("commit_id", "position", "key", "raw_key", "value", "person_id"),
    s.fix_link.name: ("commit_id", "position", "ref_hash", "status", "introducer_hash",
                      "cited_subject", "subject_match", "in_trailer_block", "raw_text"),
    s.revert_link.name: ("commit_id", "ref_hash", "status", "reverted_hash"),
    s.unparsed_reference.name: ("commit_id", "kind", "raw_text"),
}


def _bulk_insert(conn: Connection, table, columns: Sequence[str], rows: list[tuple]) -> None:
    """executemany of plain tuples straight to the driver (SQLAlchemy's per-row parameter
    processing costs more than SQLite's insert itself); other paramstyles use Core."""
    if not rows:
        return
    mark = {"qmark": "?", "format": "%s", "pyformat": "%s"}.get(conn.dialect.paramstyle)
    if mark is None:
        conn.execute(insert(table), [dict(zip(columns, r)) for r in rows])
        return
    q = conn.dialect.identifier_preparer.quote
    sql = (f"INSERT INTO {q(table.name)} ({', '.join(q(c) for c in columns)}) "
           f"VALUES ({', '.join([mark] * len(columns))})")
    conn.exec_driver_sql(sql, rows)


def _chunks(items: Sequence, size: int = CHUNK) -> Iterable[Sequence]:
    for i in range(0, len(items), size):
        yield items[i:i + size]


class StoreWriter:
    """Writes one repository's mined rows; see the module docstring."""

    def __init__(self, engine: Engine) -> None:
        self.engine = engine
        self._persons: dict[tuple[str, str], int] | None = None

    # -- repository and runs ------------------------------------------------------------
    def ensure_repository(self, name: str, path: str) -> int:
        r = s.repository
        with self.engine.begin() as conn:
            self._write_lock(conn)      # two first runs may race to create the row
            rid = conn.execute(select(r.c.repo_id).where(r.c.name == name)).scalar()
            if rid is None:
                rid = conn.execute(insert(r).values(name=name, path=path, is_shallow=False)
                                   ).inserted_primary_key[0]
        return int(rid)

    def repository_state(self, repo_id: int) -> tuple[str | None, str | None]:
        """(stored tip hash, options JSON of the last complete run)."""
        r, m = s.repository, s.mining_run
        with self.engine.connect() as conn:
            tip = conn.execute(select(r.c.tip_hash).where(r.c.repo_id == repo_id)).scalar()
            opts = conn.execute(select(m.c.options_json).where(
                m.c.repo_id == repo_id, m.c.status == "complete")
                .order_by(m.c.run_id.desc()).limit(1)).scalar()
        return tip, opts

    def start_run(self, repo_id: int, *, ref: str, head_hash: str, base_hash: str | None,
                  is_shallow: bool, options_json: str, versions_json: str) -> int:
        with self.engine.begin() as conn:
            return int(conn.execute(insert(s.mining_run).values(
                repo_id=repo_id, status="running", started_utc=int(time.time()), ref=ref,
                head_hash=head_hash, base_hash=base_hash, is_shallow=is_shallow,
                options_json=options_json, versions_json=versions_json)
            ).inserted_primary_key[0])

    def fail_run(self, run_id: int, message: str) -> None:
        with self.engine.begin() as conn:
            conn.execute(update(s.mining_run).where(s.mining_run.c.run_id == run_id)
                         .values(status="failed", ended_utc=int(time.time()),
                                 message=message[:2000]))

    def complete_run(self, run_id: int, repo_id: int, *, tip_hash: str, tip_ref: str,
                     path: str, remote_url: str | None, is_shallow: bool, mapping_kind: str,
                     mapping_source: str, counts: dict[str, int], message: str | None) -> None:
        """Mark the run complete and move the repository's tip (one transaction)."""
        with self.engine.begin() as conn:
            conn.execute(update(s.mining_run).where(s.mining_run.c.run_id == run_id).values(
                status="complete", ended_utc=int(time.time()), message=message, **counts))
            conn.execute(update(s.repository).where(s.repository.c.repo_id == repo_id).values(
                tip_hash=tip_hash, tip_ref=tip_ref, path=path, remote_url=remote_url,
                is_shallow=is_shallow, mapping_kind=mapping_kind,
                mapping_source=mapping_source))
        self.refresh_statistics()

    def refresh_statistics(self) -> None:
        """Planner statistics after a load. Without them SQLite nests the
        repository-filtered ``commit_subsystems`` read as commits x path mappings
        (hours at 20,000 commits); sampled ANALYZE takes milliseconds."""
        with self.engine.begin() as conn:
            if self.engine.dialect.name == "sqlite":
                conn.exec_driver_sql("PRAGMA analysis_limit=1000")
            conn.exec_driver_sql("ANALYZE")

    def _delete_commits(self, conn: Connection, commit_ids) -> None:
        for t in (s.file_change, s.trailer, s.fix_link, s.unparsed_reference, s.revert_link,
                  s.commit_parent):
            conn.execute(delete(t).where(t.c.commit_id.in_(commit_ids)))

    def cleanup_incomplete(self, repo_id: int) -> list[int]:
        """Remove the rows of this repository's runs that never completed."""
        m, g = s.mining_run, s.commit
        with self.engine.begin() as conn:
            runs = list(conn.execute(select(m.c.run_id).where(
                m.c.repo_id == repo_id, m.c.status.in_(("running", "failed")),
                or_(m.c.message.is_(None), ~m.c.message.like("rows removed%")))).scalars())
            if not runs:
                return []
            self._delete_commits(conn, select(g.c.commit_id).where(g.c.run_id.in_(runs)))
            conn.execute(delete(g).where(g.c.run_id.in_(runs)))
            conn.execute(update(m).where(m.c.run_id.in_(runs)).values(
                status="failed", message="rows removed: the run did not complete"))
        self.prune_mapping(repo_id)
        return runs

    def delete_repository_data(self, repo_id: int, reason: str) -> None:
        """Delete every mined row of a repository (history rewritten) in one transaction."""
        g, m = s.commit, s.mining_run
        with self.engine.begin() as conn:
            self._delete_commits(conn, select(g.c.commit_id).where(g.c.repo_id == repo_id))
            conn.execute(delete(g).where(g.c.repo_id == repo_id))
            for t in (s.path_subsystem, s.tag):
                conn.execute(delete(t).where(t.c.repo_id == repo_id))
            conn.execute(delete(s.subsystem).where(s.subsystem.c.repo_id == repo_id))
            conn.execute(update(m).where(m.c.repo_id == repo_id, m.c.status == "complete")
                         .values(status="superseded", message=reason[:2000]))
            conn.execute(update(s.repository).where(s.repository.c.repo_id == repo_id)
                         .values(tip_hash=None, mapping_kind=None, mapping_source=None))

    # -- indexes ------------------------------------------------------------------------
    @staticmethod
    def _write_lock(conn: Connection) -> None:
        """Serialise with other miners writing to the same store (other repositories).

        A no-op update of one row: SQLite takes its write lock (waiting up to the
        busy timeout), PostgreSQL a row lock, both held until the transaction ends.
        """
        conn.execute(update(s.meta).where(s.meta.c.key == "schema_version")
                     .values(value=s.meta.c.value))

    def ensure_indexes(self) -> None:
        with self.engine.begin() as conn:
            self._write_lock(conn)
            for ix in s.INDEXES:
                conn.execute(CreateIndex(ix, if_not_exists=True))

    def drop_indexes_if_empty(self) -> bool:
        """Drop the analysis indexes when the store holds no commit yet (fast first load)."""
        with self.engine.begin() as conn:
            self._write_lock(conn)
            if conn.execute(select(s.commit.c.commit_id).limit(1)).first() is not None:
                return False
            for ix in s.INDEXES:
                conn.execute(DropIndex(ix, if_exists=True))
        return True

    # -- bulk rows ----------------------------------------------------------------------
    def _person_ids(self, conn: Connection, people: Iterable[tuple[str, str]]) -> dict:
        if self._persons is None:
            p = s.person
            self._persons = {(n, e): i for i, n, e in
                             conn.execute(select(p.c.person_id, p.c.name, p.c.email))}
        missing = sorted({x for x in people if x not in self._persons})
        if missing:     # another miner may have added them: refresh under the write lock
            p = s.person
            self._persons = {(n, e): i for i, n, e in
                             conn.execute(select(p.c.person_id, p.c.name, p.c.email))}
            missing = sorted({x for x in people if x not in self._persons})
        if missing:
            p = s.person
            rows = conn.execute(
                insert(p).returning(p.c.person_id, p.c.name, p.c.email,
                                    sort_by_parameter_order=True),
                [{"name": n, "email": e} for n, e in missing])
            for i, n, e in rows:
                self._persons[(n, e)] = i
        return self._persons

    def write_batch(self, repo_id: int, run_id: int, rows: Sequence[CommitRow]) -> dict:
        """Insert one batch of commits and their child rows in one transaction."""
        counts = {"n_commits": len(rows), "n_file_changes": 0, "n_trailers": 0,
                  "n_fix_refs": 0}
        if not rows:
            return counts
        people = [r.author for r in rows] + [r.committer for r in rows]
        people += [t.person for r in rows for t in r.trailers if t.person]
        try:
            with self.engine.begin() as conn:
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
                        len(r.parents) > 1, r.stable_request, r.message_was_utf8))
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
        counts.update(n_file_changes=len(files), n_trailers=len(trailers),
                      n_fix_refs=len(fixes))
        return counts

    # -- reference resolution -----------------------------------------------------------
    def links_to_check(self, repo_id: int, run_id: int, full_len: int) -> list[LinkRow]:
        """Links whose resolution this run may change: those of this run's commits; those
        not resolved to a stored commit; and short references that a commit of this
        run also matches (a prefix that was unique may now be ambiguous)."""
        g = s.commit
        intro = s.commit.alias("intro")
        new = s.commit.alias("new")
        out: list[LinkRow] = []
        with self.engine.connect() as conn:
            for kind, t, key, target in (("fix", s.fix_link, s.fix_link.c.position,
                                          s.fix_link.c.introducer_hash),
                                         ("revert", s.revert_link, s.revert_link.c.ref_hash,
                                          s.revert_link.c.reverted_hash)):
                cited = t.c.cited_subject if kind == "fix" else None
                cols = [t.c.commit_id, key, t.c.ref_hash, g.c.hash, t.c.status, target,
                        intro.c.commit_id, g.c.run_id]
                if cited is not None:
                    cols.append(cited)
                collides = exists().where(new.c.repo_id == repo_id, new.c.run_id == run_id,
                                          new.c.hash >= t.c.ref_hash,
                                          new.c.hash < t.c.ref_hash + "g")
                stmt = (select(*cols).select_from(t)
                        .join(g, g.c.commit_id == t.c.commit_id)
                        .outerjoin(intro, and_(intro.c.repo_id == repo_id,
                                               intro.c.hash == target))
                        .where(g.c.repo_id == repo_id)
                        .where(or_(g.c.run_id == run_id, ~t.c.status.in_(("resolved", "self")),
                                   intro.c.commit_id.is_(None),
                                   and_(func.length(t.c.ref_hash) < full_len, collides))))
                for row in conn.execute(stmt):
                    out.append(LinkRow(kind, row[0], row[1], row[2], row[3],
                                       row[8] if cited is not None else None, row[4], row[5],
                                       row[6] is not None, row[7] == run_id))
        return out

    def stored_matches(self, repo_id: int, refs: Sequence[str], full_len: int,
                       limit: int = 2) -> dict[str, list[str]]:
        """Stored hashes of this repository starting with each reference."""
        g = s.commit
        out: dict[str, list[str]] = {r: [] for r in refs}
        full = [r for r in refs if len(r) >= full_len]
        short = [r for r in refs if len(r) < full_len]
        with self.engine.connect() as conn:
            for part in _chunks(full):
                for (h,) in conn.execute(select(g.c.hash).where(g.c.repo_id == repo_id,
                                                                g.c.hash.in_(part))):
                    out[h].append(h)
            if len(short) > MANY_REFS:     # one pass over the stored hashes beats a query each
                k = min(len(r) for r in short)
                heads: dict[str, list[str]] = {}
                for r in short:
                    heads.setdefault(r[:k], []).append(r)
                result = conn.execution_options(yield_per=20000).execute(
                    select(g.c.hash).where(g.c.repo_id == repo_id))
                for h in result.scalars():
                    for r in heads.get(h[:k], ()):
                        if h.startswith(r):
                            out[r].append(h)
                for r in short:
                    out[r] = sorted(out[r])[:limit]
                return out
            stmt = (select(g.c.hash).where(g.c.repo_id == repo_id,
                                           g.c.hash >= bindparam("lo"),
                                           g.c.hash < bindparam("hi"))
                    .order_by(g.c.hash).limit(limit))
            for r in short:
                out[r] = list(conn.execute(stmt, {"lo": r, "hi": r + "g"}).scalars())
        return out

    def stored_subjects(self, repo_id: int, hashes: Sequence[str]) -> dict[str, str]:
        g = s.commit
        out: dict[str, str] = {}
        with self.engine.connect() as conn:
            for part in _chunks(list(hashes)):
                out.update(conn.execute(select(g.c.hash, g.c.subject).where(
                    g.c.repo_id == repo_id, g.c.hash.in_(part))).all())
        return out

    def run_hashes(self, repo_id: int, run_id: int) -> list[str]:
        g = s.commit
        with self.engine.connect() as conn:
            return list(conn.execute(select(g.c.hash).where(
                g.c.repo_id == repo_id, g.c.run_id == run_id)).scalars())

    def update_links(self, updates: Sequence[tuple[LinkRow, str, str | None, bool | None]]
                     ) -> None:
        """Write (link, status, target, subject_match) for changed links."""
        fl, rl = s.fix_link, s.revert_link
        fix_stmt = (update(fl).where(fl.c.commit_id == bindparam("cid"),
                                     fl.c.position == bindparam("key"))
                    .values(status=bindparam("st"), introducer_hash=bindparam("tg"),
                            subject_match=bindparam("sm")))
        rev_stmt = (update(rl).where(rl.c.commit_id == bindparam("cid"),
                                     rl.c.ref_hash == bindparam("key"))
                    .values(status=bindparam("st"), reverted_hash=bindparam("tg")))
        fixes = [{"cid": ln.commit_id, "key": ln.key, "st": st, "tg": tg, "sm": sm}
                 for ln, st, tg, sm in updates if ln.kind == "fix"]
        revs = [{"cid": ln.commit_id, "key": ln.key, "st": st, "tg": tg}
                for ln, st, tg, _ in updates if ln.kind == "revert"]
        with self.engine.begin() as conn:
            for stmt, data in ((fix_stmt, fixes), (rev_stmt, revs)):
                for part in _chunks(data, 5000):
                    conn.execute(stmt, list(part))

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

    def clear_mapping(self, repo_id: int) -> None:
        with self.engine.begin() as conn:
            conn.execute(delete(s.path_subsystem).where(s.path_subsystem.c.repo_id == repo_id))
            conn.execute(delete(s.subsystem).where(s.subsystem.c.repo_id == repo_id))

    def unmapped_paths(self, repo_id: int, run_id: int | None = None) -> list[str]:
        """Touched paths without a subsystem row (only those of ``run_id`` when given)."""
        g, fc, ps = s.commit, s.file_change, s.path_subsystem
        stmt = (select(fc.c.path).distinct().select_from(fc)
                .join(g, g.c.commit_id == fc.c.commit_id)
                .where(g.c.repo_id == repo_id)
                .where(~exists().where(ps.c.repo_id == repo_id, ps.c.path == fc.c.path)))
        if run_id is not None:
            stmt = stmt.where(g.c.run_id == run_id)
        with self.engine.connect() as conn:
            return sorted(conn.execute(stmt).scalars())

    def add_path_subsystems(self, repo_id: int, pairs: Sequence[tuple[str, Sequence[str]]]
                            ) -> None:
        sub = s.subsystem
        with self.engine.begin() as conn:
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

    def prune_mapping(self, repo_id: int) -> None:
        """Drop path->subsystem rows of paths no stored commit touches any more."""
        g, fc, ps, sub = s.commit, s.file_change, s.path_subsystem, s.subsystem
        used = (select(fc.c.path).join(g, g.c.commit_id == fc.c.commit_id)
                .where(g.c.repo_id == repo_id))
        with self.engine.begin() as conn:
            conn.execute(delete(ps).where(ps.c.repo_id == repo_id, ps.c.path.not_in(used)))
            conn.execute(delete(sub).where(sub.c.repo_id == repo_id, ~exists().where(
                ps.c.subsystem_id == sub.c.subsystem_id)))

    # -- summary ------------------------------------------------------------------------
    def totals(self, repo_id: int) -> dict[str, object]:
        g, fl = s.commit, s.fix_link
        with self.engine.connect() as conn:
            def count(stmt) -> int:
                return int(conn.execute(stmt).scalar() or 0)

            def child(t) -> int:
                return count(select(func.count()).select_from(t)
                             .join(g, g.c.commit_id == t.c.commit_id)
                             .where(g.c.repo_id == repo_id))
            status = dict(conn.execute(
                select(fl.c.status, func.count()).select_from(fl)
                .join(g, g.c.commit_id == fl.c.commit_id).where(g.c.repo_id == repo_id)
                .group_by(fl.c.status)).all())
            return {
                "commits": count(select(func.count()).select_from(g).where(g.c.repo_id == repo_id)),
                "merges": count(select(func.count()).select_from(g)
                                .where(g.c.repo_id == repo_id, g.c.is_merge.is_(True))),
                "file_changes": child(s.file_change), "trailers": child(s.trailer),
                "fix_status": {k: int(v) for k, v in status.items()},
                "reverts": child(s.revert_link), "unparsed": child(s.unparsed_reference),
                "tags": count(select(func.count()).select_from(s.tag)
                              .where(s.tag.c.repo_id == repo_id)),
            }
