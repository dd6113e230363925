"""Fix/revert link queries of the store writer: which links a run must (re-)resolve,
stored hashes matching cited prefixes, subjects, and the resolution updates."""
from __future__ import annotations

from typing import NamedTuple, Sequence

from sqlalchemy import and_, bindparam, delete, exists, func, insert, or_, select, update
from sqlalchemy.engine import Engine

from procmetrics.store import schema as s
from procmetrics.store.bulkload import _chunks

MANY_REFS = 20000     # above this many short references, scan stored hashes once


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


class LinkQueries:
    """Reference resolution reads and writes."""

    engine: Engine

    def links_to_check(self, repo_id: int, run_id: int, full_len: int) -> list[LinkRow]:
        """Links whose resolution this run may change: those of this run's commits; those
        not resolved to a stored commit; and short references that a commit of this
        run also matches (a prefix that was unique may now be ambiguous)."""
        new = s.commit.alias("new")

        def where(t, g, intro, target):
            collides = exists().where(new.c.repo_id == repo_id, new.c.run_id == run_id,
                                      new.c.hash >= t.c.ref_hash,
                                      new.c.hash < t.c.ref_hash + "g")
            return or_(g.c.run_id == run_id, ~t.c.status.in_(("resolved", "self")),
                       intro.c.commit_id.is_(None),
                       and_(func.length(t.c.ref_hash) < full_len, collides))

        with self.engine.connect() as conn:
            return self._link_rows(conn, repo_id, run_id, where)

    def links_to_recheck(self, repo_id: int, run_id: int, hashes: Sequence[str],
                         shortest: int) -> list[LinkRow]:
        """Links a run must check when the stored statuses still hold for the history
        they were resolved against (see :func:`procmetrics.mine.relink.resolve_links`):
        those of this run's commits and those whose reference is a prefix of one of
        ``hashes`` (the commits reachable now and not then, and this run's commits).
        References have at least ``shortest`` digits (the parser's rule): the database
        picks the links by their first ``shortest`` digits, and Python keeps the
        prefixes."""
        prefixes = {h[:k] for h in hashes for k in range(shortest, len(h) + 1)}
        heads = sorted({h[:shortest] for h in hashes})
        picked: set[tuple[str, int, int | str]] = set()
        with self.engine.connect() as conn:
            for kind, t, key, _ in self._link_kinds():
                for part in _chunks(heads, 5000):
                    rows = conn.execute(select(t.c.commit_id, key, t.c.ref_hash).where(
                        func.substr(t.c.ref_hash, 1, shortest).in_(part)))
                    picked.update((kind, cid, k) for cid, k, ref in rows if ref in prefixes)
            ids = sorted({cid for _, cid, _ in picked})
            first = self.run_first_id(run_id)   # None: the run wrote no commit
            out: list[LinkRow] = []
            if first is not None:       # this run's links: a primary-key range
                out += self._link_rows(conn, repo_id, run_id, lambda t, g, intro, target: and_(
                    t.c.commit_id >= first, g.c.run_id == run_id))
            for part in _chunks(ids):
                out += [ln for ln in self._link_rows(
                            conn, repo_id, run_id,
                            lambda t, g, intro, target: t.c.commit_id.in_(part))
                        if (ln.kind, ln.commit_id, ln.key) in picked and not ln.is_new]
        return out

    @staticmethod
    def _link_kinds():
        return (("fix", s.fix_link, s.fix_link.c.position, s.fix_link.c.introducer_hash),
                ("revert", s.revert_link, s.revert_link.c.ref_hash,
                 s.revert_link.c.reverted_hash))

    def _link_rows(self, conn, repo_id: int, run_id: int, where) -> list[LinkRow]:
        """The links of this repository that ``where(link table, citing commit, target
        commit, target column)`` selects, fixes then reverts."""
        g = s.commit
        intro = s.commit.alias("intro")
        out: list[LinkRow] = []
        for kind, t, key, target in self._link_kinds():
            cited = t.c.cited_subject if kind == "fix" else None
            cols = [t.c.commit_id, key, t.c.ref_hash, g.c.hash, t.c.status, target,
                    intro.c.commit_id, g.c.run_id]
            if cited is not None:
                cols.append(cited)
            stmt = (select(*cols).select_from(t)
                    .join(g, g.c.commit_id == t.c.commit_id)
                    .outerjoin(intro, and_(intro.c.repo_id == repo_id,
                                           intro.c.hash == target))
                    # "+ 0": no index on the citing commit's repository, so SQLite
                    # reads the links and finds each commit by its key, instead of
                    # walking every commit of the repository for its links (1M
                    # commits, 128,000 links: 2.1 -> 1.1 s)
                    .where(g.c.repo_id + 0 == repo_id)
                    .where(where(t, g, intro, target)))
            for row in conn.execute(stmt):
                out.append(LinkRow(kind, row[0], row[1], row[2], row[3],
                                   row[8] if cited is not None else None, row[4], row[5],
                                   row[6] is not None, row[7] == run_id))
        return out

    def checked_tips(self, repo_id: int) -> list[str] | None:
        """The tips the stored link statuses were resolved against, when the run that
        recorded them completed; None otherwise (no record: a store from before schema
        5, or the last resolution's run failed)."""
        t, m = s.link_check_tip, s.mining_run
        with self.engine.connect() as conn:
            rows = conn.execute(select(t.c.hash, m.c.status)
                                .join(m, m.c.run_id == t.c.run_id)
                                .where(t.c.repo_id == repo_id)).all()
        if not rows or any(status != "complete" for _, status in rows):
            return None
        return [h for h, _ in rows]

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
        """Hashes of this run's commits (a primary-key range from its first id; the writer
        of the run knows it, and None there means the run wrote no commit)."""
        g = s.commit
        first = self.run_first_id(run_id)
        if first is None:
            return []
        with self.engine.connect() as conn:
            return list(conn.execute(select(g.c.hash).where(
                g.c.commit_id >= first, g.c.repo_id == repo_id,
                g.c.run_id == run_id)).scalars())

    def update_links(self, updates: Sequence[tuple[LinkRow, str, str | None, bool | None]],
                     *, repo_id: int | None = None, run_id: int | None = None,
                     tips: Sequence[str] | None = None) -> None:
        """Write (link, status, target, subject_match) for changed links and, in the same
        transaction, the tips they were resolved against (``tips``, recorded for
        ``run_id``; None forgets the repository's record)."""
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
            if repo_id is not None:
                lt = s.link_check_tip
                conn.execute(delete(lt).where(lt.c.repo_id == repo_id))
                rows = [{"repo_id": repo_id, "run_id": run_id, "hash": h}
                        for h in sorted(set(tips or ()))]
                for part in _chunks(rows, 5000):
                    conn.execute(insert(lt), list(part))
