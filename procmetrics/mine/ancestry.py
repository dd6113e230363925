"""Which release tags contain which commits (ancestry), for release-based lifetimes.

``tag_containment`` answers, for every (tag, commit) pair asked about, whether
the tag's commit has the commit as an ancestor (or is it). Two strategies,
chosen by size: with fewer tags than commits, one ``git rev-list <tag>`` per
tag and set membership; otherwise one
``git for-each-ref --contains <commit> refs/tags/`` per commit. Read-only.

Columns (:data:`CONTAINMENT_COLUMNS`): ``tag``, ``commit_hash``, ``contains``.
"""
from __future__ import annotations

from typing import Iterable

import pandas as pd

from procmetrics.errors import GitFailed
from procmetrics.mine.git import GitRepo

CONTAINMENT_COLUMNS = ["tag", "commit_hash", "contains"]


def tag_containment(repo: str | GitRepo, commits: Iterable[str],
                    tags: Iterable[str] | None = None) -> pd.DataFrame:
    """One row per (tag, commit): does the tag contain the commit?

    ``tags`` default: every tag in ``refs/tags``. Commits unknown to the
    repository are reported as not contained.
    """
    git = repo if isinstance(repo, GitRepo) else GitRepo.open(repo)
    wanted = list(dict.fromkeys(c for c in commits if isinstance(c, str) and c))
    if tags is None:
        tag_list = [t for t in git.text("for-each-ref", "--format=%(refname:strip=2)",
                                        "refs/tags/").splitlines() if t]
    else:
        tag_list = list(dict.fromkeys(tags))
    rows: list[tuple[str, str, bool]] = []
    if len(tag_list) <= len(wanted):
        for tag in tag_list:
            try:
                reach = set(git.text("rev-list", f"refs/tags/{tag}^{{commit}}", "--").split())
            except GitFailed:
                reach = set()
            rows += [(tag, c, c in reach) for c in wanted]
    else:
        tag_set = set(tag_list)
        for c in wanted:
            try:
                have = set(git.text("for-each-ref", f"--contains={c}",
                                    "--format=%(refname:strip=2)", "refs/tags/").split())
            except GitFailed:
                have = set()
            rows += [(t, c, t in have and t in tag_set) for t in tag_list]
    return pd.DataFrame(rows, columns=CONTAINMENT_COLUMNS)
