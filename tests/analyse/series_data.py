"""Builders of small tidy tables (columns as in store.tables.COLUMNS) for the series tests."""
from __future__ import annotations

import numpy as np
import pandas as pd

from procmetrics.store.tables import COLUMNS


def commits_frame(rows: list[dict]) -> pd.DataFrame:
    """Commits with defaults for every column not given."""
    base = {"repo": "demo", "author_name": "A", "committer_name": "C", "author_offset_min": 0,
            "committer_offset_min": 0, "subject": "change", "n_parents": 1, "is_merge": False,
            "stable_request": False, "n_files": 1, "lines_added": 1, "lines_deleted": 0,
            "n_fix_refs": 0, "n_resolved_fixes": 0, "is_revert": False}
    out = []
    for i, r in enumerate(rows):
        d = dict(base, hash=f"{i:040x}", **r)
        d["committer_date"] = pd.Timestamp(d["committer_date"], tz="UTC") \
            if pd.Timestamp(d["committer_date"]).tzinfo is None else pd.Timestamp(d["committer_date"])
        d.setdefault("author_date", d["committer_date"])
        d.setdefault("committer_email", d["author_email"])
        out.append(d)
    df = pd.DataFrame(out)
    return df.reindex(columns=COLUMNS["commits"])


def trailers_frame(rows: list[tuple[str, str, str | None]]) -> pd.DataFrame:
    """(hash, key, email) triples -> trailers table."""
    df = pd.DataFrame([{"repo": "demo", "hash": h, "position": i, "key": k, "raw_key": k,
                        "value": f"Someone <{e}>" if e else "Someone", "person_name": "Someone",
                        "person_email": e} for i, (h, k, e) in enumerate(rows)])
    return df.reindex(columns=COLUMNS["trailers"])


def simulated_commits(rng: np.random.Generator, *, n: int, start: str, days: int,
                      p_review, subsystems: tuple[str, ...] = ()) -> tuple[pd.DataFrame,
                                                                          pd.DataFrame,
                                                                          pd.DataFrame]:
    """Invented commits (simulation with known truth): ``p_review(dates) -> probabilities``."""
    dates = pd.Timestamp(start, tz="UTC") + pd.to_timedelta(
        np.sort(rng.uniform(0, days, n)), unit="D")
    authors = np.array([f"dev{i}@example.org" for i in rng.integers(0, 25, n)])
    c = pd.DataFrame({"repo": "demo", "hash": [f"{i:040x}" for i in range(n)],
                      "author_name": "x", "author_email": authors, "committer_name": "y",
                      "committer_email": authors, "author_date": dates,
                      "committer_date": dates, "author_offset_min": 0,
                      "committer_offset_min": 0, "subject": "change", "n_parents": 1,
                      "is_merge": False, "stable_request": False, "n_files": 1,
                      "lines_added": rng.poisson(20, n), "lines_deleted": rng.poisson(5, n),
                      "n_fix_refs": 0, "n_resolved_fixes": 0, "is_revert": False})
    reviewed = rng.random(n) < p_review(dates)
    t = pd.DataFrame({"repo": "demo", "hash": c["hash"][reviewed], "position": 0,
                      "key": "Reviewed-by", "raw_key": "Reviewed-by",
                      "value": "R <rev@example.org>", "person_name": "R",
                      "person_email": "rev@example.org"})
    subs = subsystems or ("core",)
    cs = pd.DataFrame({"repo": "demo", "hash": c["hash"],
                       "subsystem": np.asarray(subs)[rng.integers(0, len(subs), n)]})
    return c[COLUMNS["commits"]], t[COLUMNS["trailers"]], cs
