"""The subsystem mapping a run stores: which mapper, and which paths it maps (again).

The mapper comes from a rules file, the tip's MAINTAINERS file or path prefixes
(:mod:`procmetrics.mine.subsystems`); a run maps the paths no stored mapping covers,
and after a new MAINTAINERS blob only the paths a changed section hits.
"""
from __future__ import annotations

import warnings

from procmetrics.errors import DataQualityWarning
from procmetrics.mine.git import GitRepo, ObjectAbsent
from procmetrics.mine.options import MineOptions
from procmetrics.mine.subsystems import (
    UNMAPPED, PathMapper, maintainers_mapper, prefix_mapper, rules_mapper,
)
from procmetrics.store.writer import StoreWriter

MAINTAINERS_FILE = "MAINTAINERS"


def build_mapper(git: GitRepo, tip: str, opts: MineOptions) -> PathMapper:
    """Rules file, else the tip's MAINTAINERS file, else path prefixes."""
    if opts.subsystem_rules:
        return rules_mapper(opts.subsystem_rules)
    if opts.use_maintainers:
        try:
            found = git.blob_at(tip, MAINTAINERS_FILE)
        except ObjectAbsent as exc:
            warnings.warn(f"partial clone: the {MAINTAINERS_FILE} file's blob {exc.oid[:12]} is "
                          "not in the clone (nothing is fetched): subsystems come from path "
                          "prefixes instead; give --subsystem-rules for another mapping",
                          DataQualityWarning, stacklevel=3)
            found = None
        if found is not None:
            blob, data = found
            return maintainers_mapper(data.decode("utf-8", "replace"),
                                      f"{MAINTAINERS_FILE}@{blob}")
    return prefix_mapper(opts.prefix_depth)


def map_paths(writer: StoreWriter, repo_id: int, run_id: int, mapper: PathMapper,
               git: GitRepo | None = None, chunk: int = 5000) -> None:
    """Map the paths no stored mapping covers yet; those a changed mapping may map
    differently when it changed.

    A changed mapping (e.g. a new MAINTAINERS blob, as after most upstream merges)
    rewrites only the paths whose subsystems differ, so an incremental run does not
    rewrite the whole mapping table. When the previous mapping was a MAINTAINERS blob
    that git still has, only the paths a changed section hits (before or after) are
    mapped again (:meth:`PathMapper.differing`); otherwise every touched path is.

    The touched paths are the stored mapping's paths plus this run's unmapped ones,
    not a ``DISTINCT`` over every file change (5.7 s at a million commits): every
    completed run mapped each path it touched to at least one name
    (:meth:`PathMapper.map_many` is never empty), and the rows of runs that did not
    complete, with the mapping of paths only they touched, were removed before this
    run started (:meth:`StoreWriter.cleanup_incomplete`).
    """
    stored_kind, stored_source = writer.mapping_of(repo_id)
    if (stored_kind, stored_source) != (mapper.kind, mapper.source):
        new_paths = writer.unmapped_paths(repo_id, run_id)
        previous = _previous_mapper(git, stored_kind, stored_source, mapper)
        if previous is not None:
            paths = sorted(set(writer.mapped_paths(repo_id)).union(new_paths))
            hit = mapper.differing(previous).map_many(paths)
            paths = sorted({p for p, names in zip(paths, hit) if names != [UNMAPPED]}
                           .union(new_paths))
            old = writer.stored_mapping(repo_id, paths)
        else:
            old = writer.stored_mapping(repo_id)
            paths = sorted(set(old).union(new_paths))
        for i in range(0, len(paths), chunk):
            part = paths[i:i + chunk]
            changed = [(p, names) for p, names in zip(part, mapper.map_many(part))
                       if old.get(p) != names]
            if changed:
                writer.remap_paths(repo_id, changed)
        writer.drop_unused_subsystems(repo_id)
        return
    paths = writer.unmapped_paths(repo_id, run_id)
    for i in range(0, len(paths), chunk):        # bounded memory on large histories
        part = paths[i:i + chunk]
        writer.add_path_subsystems(repo_id, list(zip(part, mapper.map_many(part))))


def _previous_mapper(git: GitRepo | None, kind: str | None, source: str | None,
                     mapper: PathMapper) -> PathMapper | None:
    """The stored mapping's MAINTAINERS mapper, when both it and ``mapper`` come from
    such a file and git still has the stored one's blob; else None."""
    head = f"{MAINTAINERS_FILE}@"
    if (git is None or kind != "maintainers" or mapper.kind != "maintainers"
            or not (source or "").startswith(head)):
        return None
    data = git.blob(source[len(head):])
    if data is None:
        return None
    return maintainers_mapper(data.decode("utf-8", "replace"), source)
