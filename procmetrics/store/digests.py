"""Table digests: the store checksum's per-table parts, kept as mining runs complete.

The store checksum (:mod:`procmetrics.store.repodata`) combines, per tidy table,
the row count and the sum modulo 2**256 of the SHA-256 of each row's canonical
line. That sum is additive, so it need not be recomputed from every row for
every report: the ``table_digest`` row of (repository, table) holds the count
and sum of the rows readers see, and changes only in the transactions that
change what readers see.

Maintained tables (:data:`MAINTAINED`): ``file_changes``, ``trailers`` and
``unparsed_references``. Their rows are written with their commit and never
updated, and each line depends only on its own commit (hash), the repository's
name and person rows (never updated), so a row becomes visible exactly when
its run completes and stays as it is until deleted. Hence:

* ``complete_run`` (one transaction with ``status = 'complete'``): adds the
  lines of the run's commits to each stored digest (cost grows with the run,
  not the store); a repository without a digest row (its first run, a store
  from schema 3, a digest dropped below) gets one computed from every visible
  row in that same transaction.
* ``delete_repository_data`` (re-mine after a rewrite, changed options or
  ``.mailmap``): drops the digest rows (the next completing run computes them
  afresh). A completed run is never marked failed afterwards
  (:meth:`~procmetrics.store.runbook.RunBook.fail_run`), so its rows and their
  digest stay visible together.
* ``cleanup_incomplete`` removes only rows readers never saw: nothing to do.

Every other table (``commits``, ``fix_links``, ``commit_subsystems``, ``tags``,
the upstream tables, ...) is computed at report time as before. A missing
digest row means "unknown": the report computes that table in full, with the
same function the writer uses (:func:`full_digest`).
"""
from __future__ import annotations

import hashlib
from typing import Iterator, Mapping

import numpy as np
from sqlalchemy import delete, insert, select, update
from sqlalchemy.engine import Connection

from procmetrics.store import schema as s
from procmetrics.store.canonlines import SQL_LINE_TABLES, canonical_line_batches

#: the tidy tables whose digest the store keeps (see the module docstring)
MAINTAINED: tuple[str, ...] = SQL_LINE_TABLES
_MOD = 1 << 256


def count_and_digest(batches: Iterator[list[str]]) -> tuple[int, str]:
    """Row count and sum modulo 2**256 of the SHA-256 of each line (64 hex digits)."""
    total, n = 0, 0
    for batch in batches:
        n += len(batch)
        total += _digest_sum(batch)
    return n, format(total % _MOD, "064x")


def _digest_sum(lines: list[str]) -> int:
    """Sum of the SHA-256 of each line as a 256-bit big-endian integer.

    The digests are summed as eight 32-bit big-endian words per line, each word
    position in a 64-bit column total (exact below 2**32 lines), and the eight
    totals are put together with their place values: the same integer as adding
    ``int.from_bytes(digest, "big")`` line by line, without a Python integer per line.
    """
    if not lines:
        return 0
    sha = hashlib.sha256
    blob = b"".join([sha(line.encode("utf-8", "surrogatepass")).digest() for line in lines])
    words = np.frombuffer(blob, dtype=">u4").reshape(len(lines), 8)
    sums = words.sum(axis=0, dtype=np.uint64).tolist()
    return sum(int(v) << (32 * (7 - k)) for k, v in enumerate(sums))


def full_digest(conn: Connection, name: str, repo: str | None = None, *,
                repo_id: int | None = None) -> tuple[int, str]:
    """Count and digest of every row of ``name`` readers see (one repository)."""
    return count_and_digest(canonical_line_batches(conn, name, repo, repo_id=repo_id))


def stored_digests(conn: Connection, repo: str) -> dict[str, tuple[int, str]]:
    """The digests the store holds for repository ``repo`` (name), by table."""
    d, r = s.table_digest, s.repository
    rows = conn.execute(select(d.c.table_name, d.c.n_rows, d.c.digest)
                        .join(r, r.c.repo_id == d.c.repo_id).where(r.c.name == repo))
    return {name: (int(n), digest) for name, n, digest in rows if name in MAINTAINED}


def add_run(conn: Connection, repo_id: int, run_id: int, first_id: int | None = None
            ) -> None:
    """Inside the transaction that marks ``run_id`` complete: add its rows' digests.
    ``first_id``: no row of the run has a lower commit id (a bound, not a filter)."""
    d = s.table_digest
    have: Mapping[str, tuple[int, str]] = {
        name: (int(n), digest) for name, n, digest in conn.execute(
            select(d.c.table_name, d.c.n_rows, d.c.digest).where(d.c.repo_id == repo_id))}
    for name in MAINTAINED:
        if name in have:
            n_add, add = count_and_digest(canonical_line_batches(
                conn, name, repo_id=repo_id, run_id=run_id, first_id=first_id))
            n_old, old = have[name]
            conn.execute(update(d).where(d.c.repo_id == repo_id, d.c.table_name == name)
                         .values(n_rows=n_old + n_add,
                                 digest=format((int(old, 16) + int(add, 16)) % _MOD, "064x")))
        else:
            n, digest = full_digest(conn, name, repo_id=repo_id)
            conn.execute(insert(d).values(repo_id=repo_id, table_name=name, n_rows=n,
                                          digest=digest))


def forget(conn: Connection, repo_id: int) -> None:
    """Drop the repository's digests (what readers see changed in another way)."""
    conn.execute(delete(s.table_digest).where(s.table_digest.c.repo_id == repo_id))
