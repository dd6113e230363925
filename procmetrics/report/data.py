"""Read the tidy tables a report needs and fingerprint them.

The store checksum is a SHA-256 over a canonical text dump of the tidy tables
that carry mined data (every table of ``COLUMNS`` except ``mining_runs`` and
``repositories``, whose run times, ids and local paths differ between two
stores that hold the same history). Rows are sorted, values written in one
fixed format, so a SQLite and a PostgreSQL store with the same data agree.
"""
from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping

import pandas as pd
from sqlalchemy.engine import Engine

from procmetrics.errors import ProcmetricsError
from procmetrics.store.tables import COLUMNS, read_table, read_tables

CHECKSUM_TABLES: tuple[str, ...] = tuple(
    sorted(t for t in COLUMNS if t not in ("mining_runs", "repositories")))


@dataclass(frozen=True)
class StoreData:
    """The tidy tables of one repository, read in one go."""

    repo: str
    tables: Mapping[str, pd.DataFrame]

    def __getitem__(self, name: str) -> pd.DataFrame:
        return self.tables[name]


def choose_repo(engine: Engine, repo: str | None) -> str:
    """The repository to report on: the one named, or the only one in the store."""
    repos = read_table(engine, "repositories")
    names = sorted(repos["repo"].astype(str))
    if repo is not None:
        if repo not in names:
            known = ", ".join(names) or "none"
            raise ProcmetricsError(f"repository {repo!r} is not in the store (stored: {known})")
        return repo
    if not names:
        raise ProcmetricsError("the store holds no mined repository; run 'procmetrics mine' first")
    if len(names) > 1:
        raise ProcmetricsError("the store holds several repositories (" + ", ".join(names)
                               + "); choose one with --repo")
    return names[0]


def load_store_data(engine: Engine, repo: str) -> StoreData:
    """Every tidy table for ``repo``."""
    # one snapshot: a miner writing at the same time is never seen half-way
    return StoreData(repo, read_tables(engine, COLUMNS, repo))


def _canon(value: Any) -> str:
    if value is None or value is pd.NA or value is pd.NaT:
        return "\\N"
    if isinstance(value, pd.Timestamp):
        return "\\N" if pd.isna(value) else str(int(value.timestamp()))
    if isinstance(value, bool):
        return "t" if value else "f"
    if isinstance(value, float):
        if math.isnan(value):
            return "\\N"
        if value.is_integer():
            return str(int(value))
        return repr(value)
    if hasattr(value, "item"):  # numpy scalar
        return _canon(value.item())
    text = str(value)
    return text.replace("\\", "\\\\").replace("\t", "\\t").replace("\n", "\\n")


def canonical_lines(df: pd.DataFrame, columns: Iterable[str]) -> list[str]:
    """One tab-separated line per row, values canonicalised, lines sorted."""
    cols = list(columns)
    lines = ["\t".join(_canon(v) for v in row)
             for row in df.reindex(columns=cols).astype(object).itertuples(index=False)]
    lines.sort()
    return lines


def store_checksum(data: StoreData) -> str:
    """SHA-256 (hex) over the canonical dump of the mined-data tables."""
    h = hashlib.sha256()
    for name in CHECKSUM_TABLES:
        cols = COLUMNS[name]
        h.update(f"# {name}\t{len(data[name])}\n".encode())
        h.update(("\t".join(cols) + "\n").encode())
        for line in canonical_lines(data[name], cols):
            h.update(line.encode("utf-8", "surrogatepass") + b"\n")
    return h.hexdigest()
