"""Constructed tidy tables with a known ground truth, for claims and flag tests.

Invented data (a simulation with known parameters), built directly as the tidy
tables of ``procmetrics.store.tables.COLUMNS`` so the report's logic is tested
without git or SQL in between.
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd

from procmetrics.store.repodata import StoreData
from procmetrics.store.tables import COLUMNS

START = pd.Timestamp("2020-01-01", tz="UTC")


def synth(*, seed: int = 1, n_commits: int = 1200, days: int = 1460,
          review_before: float = 0.3, review_after: float = 0.8,
          policy: str = "2022-01-01", fix_share: float = 0.12,
          lifetime_days: float = 20.0, unresolved_share: float = 0.0,
          shallow: bool = False, rewritten: bool = False) -> StoreData:
    """A repository 'synthrepo' with a review policy at ``policy``.

    Review trailers appear with probability ``review_before`` / ``review_after``;
    a share ``fix_share`` of commits fix an earlier commit, with exponential
    lifetimes of mean ``lifetime_days`` (median = mean * ln 2).
    """
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, days, n_commits))
    dates = START + pd.to_timedelta(t, unit="D")
    dates = dates.floor("s")
    hashes = [f"{i:040x}" for i in range(1, n_commits + 1)]
    after = dates >= pd.Timestamp(policy, tz="UTC")
    p_rev = np.where(after, review_after, review_before)
    reviewed = rng.uniform(size=n_commits) < p_rev
    authors = rng.integers(0, 6, n_commits)
    commits = pd.DataFrame({
        "repo": "synthrepo", "hash": hashes,
        "author_name": [f"Dev {a}" for a in authors],
        "author_email": [f"dev{a}@example.invalid" for a in authors],
        "committer_name": "Integrator", "committer_email": "int@example.invalid",
        "author_date": dates, "author_offset_min": 60, "committer_date": dates,
        "committer_offset_min": 60, "subject": [f"change {i}" for i in range(n_commits)],
        "n_parents": 1, "is_merge": pd.array([False] * n_commits, dtype="boolean"),
        "stable_request": pd.array([False] * n_commits, dtype="boolean"),
        "n_files": 1, "lines_added": pd.array(rng.integers(1, 50, n_commits), dtype="Int64"),
        "lines_deleted": pd.array(rng.integers(0, 20, n_commits), dtype="Int64"),
        "n_fix_refs": 0, "n_resolved_fixes": 0,
        "is_revert": pd.array([False] * n_commits, dtype="boolean"),
    })
    trailers = pd.DataFrame({
        "repo": "synthrepo", "hash": [h for h, r in zip(hashes, reviewed) if r],
        "position": 0, "key": "reviewed-by", "raw_key": "Reviewed-by",
        "value": "Rev Iewer <rev@example.invalid>", "person_name": "Rev Iewer",
        "person_email": "rev@example.invalid"})
    # fixes: commit j fixes an earlier commit i with exponential lifetime
    links = []
    idx = np.arange(n_commits)
    for i in rng.choice(idx[: int(n_commits * 0.9)], int(n_commits * fix_share), replace=False):
        target = t[i] + rng.exponential(lifetime_days)
        j = int(np.searchsorted(t, target))
        if j >= n_commits or j == i:
            continue
        unresolved = rng.uniform() < unresolved_share
        links.append({
            "repo": "synthrepo", "fix_hash": hashes[j], "position": 0,
            "ref_hash": hashes[i][:12] if not unresolved else "feedface0000",
            "status": "unresolved" if unresolved else "resolved",
            "introducer_hash": None if unresolved else hashes[i],
            "cited_subject": None, "subject_match": pd.NA, "in_trailer_block": True,
            "raw_text": f"Fixes: {hashes[i][:12]}", "fix_author_date": dates[j],
            "fix_committer_date": dates[j],
            "intro_author_date": pd.NaT if unresolved else dates[i],
            "intro_committer_date": pd.NaT if unresolved else dates[i]})
    fix_links = pd.DataFrame(links, columns=COLUMNS["fix_links"])
    for col in ("fix_author_date", "fix_committer_date", "intro_author_date",
                "intro_committer_date"):
        fix_links[col] = pd.to_datetime(fix_links[col], utc=True)
    fix_links = fix_links.drop_duplicates(["fix_hash", "introducer_hash"]).sort_values(
        ["fix_committer_date", "fix_hash"]).reset_index(drop=True)
    fix_links["position"] = fix_links.groupby("fix_hash").cumcount()
    n_refs = fix_links.groupby("fix_hash").size()
    n_res = fix_links[fix_links["status"] == "resolved"].groupby("fix_hash").size()
    commits["n_fix_refs"] = commits["hash"].map(n_refs).fillna(0).astype("int64")
    commits["n_resolved_fixes"] = commits["hash"].map(n_res).fillna(0).astype("int64")
    head = hashes[-1]
    mined_at = pd.to_datetime(commits["committer_date"], utc=True).max() + pd.Timedelta(days=1)
    runs = [{"repo": "synthrepo", "run_id": 1, "status": "complete", "started": mined_at,
             "ended": mined_at, "ref": "HEAD", "head_hash": head, "base_hash": None,
             "is_shallow": shallow, "options_json": json.dumps({"line_counts": True}),
             "versions_json": "{}", "n_commits": n_commits, "n_file_changes": n_commits,
             "n_trailers": len(trailers), "n_fix_refs": len(fix_links), "message": None}]
    if rewritten:
        runs.append({**runs[0], "run_id": 2, "base_hash": "f" * 40, "head_hash": head})
    mining_runs = pd.DataFrame(runs, columns=COLUMNS["mining_runs"])
    repositories = pd.DataFrame([{"repo": "synthrepo", "path": "/nonexistent/synthrepo",
                                  "remote_url": None, "tip_hash": head, "tip_ref": "HEAD",
                                  "is_shallow": shallow, "mapping_kind": "path-prefix",
                                  "mapping_source": "1"}], columns=COLUMNS["repositories"])
    for df in (mining_runs, repositories):
        df["is_shallow"] = df["is_shallow"].astype("boolean")
    empty = {name: pd.DataFrame(columns=cols) for name, cols in COLUMNS.items()}
    tables = {**empty, "commits": commits, "trailers": trailers, "fix_links": fix_links,
              "mining_runs": mining_runs, "repositories": repositories}
    for name in ("commit_subsystems", "tags", "reverts", "unparsed_references",
                 "file_changes"):
        tables[name] = empty[name]
    tables["tags"] = tables["tags"].astype({"tag_date": "datetime64[ns, UTC]"})
    return StoreData("synthrepo", tables)
