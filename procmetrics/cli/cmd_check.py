"""``procmetrics check``: judge a claims file against the store; the exit code gates a pipeline."""
from __future__ import annotations

import argparse
import sys

from procmetrics.cli import (add_progress_argument, add_scope_arguments, add_scope_file_argument,
                             add_store_argument, print_scope, scope_request)
from procmetrics.analyse.measures.periods import DEFAULT_PERIOD
from procmetrics.report.model import PERIODS
from procmetrics.textsafe import data_stdout


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "check", help="check claims (TOML) against the data; exit code = verdicts",
        description="Judge each claim of a claims file, one-sided in the claimed direction at "
        "level alpha/2 (supported only when the whole two-sided interval at the claim's level "
        "lies on the claimed side). Verdicts: supported, not supported, "
        "undecidable with this data, not supportable by this kind of evidence. Exit code: 0 "
        "when every claim is supported; otherwise 8 + 1 (any not supported) + 2 (any "
        "undecidable) + 4 (any not supportable) + 16 (any verdict fragile: it flips under "
        "another reasonable analysis choice of the robustness panel), i.e. 9-31. Errors: 2 claims file or a claim "
        "that does not fit the store (a \"policy\" date without --policy-date, an unknown "
        "subsystem), 5 store.",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("claims", metavar="CLAIMS.toml", nargs="?", help="claims file")
    add_store_argument(p)
    add_progress_argument(p)
    p.add_argument("--repo", metavar="NAME", help="repository in the store")
    p.add_argument("--policy-date", metavar="DATE|REV", dest="policy",
                   help="what date = \"policy\" means in the claims file")
    p.add_argument("--period", choices=PERIODS, default=DEFAULT_PERIOD,
                   help=f"period used by the per-period models (default: {DEFAULT_PERIOD})")
    p.add_argument("--exclusions", metavar="FILE", help="carry-over exclusions file (TOML "
                   "[[exclude]] tables with upstream and reason), read as 'procmetrics "
                   "carryover --exclusions' reads it: excluded upstream fixes are not counted "
                   "as missing and are named in the verdicts")
    p.add_argument("--json", metavar="FILE", help="also write the verdicts as JSON with their "
                   "provenance (repository, HEAD, store checksum, policy date, options, "
                   "version) and each verdict's robustness panel ('-' = stdout)")
    p.add_argument("--junit", metavar="FILE", help="also write JUnit XML: one test case per "
                   "claim; not supported, undecidable and not supportable are failures")
    p.add_argument("--no-panel", action="store_true", help="skip the robustness panel (each "
                   "claim re-judged by month/quarter, committer/author dates, horizon x0.5/x2, "
                   "a later link era); bit 16 of the exit code is then never set")
    p.add_argument("--list-kinds", action="store_true", help="list the claim kinds and exit")
    add_scope_arguments(p)
    add_scope_file_argument(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    # heavy analysis imports happen only when the command runs
    from procmetrics.claims.base import exit_code
    from procmetrics.claims.check import (claims_and_context, list_kinds, render_verdicts,
                                          write_text)
    from procmetrics.claims.registry import evaluate_claims
    from procmetrics.claims.robustness import judge_with_panel
    from procmetrics.report.jsonout import dumps

    if args.list_kinds:
        print(list_kinds())
        return 0
    if not args.claims:
        print("procmetrics check: error: give a claims file (or --list-kinds)", file=sys.stderr)
        return 2
    opts = dict(store=args.store, repo=args.repo, policy=args.policy, period=args.period,
                exclusions=args.exclusions)
    claims, ctx = claims_and_context(args.claims, **opts, scope=scope_request(args),
                                     scope_file=args.scope_file)
    if args.json != "-":
        print_scope(ctx.scope)
        for name, sctx in sorted(ctx.scopes.items()):
            print(f"claims naming the scope {name!r}:")
            print_scope(sctx.scope)
    if args.no_panel:
        verdicts, panels = evaluate_claims(claims, ctx), None
    else:
        pairs = judge_with_panel(claims, ctx)
        verdicts, panels = [v for v, _ in pairs], [p for _, p in pairs]
    code = exit_code(verdicts, fragile=any(p.fragile for p in panels or ()))
    rob = {p.claim_id: p.to_dict() for p in panels or ()}
    plain = [{**v.to_dict(), **({"robustness": rob[v.claim.id]} if v.claim.id in rob else {})}
             for v in verdicts]
    prov = None
    if args.json or args.junit:
        from procmetrics.claims.reader import load_claims
        from procmetrics.report.gate import check_provenance

        prov = check_provenance(args.store, repo=args.repo, policy=args.policy,
                                period=args.period, claims_path=args.claims,
                                claims_sha256=load_claims(args.claims).sha256,
                                scope=None if ctx.scope is None else ctx.scope.to_dict(),
                                claim_scopes={n: c.scope.to_dict()
                                              for n, c in sorted(ctx.scopes.items())})
    doc = ""
    if args.json:
        from procmetrics.report.gate import check_document

        doc = dumps(check_document(plain, prov, code))
    if args.json == "-":
        data_stdout().write(doc)
    else:
        print(render_verdicts(verdicts, panels))
        if args.json:
            write_text(args.json, doc)
    if args.junit:
        from procmetrics.report.gate import junit_xml

        write_text(args.junit, junit_xml(plain, prov))
    return code
