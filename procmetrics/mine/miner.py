"""``mine_repository``: read a git history into the store (library entry point).

One run: open the repository read-only, decide the range (everything, or
``stored_tip..new_tip`` when the stored tip is an ancestor of the new one),
stream ``git log`` through the parser into batches (one transaction each),
then resolve fix/revert references, store tags, map new paths to subsystems
and finally mark the run complete and move the stored tip (see
:mod:`procmetrics.store.writer` for why an interrupted run is harmless).

What the rows mean
------------------
* ``git_commit``: every commit reachable from the ref (merges included,
  ``is_merge`` = more than one parent); names and e-mails after ``.mailmap``
  (git's ``%aN``/``%aE``/``%cN``/``%cE``); times are UTC epoch seconds plus the
  original offset in minutes. Messages git cannot give as UTF-8 are read as
  Latin-1 and flagged ``message_was_utf8 = False``.
* ``file_change``: one row per path a non-merge commit touches against its
  parent (root commits against the empty tree), renames detected (``-M``,
  ``old_path`` set, ``change_type`` R), copies not looked for. Merge commits get
  NO rows by default (``merge_files="none"``), so every line is counted once, on
  the commit that wrote it; ``"first-parent"`` gives merges their diff against
  the first parent (what the merge brought into the mainline). Line counts are
  git's ``--numstat`` (myers diff); binary files have ``is_binary`` and NULL
  counts; with ``line_counts=False`` counts and ``is_binary`` are NULL.
* ``trailer``: the final trailer block, by git's own rules
  (:mod:`procmetrics.mine.trailers`); person trailers (keys ending ``-by``,
  ``Cc``, ``To``, ``From``) carry a ``person_id`` when the value holds an
  e-mail address (no ``.mailmap`` applied to them).
* ``fix_link`` / ``revert_link`` / ``unparsed_reference``: see
  :mod:`procmetrics.mine.references` and :mod:`procmetrics.mine.resolve`. A
  ``resolved`` link whose introducer lies outside the mined range (``--since``,
  another branch) has an ``introducer_hash`` but no introducer row, so its
  introducer dates read as missing.
* ``path_subsystem``: every touched path maps to at least one subsystem
  (:mod:`procmetrics.mine.subsystems`), always by the mapping of the latest run,
  so mining in steps and mining once agree.
"""
from __future__ import annotations

import gc
import json
import os
import platform
import sys
import time
import warnings
from contextlib import contextmanager
from importlib import metadata
from urllib.parse import urlsplit, urlunsplit

from sqlalchemy.engine import Engine

from procmetrics import __version__
from procmetrics.errors import ConfigError, DataQualityWarning, GitFailed, HistoryRewritten
from procmetrics.mine.git import GitRepo, ObjectAbsent
from procmetrics.mine.guards import (check_rules_change, identity_mapping_changed,
                                     refuse_store_inside)
from procmetrics.mine.partial import (PARTIAL_NOTE, commits_of_part, explain_missing_object,
                                     lacking_note, paths_only as _paths_only)
from procmetrics.mine.logstream import LogCommit, date_filter_args, log_args
from procmetrics.mine.options import CONTENT_OPTIONS, MineOptions, MiningSummary
from procmetrics.mine.references import scan_message
from procmetrics.mine.relink import resolve_links
from procmetrics.mine.remap import build_mapper, map_paths
from procmetrics.mine.tags import read_tags
from procmetrics.mine.trailers import parse_trailers, split_person
from procmetrics.store import open_store
from procmetrics.store.runlock import repository_lock
from procmetrics.store.writer import CommitRow, StoreWriter, TrailerRow

COMMITS_PER_GIT_PROCESS = 100_000   # bounds git's own memory (it never frees parsed objects)
_PERSON_KEYS = {"Cc", "To", "From"}


