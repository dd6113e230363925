"""Run bookkeeping and repair for :class:`procmetrics.store.writer.StoreWriter`.

A ``mining_run`` row per run (``running`` -> ``complete``/``failed``/``superseded``);
the repository's tip moves only when a run completes. ``cleanup_incomplete``
deletes the rows of runs that never completed, so an interrupted run followed
by a new one ends with the store a clean run gives (see the writer's module
docstring for the whole interruption design).
"""
from __future__ import annotations

import time
import warnings

from sqlalchemy import delete, insert, or_, select, update
from sqlalchemy.engine import Connection, Engine

from procmetrics.errors import ProcmetricsWarning, StoreError
from procmetrics.store import digests
from procmetrics.store import schema as s
from procmetrics.store.engine import BUSY_TIMEOUT_MS


class RunBook:
    """Repository rows, run rows, repair of interrupted runs, mapping pruning."""

    engine: Engine     # set by StoreWriter; _write_lock comes from BulkLoad

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

    def environments(self, repo_id: int) -> list[str]:
        """Environment JSON (versions, identity mapping) of every complete run whose rows
        are in the store, oldest first."""
        m = s.mining_run
        with self.engine.connect() as conn:
            return [r[0] or "{}" for r in conn.execute(select(m.c.versions_json).where(
                m.c.repo_id == repo_id, m.c.status == "complete").order_by(m.c.run_id))]

    def start_run(self, repo_id: int, *, ref: str, head_hash: str, base_hash: str | None,
                  is_shallow: bool, options_json: str, versions_json: str) -> int:
        with self.engine.begin() as conn:
            return int(conn.execute(insert(s.mining_run).values(
                repo_id=repo_id, status="running", started_utc=int(time.time()), ref=ref,
                head_hash=head_hash, base_hash=base_hash, is_shallow=is_shallow,
                options_json=options_json, versions_json=versions_json)
            ).inserted_primary_key[0])

    def fail_run(self, run_id: int, message: str) -> None:
        """Mark a run that is still running failed. Advisory (the next run repairs a run
        left 'running' anyway), so on SQLite it waits at most 2 s for a lock another
        process holds instead of the full busy timeout: Ctrl-C ends promptly.

        A run that has completed stays complete: its rows, the repository's tip and the
        table digests were committed in one transaction, so a failure after it (an
        interrupt, the planner statistics) leaves them consistent. Hiding its rows would
        lose them, because the tip has moved and the next run would mine nothing again.
        """
        sqlite = self.engine.dialect.name == "sqlite"
        with self.engine.begin() as conn:
            if sqlite:
                conn.exec_driver_sql("PRAGMA busy_timeout=2000")
            try:
                conn.execute(update(s.mining_run).where(s.mining_run.c.run_id == run_id,
                                                        s.mining_run.c.status == "running")
                             .values(status="failed", ended_utc=int(time.time()),
                                     message=message[:2000]))
            finally:
                if sqlite:
                    conn.exec_driver_sql(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")

    def run_first_id(self, run_id: int) -> int | None:
        """A lower bound of the run's commit ids when known (the writer keeps one)."""
        return None

    def complete_run(self, run_id: int, repo_id: int, *, tip_hash: str, tip_ref: str,
                     path: str, remote_url: str | None, is_shallow: bool, mapping_kind: str,
                     mapping_source: str, counts: dict[str, int], message: str | None) -> None:
        """Mark the run complete, move the repository's tip and add the run's rows to the
        table digests (one transaction: readers see the rows and their digests together);
        never after a Ctrl-C, even one a library swallowed (:mod:`procmetrics.interrupts`)."""
        from procmetrics import interrupts

        interrupts.check()
        with self.engine.begin() as conn:
            conn.execute(update(s.mining_run).where(s.mining_run.c.run_id == run_id).values(
                status="complete", ended_utc=int(time.time()), message=message, **counts))
            conn.execute(update(s.repository).where(s.repository.c.repo_id == repo_id).values(
                tip_hash=tip_hash, tip_ref=tip_ref, path=path, remote_url=remote_url,
                is_shallow=is_shallow, mapping_kind=mapping_kind,
                mapping_source=mapping_source))
            digests.add_run(conn, repo_id, run_id, first_id=self.run_first_id(run_id))
        self.refresh_statistics()

    def refresh_statistics(self) -> None:
        """Planner statistics after a load. Without them SQLite nests the
        repository-filtered ``commit_subsystems`` read as commits x path mappings
        (hours at 20,000 commits); sampled ANALYZE takes milliseconds.

        Advisory: it runs after the run has completed, so a store error here (two
        workers' ANALYZE on PostgreSQL can deadlock) is a warning, never a failed run.
        """
        try:
            with self.engine.begin() as conn:
                if self.engine.dialect.name == "sqlite":
                    conn.exec_driver_sql("PRAGMA analysis_limit=1000")
                conn.exec_driver_sql("ANALYZE")
        except StoreError as exc:
            warnings.warn(f"planner statistics not refreshed ({exc}); the mined rows are "
                          "complete, reads may be slower until the next run refreshes them",
                          ProcmetricsWarning, stacklevel=2)

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
            for t in (s.path_subsystem, s.tag, s.patch_id, s.backport_line,
                      s.link_check_tip):
                conn.execute(delete(t).where(t.c.repo_id == repo_id))
            conn.execute(delete(s.subsystem).where(s.subsystem.c.repo_id == repo_id))
            conn.execute(update(m).where(m.c.repo_id == repo_id, m.c.status == "complete")
                         .values(status="superseded", message=reason[:2000]))
            conn.execute(update(s.repository).where(s.repository.c.repo_id == repo_id)
                         .values(tip_hash=None, mapping_kind=None, mapping_source=None))
            digests.forget(conn, repo_id)

    def prune_mapping(self, repo_id: int) -> None:
        """Drop path->subsystem rows of paths no stored commit touches any more."""
        g, fc, ps, sub = s.commit, s.file_change, s.path_subsystem, s.subsystem
        used = (select(fc.c.path).join(g, g.c.commit_id == fc.c.commit_id)
                .where(g.c.repo_id == repo_id))
        with self.engine.begin() as conn:
            conn.execute(delete(ps).where(ps.c.repo_id == repo_id, ps.c.path.not_in(used)))
            # uncorrelated NOT IN: one pass over the mapping, not one per subsystem
            mapped = select(ps.c.subsystem_id).where(ps.c.repo_id == repo_id).distinct()
            conn.execute(delete(sub).where(sub.c.repo_id == repo_id,
                                           sub.c.subsystem_id.not_in(mapped)))
