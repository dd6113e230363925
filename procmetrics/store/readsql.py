"""The SQL side of reading the store, without pandas: the tidy tables' columns, the
filters every reader applies, and the consistent snapshot reads run in.

Kept apart from :mod:`procmetrics.store.tables` (which builds DataFrames) so that mining,
which writes and checks rows but builds no DataFrame, does not import pandas (about half
a second of an incremental run).
"""
from __future__ import annotations

from contextlib import contextmanager
from typing import Iterator

from sqlalchemy import select
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.sql import Select

from procmetrics.store import schema as s

COLUMNS: dict[str, list[str]] = {
    "commits": [
        "repo", "hash", "author_name", "author_email", "committer_name", "committer_email",
        "author_date", "author_offset_min", "committer_date", "committer_offset_min",
        "subject", "n_parents", "is_merge", "stable_request", "n_files", "lines_added",
        "lines_deleted", "n_fix_refs", "n_resolved_fixes", "is_revert",
    ],
    "commit_subsystems": ["repo", "hash", "subsystem"],
    "file_changes": ["repo", "hash", "path", "old_path", "change_type", "lines_added",
                     "lines_deleted", "is_binary"],
    "trailers": ["repo", "hash", "position", "key", "raw_key", "value", "person_name",
                 "person_email"],
    "fix_links": [
        "repo", "fix_hash", "position", "ref_hash", "status", "introducer_hash",
        "cited_subject", "subject_match", "in_trailer_block", "raw_text",
        "fix_author_date", "fix_committer_date", "intro_author_date", "intro_committer_date",
    ],
    "reverts": ["repo", "hash", "ref_hash", "status", "reverted_hash"],
    "unparsed_references": ["repo", "hash", "kind", "raw_text"],
    "tags": ["repo", "name", "commit_hash", "tag_date", "tag_offset_min", "is_annotated"],
    "mining_runs": ["repo", "run_id", "status", "started", "ended", "ref", "head_hash",
                    "base_hash", "is_shallow", "options_json", "versions_json", "n_commits",
                    "n_file_changes", "n_trailers", "n_fix_refs", "message"],
    "repositories": ["repo", "path", "remote_url", "tip_hash", "tip_ref", "is_shallow",
                     "mapping_kind", "mapping_source"],
    # upstream reference histories (see procmetrics.store.upstream)
    "upstream_references": ["repo", "upstream_repo", "path_map"],
    "patch_ids": ["repo", "hash", "patch_id"],
    "backport_lines": ["repo", "hash", "style", "cited_hash"],
}


def _repo_filter(stmt: Select, repo: str | None) -> Select:
    return stmt.where(s.repository.c.name == repo) if repo is not None else stmt


def _complete_runs() -> Select:
    """Run ids of completed mining runs: rows of a running or killed run stay hidden
    until it completes (or the next run removes them)."""
    return select(s.mining_run.c.run_id).where(s.mining_run.c.status == "complete")


@contextmanager
def snapshot(engine: Engine) -> Iterator[Connection]:
    """A connection whose reads all see one consistent state of the store.

    SQLite (WAL): an explicit deferred ``BEGIN`` pins the snapshot at the first
    read; PostgreSQL: a ``REPEATABLE READ`` transaction. A miner writing at the
    same time is neither blocked nor seen half-way.
    """
    with engine.connect() as conn:
        if engine.dialect.name == "sqlite":
            conn.exec_driver_sql("BEGIN")
        else:
            conn = conn.execution_options(isolation_level="REPEATABLE READ")
            conn.begin()
        try:
            yield conn
        finally:
            conn.rollback()