def mine_repository(path: str | os.PathLike[str], store: str | os.PathLike[str] | Engine |
                    None = None, options: MineOptions | None = None) -> MiningSummary:
    """Mine the history of the git repository at ``path`` into ``store``.

    Raises :class:`~procmetrics.errors.NotARepository`, ``UnknownRef``,
    ``GitUnavailable``, ``GitFailed``, ``HistoryRewritten``, ``ConfigError`` or
    ``StoreError``; warns :class:`~procmetrics.errors.DataQualityWarning` for
    shallow clones.
    """
    opts = options or MineOptions()
    started = time.monotonic()
    git = GitRepo.open(path)
    tip = git.resolve_commit(opts.ref)
    shallow = git.is_shallow()
    partial = git.is_partial_clone(tip)
    lacking: list[tuple[str, str]] = []      # (commit, object): mined without line counts
    if partial:
        git, opts = _paths_only(git, tip, opts)
    if shallow:
        warnings.warn(f"shallow clone: {git.path} lacks the history before its shallow "
                      "boundary, so counts, fix links and lifetimes are incomplete",
                      DataQualityWarning, stacklevel=2)
    mapper = build_mapper(git, tip, opts)
    if not isinstance(store, Engine):
        refuse_store_inside(store, [git.path, git.git_dir])
    engine = store if isinstance(store, Engine) else open_store(store)
    writer = StoreWriter(engine)
    name = opts.repo_name or default_repo_name(git)
    repo_id = writer.ensure_repository(name, str(git.path))
    # one run per repository and store at a time (released even when the run dies)
    with repository_lock(engine, repo_id, name):
        writer.ensure_indexes()
        cleaned = writer.cleanup_incomplete(repo_id)
        base = _decide_base(git, writer, repo_id, tip, opts)
        env = environment(git, tip)
        if base is not None and identity_mapping_changed(writer.environments(repo_id),
                                                          env, opts):
            writer.delete_repository_data(repo_id, "re-mined: the .mailmap changed")
            base = None
        if base is not None:
            check_rules_change(writer.mapping_of(repo_id), mapper, opts)
        run_id = writer.start_run(repo_id, ref=opts.ref, head_hash=tip, base_hash=base,
                                  is_shallow=shallow, options_json=opts.to_json(),
                                  versions_json=json.dumps(env, sort_keys=True))
        try:
            with _few_collections():
                try:
                    counts = _load(git, writer, repo_id, run_id, tip, base, opts,
                                   exact_renames=partial, lacking=lacking)
                except GitFailed as exc:
                    raise GitFailed(explain_missing_object(git, tip, str(exc), opts)) from exc
                if lacking:
                    warnings.warn(f"{lacking_note(lacking)}: those were mined without line "
                                  "counts; repair the clone (fetch the objects again) to count "
                                  "them", DataQualityWarning, stacklevel=2)
                resolve_links(git, writer, repo_id, run_id, tip)
                writer.replace_tags(repo_id, read_tags(git))
                map_paths(writer, repo_id, run_id, mapper, git)
            writer.complete_run(run_id, repo_id, tip_hash=tip, tip_ref=opts.ref,
                                path=str(git.path),
                                remote_url=redact_url(git.config_value("remote.origin.url")),
                                is_shallow=shallow, mapping_kind=mapper.kind,
                                mapping_source=mapper.source, counts=counts,
                                message="; ".join(m for m in (
                                    "shallow clone" if shallow else "",
                                    PARTIAL_NOTE if partial else "",
                                    lacking_note(lacking) if lacking else "") if m) or None)
        except BaseException as exc:
            try:
                writer.fail_run(run_id, f"{exc.__class__.__name__}: {exc}")
            except Exception:  # noqa: BLE001 - the store may be what failed; keep the first error
                pass
            raise
    t = writer.totals(repo_id)
    return MiningSummary(
        repo=name, run_id=run_id, head_hash=tip, base_hash=base, incremental=base is not None,
        new_commits=counts["n_commits"], commits=t["commits"], merges=t["merges"],
        file_changes=t["file_changes"], trailers=t["trailers"], fix_status=t["fix_status"],
        reverts=t["reverts"], unparsed=t["unparsed"], tags=t["tags"], is_shallow=shallow,
        mapping_kind=mapper.kind, mapping_source=mapper.source,
        seconds=round(time.monotonic() - started, 3), cleaned_runs=tuple(cleaned))


