"""``procmetrics mine``: read a git history into the store."""
from __future__ import annotations

import argparse
import sys

from procmetrics.cli import add_store_argument
from procmetrics.errors import ConfigError
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.mine.multi import mine_many, read_repo_list
from procmetrics.validate import arg, check_count


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("mine", help="read a git history into the store",
                       description="Read commits, trailers, fix references, touched paths "
                       "and tags of a local clone (bare or not) into the store. A second "
                       "run adds only new commits.")
    p.add_argument("path", metavar="PATH", nargs="*",
                   help="top folder of the clone (or a bare repository); several PATHs are "
                   "mined in parallel into the same store, each under its own name")
    p.add_argument("--list", metavar="FILE", dest="repo_list",
                   help="text file naming repositories to mine, one path a line (# comments)")
    p.add_argument("--jobs", type=arg(check_count, "--jobs"), metavar="N",
                   help="worker processes for several repositories (default: one per CPU)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="mine on a Dask distributed cluster (e.g. tcp://host:8786); workers "
                   "must see the same paths and the store (use a PostgreSQL URL)")
    p.add_argument("--ref", default="HEAD", help="branch, tag or commit to mine (default HEAD)")
    p.add_argument("--since", metavar="DATE", help="only commits with committer date on/after "
                   "DATE (YYYY-MM-DD, UTC, or an ISO date-time)")
    p.add_argument("--until", metavar="DATE", help="only commits with committer date on/before DATE")
    add_store_argument(p)
    p.add_argument("--no-line-counts", action="store_true",
                   help="store touched paths only (3-10x faster; no lines added/deleted)")
    p.add_argument("--merge-files", choices=["none", "first-parent"], default="none",
                   help="file rows for merge commits: none (default) or the diff against "
                   "the first parent")
    p.add_argument("--subsystem-rules", metavar="FILE",
                   help="TOML file mapping globs to subsystems ([subsystems] name = [globs])")
    p.add_argument("--no-maintainers", action="store_true",
                   help="ignore a MAINTAINERS file in the repository")
    p.add_argument("--prefix-depth", type=arg(check_count, "--prefix-depth"), default=1, metavar="N",
                   help="without rules or MAINTAINERS: subsystem = first N folders (default 1)")
    p.add_argument("--repo-name", metavar="NAME", help="name in the store (default: folder name)")
    p.add_argument("--rewrite-policy", choices=["fail", "remine"], default="fail",
                   help="when the stored history was rewritten: fail (default) or delete "
                   "this repository's rows and mine again")
    p.add_argument("--upstream", metavar="PATH", action="append", default=[],
                   help="an upstream clone to mine as the reference history of the tree PATH "
                   "(repeatable; read-only, nothing fetched): fix references are resolved "
                   "there and commit equivalence (backport lines, patch ids) is prepared")
    p.add_argument("--upstream-path-map", metavar="UPSTREAM_PREFIX=TREE_PREFIX",
                   action="append", default=[], help="the tree mirrors part of the upstream: "
                   "upstream folder UPSTREAM_PREFIX ships as the tree's TREE_PREFIX "
                   "(repeatable; 'infer' to infer the map from the file names at both tips); "
                   "only upstream changes to mapped paths count")
    p.add_argument("--progress", action=argparse.BooleanOptionalAction, default=None,
                   help="progress bar on stderr (default: when stderr is a terminal)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from procmetrics import interrupts

    with interrupts.recorded():      # a Ctrl-C a library swallowed still stops the run
        return _run(args)


def _run(args: argparse.Namespace) -> int:
    paths = list(args.path) + (read_repo_list(args.repo_list) if args.repo_list else [])
    if not paths:
        raise ConfigError("name a repository PATH (or several, or --list FILE)")
    opts = MineOptions(ref=args.ref, since=args.since, until=args.until,
                       line_counts=not args.no_line_counts, merge_files=args.merge_files,
                       subsystem_rules=args.subsystem_rules,
                       use_maintainers=not args.no_maintainers, prefix_depth=args.prefix_depth,
                       repo_name=args.repo_name, rewrite_policy=args.rewrite_policy,
                       progress=args.progress)
    if args.upstream_path_map and not args.upstream:
        raise ConfigError("--upstream-path-map goes with --upstream")
    if args.upstream and (len(paths) > 1 or args.jobs or args.scheduler):
        raise ConfigError("--upstream goes with one tree PATH (mine several trees one by one)")
    if len(paths) > 1 or args.jobs or args.scheduler:
        return _run_many(paths, args, opts)
    s = mine_repository(paths[0], store=args.store, options=opts)
    fx = s.fix_status
    print(f"{s.repo}: {s.new_commits} new commit(s) mined "
          f"({'incremental from ' + s.base_hash[:12] if s.base_hash else 'full'}) "
          f"in {s.seconds:.1f} s; tip {s.head_hash[:12]}")
    print(f"stored: {s.commits} commits ({s.merges} merges), {s.trailers} trailers, "
          f"{s.fix_refs} fix references (resolved {fx.get('resolved', 0)}, unresolved "
          f"{fx.get('unresolved', 0)}, ambiguous {fx.get('ambiguous', 0)}, self "
          f"{fx.get('self', 0)}), {s.unparsed} unparsed, {s.reverts} reverts, {s.tags} tags")
    print(f"subsystems: {s.mapping_kind} ({s.mapping_source})")
    for up_path in args.upstream:
        from procmetrics.mine.upstream import mine_upstream
        u = mine_upstream(s.repo, paths[0], up_path, store=args.store, options=opts,
                          path_map=args.upstream_path_map or None)
        print(f"upstream {u.upstream}: {u.mined.new_commits} new commit(s), {u.mined.commits} "
              f"stored, {u.mined.fix_refs} fix references; patch ids computed: "
              f"{u.new_patch_ids_upstream} upstream, {u.new_patch_ids_tree} tree; "
              f"{u.backport_lines} backport line(s) in {s.repo}")
        if u.path_map is not None:
            print(f"path map: {u.path_map.describe()}")
    return 0


def _run_many(paths: list[str], args: argparse.Namespace, opts: MineOptions) -> int:
    r = mine_many(paths, store=args.store, options=opts, jobs=args.jobs,
                  scheduler=args.scheduler)
    for s in r.summaries:
        print(f"{s.repo}: {s.new_commits} new commit(s) "
              f"({'incremental' if s.incremental else 'full'}), {s.commits} stored, "
              f"{s.fix_refs} fix references, tip {s.head_hash[:12]}")
    for f in r.failures:
        print(f"procmetrics: error: {f.repo} ({f.path}): {f.message}", file=sys.stderr)
    print(f"{len(r.summaries)} of {len(r.summaries) + len(r.failures)} repositories mined "
          f"in {r.seconds:.1f} s ({r.executor}, {r.workers} worker(s))")
    return r.failures[0].exit_code if r.failures else 0
