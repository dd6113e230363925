"""Commit equivalence: does a tree carry a given upstream commit, and how was that decided.

Three ways, tried in this order for each upstream commit:

1. ``same-id``   - the tree's history holds the very commit (shared history, merges);
2. a backport line in a tree commit's message naming the upstream commit
   (styles of :mod:`procmetrics.mine.backports`: ``cherry-picked``,
   ``commit-upstream``, ``upstream-commit``, ``backported-from``); a cited prefix
   matching several upstream commits is *ambiguous* and not used;
3. ``patch-id``  - a tree commit whose ``git patch-id --stable`` equals the upstream
   commit's (the same change, whatever the message says). When several upstream
   commits share that patch id (a change reverted and applied again) each is
   matched and flagged ``ambiguous``: the tree carries the change, but which
   upstream commit it came from cannot be told.

The arrival in the tree is the earliest matching tree commit's committer date.
"""
from __future__ import annotations

from procmetrics.hexprefix import prefix_matches


import pandas as pd

MATCH_COLUMNS = ["upstream_hash", "tree_hash", "method", "arrival_date", "n_candidates",
                 "ambiguous"]
RESOLUTION_COLUMNS = ["fix_hash", "ref_hash", "status", "upstream_hash", "resolved_in"]


def match_commits(upstream_commits: pd.DataFrame, tree_commits: pd.DataFrame,
                  backport_lines: pd.DataFrame, upstream_patch_ids: pd.DataFrame,
                  tree_patch_ids: pd.DataFrame) -> pd.DataFrame:
    """One row per upstream commit the tree carries (columns :data:`MATCH_COLUMNS`).

    Parameters
    ----------
    upstream_commits, tree_commits : tidy ``commits`` tables (``hash``, ``committer_date``).
    backport_lines : tidy ``backport_lines`` table of the tree.
    upstream_patch_ids, tree_patch_ids : tidy ``patch_ids`` tables.

    Returns
    -------
    DataFrame
        ``method`` is ``same-id``, a backport-line style or ``patch-id``;
        ``n_candidates`` the number of upstream commits the evidence fits (1 unless
        ambiguous); ``ambiguous`` marks patch-id matches shared by several upstream
        commits (counted apart by the callers).

    References
    ----------
    git documentation, ``git-patch-id(1)`` (``--stable``) and ``git-cherry-pick(1)`` (``-x``).
    """
    up_hashes = sorted(upstream_commits["hash"].astype(str))
    up_set = set(up_hashes)
    arrival = dict(zip(tree_commits["hash"], tree_commits["committer_date"]))
    rows: dict[str, tuple] = {}

    for h in tree_commits["hash"]:
        if h in up_set:
            rows[h] = (h, "same-id", 1, False)
    for h, style, cited in backport_lines[["hash", "style", "cited_hash"]].itertuples(index=False):
        found = prefix_matches(up_hashes, str(cited).lower()) if h in arrival else []
        if len(found) != 1:         # no such upstream commit, or an ambiguous prefix
            continue
        best = rows.get(found[0])
        if best is None or (best[1] != "same-id" and arrival[h] < arrival[best[0]]):
            rows[found[0]] = (h, style, 1, False)
    tree_by_pid: dict[str, list[str]] = {}
    for h, pid in tree_patch_ids[["hash", "patch_id"]].itertuples(index=False):
        if h in arrival:
            tree_by_pid.setdefault(pid, []).append(h)
    up_pid = upstream_patch_ids[upstream_patch_ids["hash"].isin(up_set)]
    n_up_per_pid = up_pid["patch_id"].value_counts()
    for up, pid in up_pid[["hash", "patch_id"]].itertuples(index=False):
        if up in rows or pid not in tree_by_pid:
            continue
        first = min(tree_by_pid[pid], key=lambda t: (arrival[t], t))
        n = int(n_up_per_pid[pid])
        rows[up] = (first, "patch-id", n, n > 1)
    out = pd.DataFrame([(u, t, m, arrival[t], n, a) for u, (t, m, n, a) in rows.items()],
                       columns=MATCH_COLUMNS)
    return out.sort_values(["arrival_date", "upstream_hash"], kind="mergesort",
                           ignore_index=True)


def resolve_upstream_refs(tree_fix_links: pd.DataFrame, upstream_commits: pd.DataFrame,
                          upstream_repo: str) -> pd.DataFrame:
    """Resolve the tree's unresolved ``Fixes:`` references against an upstream history.

    Returns one row per unresolved reference (columns :data:`RESOLUTION_COLUMNS`):
    ``status`` ``resolved`` / ``ambiguous`` / ``unresolved``, the full upstream hash
    when resolved, and ``resolved_in`` (the upstream repository's store name).
    """
    up_hashes = sorted(upstream_commits["hash"].astype(str))
    todo = tree_fix_links[tree_fix_links["status"] == "unresolved"]
    rows = []
    for fix, ref in todo[["fix_hash", "ref_hash"]].itertuples(index=False):
        found = prefix_matches(up_hashes, str(ref).lower())
        status = "resolved" if len(found) == 1 else "ambiguous" if found else "unresolved"
        rows.append((fix, ref, status, found[0] if len(found) == 1 else None,
                     upstream_repo if found else None))
    return pd.DataFrame(rows, columns=RESOLUTION_COLUMNS)
