"""The normalised SQL schema (SQLAlchemy Core).

Times are stored as integer seconds since the Unix epoch (UTC) plus the
original UTC offset in minutes, so nothing depends on the database's own
time-zone handling. ``SCHEMA_VERSION`` is bumped with every change and a
migration is added to :mod:`procmetrics.store.migrate`.
"""
from __future__ import annotations

from sqlalchemy import (
    BigInteger, Boolean, Column, ForeignKey, Index, Integer, MetaData, String,
    Table, Text, UniqueConstraint,
)

SCHEMA_VERSION = 6     # 2: upstream references, patch ids, backport lines; 3: path maps;
                       # 4: table digests (the store checksum kept as runs complete);
                       # 5: the reference tips the link statuses were resolved against;
                       # 6: each commit's file count and line sums

metadata = MetaData()

meta = Table(
    "pm_meta", metadata,
    Column("key", String(64), primary_key=True),
    Column("value", Text, nullable=False),
)

repository = Table(
    "repository", metadata,
    Column("repo_id", Integer, primary_key=True, autoincrement=True),
    Column("name", String(255), nullable=False, unique=True),
    Column("path", Text, nullable=False),
    Column("remote_url", Text),
    Column("tip_hash", String(64)),          # last fully mined tip
    Column("tip_ref", Text),
    Column("is_shallow", Boolean, nullable=False, default=False),
    Column("mapping_kind", String(32)),      # maintainers | rules | path-prefix
    Column("mapping_source", Text),          # file used, or the prefix depth
)

mining_run = Table(
    "mining_run", metadata,
    Column("run_id", Integer, primary_key=True, autoincrement=True),
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("status", String(16), nullable=False),   # running | complete | failed
    Column("started_utc", BigInteger, nullable=False),
    Column("ended_utc", BigInteger),
    Column("ref", Text, nullable=False),
    Column("head_hash", String(64)),
    Column("base_hash", String(64)),        # previous tip for incremental runs
    Column("is_shallow", Boolean, nullable=False, default=False),
    Column("options_json", Text, nullable=False),
    Column("versions_json", Text, nullable=False),
    Column("n_commits", Integer),
    Column("n_file_changes", Integer),
    Column("n_trailers", Integer),
    Column("n_fix_refs", Integer),
    Column("message", Text),
)

person = Table(
    "person", metadata,
    Column("person_id", Integer, primary_key=True, autoincrement=True),
    Column("name", Text, nullable=False),
    Column("email", Text, nullable=False),
    UniqueConstraint("name", "email", name="uq_person"),
)

commit = Table(
    "git_commit", metadata,
    Column("commit_id", Integer, primary_key=True, autoincrement=True),
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("run_id", Integer, ForeignKey("mining_run.run_id"), nullable=False),
    Column("hash", String(64), nullable=False),
    Column("author_id", Integer, ForeignKey("person.person_id"), nullable=False),
    Column("committer_id", Integer, ForeignKey("person.person_id"), nullable=False),
    Column("author_time", BigInteger, nullable=False),
    Column("author_offset_min", Integer, nullable=False),
    Column("committer_time", BigInteger, nullable=False),
    Column("committer_offset_min", Integer, nullable=False),
    Column("subject", Text, nullable=False),
    Column("message", Text, nullable=False),
    Column("n_parents", Integer, nullable=False),
    Column("is_merge", Boolean, nullable=False),
    Column("stable_request", Boolean, nullable=False, default=False),
    Column("message_was_utf8", Boolean, nullable=False, default=True),
    # the commit's file_change rows summed when they are written (rows never change):
    # COUNT(*), and SUM of each line column (NULL when no row has a count), so a
    # reader of commits does not group four million file rows
    Column("n_files", Integer, nullable=False, server_default="0"),
    Column("lines_added", BigInteger),
    Column("lines_deleted", BigInteger),
    UniqueConstraint("repo_id", "hash", name="uq_commit_hash"),
)

commit_parent = Table(
    "commit_parent", metadata,
    Column("commit_id", Integer, ForeignKey("git_commit.commit_id"), nullable=False),
    Column("position", Integer, nullable=False),
    Column("parent_hash", String(64), nullable=False),
)

file_change = Table(
    "file_change", metadata,
    Column("commit_id", Integer, ForeignKey("git_commit.commit_id"), nullable=False),
    Column("path", Text, nullable=False),
    Column("old_path", Text),                 # set for renames/copies
    Column("change_type", String(1), nullable=False),  # A M D R C T
    Column("lines_added", Integer),           # NULL: not counted or binary
    Column("lines_deleted", Integer),
    Column("is_binary", Boolean),             # NULL when line counts were not mined
)

trailer = Table(
    "trailer", metadata,
    Column("commit_id", Integer, ForeignKey("git_commit.commit_id"), nullable=False),
    Column("position", Integer, nullable=False),
    Column("key", String(255), nullable=False),     # normalised spelling
    Column("raw_key", String(255), nullable=False),
    Column("value", Text, nullable=False),
    Column("person_id", Integer, ForeignKey("person.person_id")),
)

