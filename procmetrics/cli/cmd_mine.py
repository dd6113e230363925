"""``procmetrics mine``: read a git history into the store."""
from __future__ import annotations

import argparse

from procmetrics.cli import add_store_argument
from procmetrics.mine import MineOptions, mine_repository


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("mine", help="read a git history into the store",
                       description="Read commits, trailers, fix references, touched paths "
                       "and tags of a local clone (bare or not) into the store. A second "
                       "run adds only new commits.")
    p.add_argument("path", metavar="PATH", help="top folder of the clone (or a bare repository)")
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
    p.add_argument("--prefix-depth", type=int, default=1, metavar="N",
                   help="without rules or MAINTAINERS: subsystem = first N folders (default 1)")
    p.add_argument("--repo-name", metavar="NAME", help="name in the store (default: folder name)")
    p.add_argument("--rewrite-policy", choices=["fail", "remine"], default="fail",
                   help="when the stored history was rewritten: fail (default) or delete "
                   "this repository's rows and mine again")
    p.add_argument("--progress", action=argparse.BooleanOptionalAction, default=None,
                   help="progress bar on stderr (default: when stderr is a terminal)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    opts = MineOptions(ref=args.ref, since=args.since, until=args.until,
                       line_counts=not args.no_line_counts, merge_files=args.merge_files,
                       subsystem_rules=args.subsystem_rules,
                       use_maintainers=not args.no_maintainers, prefix_depth=args.prefix_depth,
                       repo_name=args.repo_name, rewrite_policy=args.rewrite_policy,
                       progress=args.progress)
    s = mine_repository(args.path, store=args.store, options=opts)
    fx = s.fix_status
    print(f"{s.repo}: {s.new_commits} new commit(s) mined "
          f"({'incremental from ' + s.base_hash[:12] if s.base_hash else 'full'}) "
          f"in {s.seconds:.1f} s; tip {s.head_hash[:12]}")
    print(f"stored: {s.commits} commits ({s.merges} merges), {s.trailers} trailers, "
          f"{s.fix_refs} fix references (resolved {fx.get('resolved', 0)}, unresolved "
          f"{fx.get('unresolved', 0)}, ambiguous {fx.get('ambiguous', 0)}, self "
          f"{fx.get('self', 0)}), {s.unparsed} unparsed, {s.reverts} reverts, {s.tags} tags")
    print(f"subsystems: {s.mapping_kind} ({s.mapping_source})")
    if s.is_shallow:
        print("warning: shallow clone - history before the shallow boundary is missing")
    return 0
