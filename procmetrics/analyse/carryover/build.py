"""From the tidy tables of a tree and its upstream reference to the carry-over table."""
from __future__ import annotations

from typing import Any, Mapping, Sequence

import pandas as pd

from procmetrics.analyse.carryover.equivalence import match_commits, resolve_upstream_refs
from procmetrics.analyse.carryover.missing import Exclusion, carryover_table, touching


def tip_date(tree: Mapping[str, pd.DataFrame]) -> pd.Timestamp:
    """Committer date of the tree's mined tip (the latest commit date when unknown)."""
    commits = tree["commits"]
    tip_hash = tree["repositories"]["tip_hash"].iloc[0]
    hit = commits.loc[commits["hash"] == tip_hash, "committer_date"]
    return hit.iloc[0] if len(hit) else commits["committer_date"].max()


def build_carryover(tree: Mapping[str, pd.DataFrame], upstream: Mapping[str, pd.DataFrame],
                    upstream_name: str, exclusions: Sequence[Exclusion] = (),
                    as_of: pd.Timestamp | None = None,
                    path_map: Sequence[tuple[str, str]] | None = None) -> dict[str, Any]:
    """Matches, per-fix table, and the tree's fix references resolved upstream.

    ``tree`` holds the tidy ``commits``, ``backport_lines``, ``patch_ids``,
    ``fix_links`` and ``repositories`` tables of the tree; ``upstream`` the
    ``commits``, ``patch_ids``, ``fix_links`` and ``commit_subsystems`` of the
    upstream history (and its ``file_changes`` under a ``path_map``: only upstream
    fixes touching a mirrored path then count).

    References
    ----------
    See :mod:`procmetrics.analyse.carryover.equivalence` and
    :mod:`procmetrics.analyse.carryover.missing`.
    """
    tip = tip_date(tree)
    matches = match_commits(upstream["commits"], tree["commits"], tree["backport_lines"],
                            upstream["patch_ids"], tree["patch_ids"])
    mirrored = (None if not path_map else
                touching(upstream["file_changes"], [tuple(p) for p in path_map]))
    table = carryover_table(upstream["fix_links"], upstream["commits"],
                            upstream["commit_subsystems"], matches, tip, list(exclusions),
                            as_of, mirrored)
    return {"tip_date": tip, "as_of": tip if as_of is None else as_of, "matches": matches, "table": table,
            "tree_refs_upstream": resolve_upstream_refs(tree["fix_links"], upstream["commits"],
                                                        upstream_name)}