fix_link = Table(
    "fix_link", metadata,
    Column("commit_id", Integer, ForeignKey("git_commit.commit_id"), nullable=False),
    Column("position", Integer, nullable=False),
    Column("ref_hash", String(64), nullable=False),     # as written
    Column("status", String(16), nullable=False),       # resolved | unresolved | ambiguous | self
    Column("introducer_hash", String(64)),              # full hash when resolved
    Column("cited_subject", Text),
    Column("subject_match", Boolean),                   # NULL when no subject cited or unresolved
    Column("in_trailer_block", Boolean, nullable=False),
    Column("raw_text", Text, nullable=False),
)

unparsed_reference = Table(
    "unparsed_reference", metadata,
    Column("commit_id", Integer, ForeignKey("git_commit.commit_id"), nullable=False),
    Column("kind", String(16), nullable=False),         # fixes | revert
    Column("raw_text", Text, nullable=False),
)

revert_link = Table(
    "revert_link", metadata,
    Column("commit_id", Integer, ForeignKey("git_commit.commit_id"), nullable=False),
    Column("ref_hash", String(64), nullable=False),
    Column("status", String(16), nullable=False),
    Column("reverted_hash", String(64)),
)

subsystem = Table(
    "subsystem", metadata,
    Column("subsystem_id", Integer, primary_key=True, autoincrement=True),
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("name", Text, nullable=False),
    UniqueConstraint("repo_id", "name", name="uq_subsystem"),
)

path_subsystem = Table(
    "path_subsystem", metadata,
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("path", Text, nullable=False),
    Column("subsystem_id", Integer, ForeignKey("subsystem.subsystem_id"), nullable=False),
)

tag = Table(
    "tag", metadata,
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("name", Text, nullable=False),
    Column("commit_hash", String(64), nullable=False),   # peeled target
    Column("tag_time", BigInteger),                      # tagger date, else the commit's committer date
    Column("tag_offset_min", Integer),
    Column("is_annotated", Boolean, nullable=False),
)

# -- upstream reference histories (schema 2) ------------------------------------------
upstream_reference = Table(     # tree repository -> an upstream clone mined as its reference
    "upstream_reference", metadata,
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("upstream_repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    # schema 3: how upstream paths map onto the tree's (a mirrored subtree), JSON, or NULL
    Column("path_map", Text, nullable=True),
    UniqueConstraint("repo_id", "upstream_repo_id", name="uq_upstream_reference"),
)

patch_id = Table(               # git patch-id --stable, computed once per commit
    "patch_id", metadata,
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("hash", String(64), nullable=False),
    Column("patch_id", String(64), nullable=False),
    UniqueConstraint("repo_id", "hash", name="uq_patch_id"),
)

backport_line = Table(          # "commit <id> upstream." and its kin in a commit message
    "backport_line", metadata,
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("hash", String(64), nullable=False),
    Column("style", String(32), nullable=False),
    Column("cited_hash", String(64), nullable=False),
)

UPSTREAM_TABLES = (upstream_reference, patch_id, backport_line)

# -- store checksum kept incrementally (schema 4) -------------------------------------
table_digest = Table(           # per repository and tidy table: the rows readers see
    "table_digest", metadata,
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("table_name", String(64), nullable=False),   # a tidy table, e.g. file_changes
    Column("n_rows", BigInteger, nullable=False),
    Column("digest", String(64), nullable=False),       # multiset hash, 64 hex digits
    UniqueConstraint("repo_id", "table_name", name="uq_table_digest"),
)

# -- what the stored link statuses were resolved against (schema 5) -------------------
link_check_tip = Table(         # the tips the last resolution's reachable history came from
    "link_check_tip", metadata,
    Column("repo_id", Integer, ForeignKey("repository.repo_id"), nullable=False),
    Column("run_id", Integer, ForeignKey("mining_run.run_id"), nullable=False),
    Column("hash", String(64), nullable=False),     # as git rev-parse names it (may be a tag)
)

# Indexes the analyses need; created after a bulk load (see writer).
INDEXES = [
    Index("ix_commit_repo_time", commit.c.repo_id, commit.c.committer_time),
    Index("ix_parent_commit", commit_parent.c.commit_id),
    Index("ix_file_change_commit", file_change.c.commit_id),
    Index("ix_trailer_commit", trailer.c.commit_id),
    Index("ix_trailer_key", trailer.c.key),
    Index("ix_fix_link_commit", fix_link.c.commit_id),
    Index("ix_fix_link_intro", fix_link.c.introducer_hash),
    Index("ix_path_subsystem", path_subsystem.c.repo_id, path_subsystem.c.path),
    Index("ix_tag_repo", tag.c.repo_id),
    Index("ix_patch_id_value", patch_id.c.repo_id, patch_id.c.patch_id),
    Index("ix_backport_line", backport_line.c.repo_id, backport_line.c.hash),
]