@contextmanager
def _few_collections():
    """Python's cyclic garbage collector off while rows stream through (restored after).

    The rows are acyclic (freed by reference counting), but each batch holds
    hundreds of thousands of young objects, so automatic collections ran
    thousands of times and cost about a sixth of the run; ``_load`` collects
    the young generations once per batch instead.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def _decide_base(git: GitRepo, writer: StoreWriter, repo_id: int, tip: str,
                 opts: MineOptions) -> str | None:
    old_tip, old_json = writer.repository_state(repo_id)
    if old_tip is None:
        return None
    if old_json is not None:
        old = json.loads(old_json)
        new = json.loads(opts.to_json())
        diff = [k for k in CONTENT_OPTIONS if old.get(k) != new.get(k)]
        if diff:
            if opts.rewrite_policy == "remine":
                writer.delete_repository_data(repo_id, f"re-mined with other {', '.join(diff)}")
                return None
            raise ConfigError(
                f"the store holds this repository mined with other {', '.join(diff)} "
                f"({', '.join(f'{k}={old.get(k)!r}' for k in diff)}); adding to it would mix "
                "data; use the same options, another --repo-name, or --rewrite-policy remine")
    if old_tip == tip or git.is_ancestor(old_tip, tip):
        return old_tip
    if opts.rewrite_policy == "remine":
        writer.delete_repository_data(repo_id, f"history rewritten: {old_tip} is not an "
                                               f"ancestor of {tip}")
        return None
    raise HistoryRewritten(
        f"the stored tip {old_tip[:12]} is not an ancestor of {opts.ref} ({tip[:12]}): the "
        "history was rewritten (force-push, rebase), an older ref was given, or another "
        "repository is stored under the same name (then use --repo-name); "
        "use --rewrite-policy remine to delete this repository's rows and mine it again")


def commit_row(c: LogCommit) -> CommitRow:
    """Turn one parsed ``git log`` commit into the rows the store wants."""
    block = parse_trailers(c.message)
    refs = scan_message(c.message, block)
    trailers = [TrailerRow(t.key, t.raw_key, t.value,
                           split_person(t.value) if (t.key.endswith("-by")
                                                     or t.key in _PERSON_KEYS) else None)
                for t in block.trailers]
    return CommitRow(
        c.hash, c.parents, (c.author_name, c.author_email),
        (c.committer_name, c.committer_email), c.author_time, c.author_offset_min,
        c.committer_time, c.committer_offset_min, c.subject, c.message, refs.stable_request,
        c.message_was_utf8, c.files, trailers, refs.fixes, refs.reverts, refs.unparsed)


def _load(git: GitRepo, writer: StoreWriter, repo_id: int, run_id: int, tip: str,
          base: str | None, opts: MineOptions, exact_renames: bool = False,
          lacking: list[tuple[str, str]] | None = None) -> dict[str, int]:
    counts = {"n_commits": 0, "n_file_changes": 0, "n_trailers": 0, "n_fix_refs": 0}
    if base == tip:
        return counts
    since, until = opts.since_epoch(), opts.until_epoch()
    show = sys.stderr.isatty() if opts.progress is None else opts.progress
    total = None
    if show:
        rng = [tip] + (["^" + base] if base else [])
        total = int(git.text("rev-list", "--count", *date_filter_args(since, until), *rng,
                             "--").strip() or 0)
    bulk = base is None and writer.drop_indexes_if_empty()
    from tqdm import tqdm
    # the bar's own carriage returns go to the stream under the CLI's sanitiser
    bar = tqdm(total=total, unit="commit", file=getattr(sys.stderr, "unfiltered", sys.stderr),
               disable=not show,
               desc="mining", dynamic_ncols=True)
    try:
        batch: list[CommitRow] = []
        for part_tip, excluded in history_parts(git, tip, base):
            args = log_args(part_tip, excluded, line_counts=opts.line_counts,
                            exact_renames=exact_renames,
                            merge_files=opts.merge_files, since=since, until=until)
            rev_range = [*date_filter_args(since, until), part_tip,
                         *("^" + e for e in excluded), "--"]
            for c in commits_of_part(git, args, rev_range, line_counts=opts.line_counts,
                                     lacking=lacking if lacking is not None else []):
                batch.append(commit_row(c))
                if len(batch) >= opts.batch_size:
                    _add(counts, writer.write_batch(repo_id, run_id, batch, durable=not bulk))
                    bar.update(len(batch))
                    batch = []
                    gc.collect(1)       # see _few_collections
        _add(counts, writer.write_batch(repo_id, run_id, batch, durable=not bulk))
        bar.update(len(batch))
    finally:
        bar.close()
    # not in the finally: after an interruption the store may still be locked by the
    # interrupted transaction and the next run rebuilds the indexes at its start anyway
    if bulk:
        writer.ensure_indexes()
    return counts


def history_parts(git: GitRepo, tip: str, base: str | None,
                  per_part: int | None = None) -> list[tuple[str, list[str]]]:
    """Split ``base..tip`` into parts of about ``per_part`` commits, one git process each.

    git keeps every object it has parsed until it exits, so one ``git log --raw``
    over a whole large history grows to gigabytes (1.4 GB for 500,000 synthetic
    commits). Cutting the first-parent chain at commits B1, B2, ... gives the
    parts ``B1``, ``B2 ^B1``, ``B3 ^B2``, ..., ``tip ^Bk``: each commit reachable
    from the tip lies in exactly one part, because every B is an ancestor of the
    next one.
    """
    per_part = per_part or COMMITS_PER_GIT_PROCESS
    outside = [base] if base else []
    rng = [tip] + ["^" + b for b in outside] + ["--"]
    total = int(git.text("rev-list", "--count", *rng).strip() or 0)
    if total <= per_part:
        return [(tip, outside)]
    chain = git.text("rev-list", "--first-parent", "--reverse", *rng).split()
    n_parts = min(len(chain), -(-total // per_part))
    cuts = [chain[(len(chain) * i) // n_parts - 1] for i in range(1, n_parts)]
    cuts = list(dict.fromkeys(c for c in cuts if c != tip))
    parts, previous = [], None
    for cut in cuts + [tip]:
        parts.append((cut, outside + ([previous] if previous else [])))
        previous = cut
    return parts


def _add(total: dict[str, int], part: dict[str, int]) -> None:
    for k, v in part.items():
        total[k] += v


def default_repo_name(git: GitRepo) -> str:
    p = git.path
    if p.name == ".git":
        p = p.parent
    return p.name[:-4] if p.name.endswith(".git") and len(p.name) > 4 else p.name


def redact_url(url: str | None) -> str | None:
    """Hide a password/token in a remote URL before it is stored."""
    if not url or "://" not in url:
        return url
    parts = urlsplit(url)
    if parts.password is None and not (parts.username and parts.scheme.startswith("http")):
        return url
    host = parts.hostname or ""
    if parts.port:
        host += f":{parts.port}"
    return urlunsplit(parts._replace(netloc=f"***@{host}"))


def environment(git: GitRepo, tip: str) -> dict[str, str]:
    """Tool versions plus the identity mapping git applied (the ``.mailmap`` committed
    at the revision ``git.mailmap_rev``, HEAD by default; never the work tree's)."""
    out = versions(git)
    try:
        found = None if git.mailmap_absent else git.blob_at(git.mailmap_rev or "HEAD",
                                                            ".mailmap")
    except ObjectAbsent as exc:
        found = None
        git = git.without_mailmap()
        out["identity_mapping"] = f".mailmap@{exc.oid} skipped (blob absent)"
        return out
    if git.mailmap_absent:
        out["identity_mapping"] = "none (.mailmap blob absent in a partial clone)"
        return out
    out["identity_mapping"] = f".mailmap@{found[0]}" if found else "none"
    return out


def versions(git: GitRepo) -> dict[str, str]:
    out = {"procmetrics": __version__, "git": ".".join(map(str, git.version)),
           "python": platform.python_version()}
    for pkg in ("sqlalchemy", "pandas"):
        try:
            out[pkg] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            out[pkg] = "not installed"
    return out


