"""Upstream clones as reference histories of a mined tree.

``mine_upstream`` mines an upstream clone into the same store (an ordinary
repository row, read-only through :mod:`procmetrics.mine.git`, nothing fetched),
records it as a reference of the tree, and prepares what commit equivalence
needs: ``git patch-id --stable`` of every non-merge commit on both sides
(computed once per commit and stored; later runs add only new commits) and the
backport lines of the tree's commit messages (:mod:`procmetrics.mine.backports`).
Matching itself is a pure function over those tables
(:mod:`procmetrics.analyse.carryover.equivalence`).
"""
from __future__ import annotations

import os
from dataclasses import dataclass, replace
from typing import Sequence

from sqlalchemy.engine import Engine

from procmetrics.errors import ConfigError
from procmetrics.mine.backports import backport_lines
from procmetrics.mine.git import GitRepo, mapped_patch_ids, patch_ids
from procmetrics.mine.paths import INFER, PathMap, infer_path_map, parse_path_map
from procmetrics.mine.miner import default_repo_name, mine_repository
from procmetrics.mine.options import MineOptions, MiningSummary
from procmetrics.store import open_store
from procmetrics.store import upstream as up

PATCH_ID_BATCH = 20000      # commits per git log | git patch-id pair


@dataclass(frozen=True)
class UpstreamSummary:
    tree: str
    upstream: str
    mined: MiningSummary
    new_patch_ids_tree: int
    new_patch_ids_upstream: int
    backport_lines: int
    #: the path map in force (a mirrored subtree), or None: the whole upstream counts
    path_map: PathMap | None = None


def upstream_name(path: str | os.PathLike[str], tree: str) -> str:
    """Store name of an upstream clone: its folder name, ``<name>-upstream`` when that
    is the tree's own name."""
    name = default_repo_name(GitRepo.open(path))
    return f"{name}-upstream" if name == tree else name


def mine_upstream(tree: str, tree_path: str | os.PathLike[str],
                  upstream_path: str | os.PathLike[str], store: str | Engine | None = None,
                  options: MineOptions | None = None, name: str | None = None,
                  path_map: Sequence[str] | None = None) -> UpstreamSummary:
    """Mine ``upstream_path`` as a reference history of the stored tree ``tree``.

    ``path_map``: ``UPSTREAM_PREFIX=TREE_PREFIX`` items, or ``["infer"]``, when the tree
    mirrors part of the upstream (:mod:`procmetrics.mine.paths`); None for a whole tree.
    """
    opts = options or MineOptions()
    engine = store if isinstance(store, Engine) else open_store(store)
    name = name or upstream_name(upstream_path, tree)
    if name == tree:
        raise ConfigError(f"the upstream clone cannot be stored under the tree's name {tree!r}")
    up_opts = replace(opts, repo_name=name, ref="HEAD", since=None, until=None)
    mined = mine_repository(upstream_path, store=engine, options=up_opts)
    tree_id, up_id = up.repo_id(engine, tree), up.repo_id(engine, name)
    pm = _path_map(path_map, GitRepo.open(tree_path), GitRepo.open(upstream_path))
    if up.link_reference(engine, tree_id, up_id, None if pm is None else pm.to_json()):
        up.forget_patch_ids(engine, up_id)      # computed under another map
    n_tree = store_patch_ids(engine, tree_id, GitRepo.open(tree_path))
    n_up = store_patch_ids(engine, up_id, GitRepo.open(upstream_path),
                           None if pm is None else pm.pairs)
    rows = [(h, style, cited) for h, msg in up.messages(engine, tree_id)
            for style, cited in backport_lines(msg)]
    n_lines = up.replace_backport_lines(engine, tree_id, rows)
    return UpstreamSummary(tree, name, mined, n_tree, n_up, n_lines, pm)


def _path_map(values: Sequence[str] | None, tree: GitRepo, upstream: GitRepo
              ) -> PathMap | None:
    if not values:
        return None
    if list(values) != [INFER]:
        if INFER in values:
            raise ConfigError("--upstream-path-map: 'infer' goes alone",
                              key="--upstream-path-map")
        return parse_path_map(values)

    def files(repo: GitRepo) -> list[str]:
        return repo.text("ls-tree", "-r", "-z", "--name-only", "HEAD").split("\0")

    return infer_path_map(files(tree), files(upstream))


def store_patch_ids(engine: Engine, repo_id: int, git: GitRepo,
                    pairs: Sequence[tuple[str, str]] | None = None) -> int:
    """Compute and store the patch id of each stored commit that has none yet.

    A commit without a diff (empty, or only a mode change git does not hash) is stored
    with an empty patch id, so it is not asked again; readers leave those rows out.
    """
    todo = up.commits_without_patch_id(engine, repo_id)
    added = 0
    for i in range(0, len(todo), PATCH_ID_BATCH):
        part = todo[i:i + PATCH_ID_BATCH]
        found = dict(patch_ids(git, part) if pairs is None
                     else mapped_patch_ids(git, part, pairs))
        added += up.add_patch_ids(engine, repo_id, [(h, found.get(h, "")) for h in part])
    return added
