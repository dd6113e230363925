"""Sections 1 and 2: scope and provenance; data quality."""
from __future__ import annotations

import json
from typing import Any

import pandas as pd

from procmetrics.report import plots
from procmetrics.report.context import BuildContext, date_text
from procmetrics.report.model import Block, Figure, Table


def scope(ctx: BuildContext) -> dict[str, Any]:
    """The JSON ``scope``: what was analysed (store data and options only)."""
    d = ctx.data
    repo = d["repositories"].iloc[0] if len(d["repositories"]) else None
    runs = d["mining_runs"]
    done = runs[runs["status"] == "complete"].sort_values("run_id")
    last = done.iloc[-1] if len(done) else None
    first_use = ctx.quality["first_use"]
    return {
        "repo": d.repo,
        "path": None if repo is None else repo["path"],
        "remote_url": None if repo is None or pd.isna(repo["remote_url"]) else repo["remote_url"],
        "ref": None if last is None else last["ref"],
        "head_hash": None if repo is None or pd.isna(repo["tip_hash"]) else repo["tip_hash"],
        "is_shallow": ctx.quality["history"]["is_shallow"],
        "first_commit": first_use["first_commit"],
        "last_commit": first_use["last_commit"],
        "n_commits": ctx.quality["merges"]["n_commits"],
        "n_analysed": ctx.quality["merges"]["n_analysed"],
        "policy": ctx.options.policy,
        "policy_date": None if ctx.policy_date is None else ctx.policy_date.isoformat(),
        "subsystems": list(ctx.options.subsystems),
        "period": ctx.options.period,
        "mining_options": ctx.quality["history"]["mining_options"],
        **({"selection": d.scope.to_dict()} if getattr(d, "scope", None) is not None else {}),
    }


def provenance(ctx: BuildContext) -> dict[str, Any]:
    """Mining runs as recorded in the store (without their wall-clock times)."""
    runs = []
    for _, r in ctx.data["mining_runs"].sort_values("run_id").iterrows():
        try:
            versions = json.loads(r["versions_json"] or "{}")
        except (TypeError, ValueError):
            versions = {"unreadable": str(r["versions_json"])}
        runs.append({"run_id": int(r["run_id"]), "status": r["status"], "ref": r["ref"],
                     "head_hash": r["head_hash"], "base_hash": r["base_hash"],
                     "is_shallow": bool(r["is_shallow"]) if pd.notna(r["is_shallow"]) else None,
                     "n_commits": None if pd.isna(r["n_commits"]) else int(r["n_commits"]),
                     "versions": versions})
    return {"mining_runs": runs}


def mining_options_text(opts: dict[str, Any]) -> str:
    """The mining options in words ("whole history; line counts mined; ..."), not raw
    key/value text; options left at their default say what the default means."""
    def day(epoch: Any) -> str:
        try:
            return date_text(pd.Timestamp(int(epoch), unit="s", tz="UTC"))
        except (TypeError, ValueError):
            return str(epoch)

    since, until = opts.get("since"), opts.get("until")
    parts = [f"ref {opts.get('ref') or 'HEAD'}",
             "whole history" if since is None and until is None else
             "commits " + (f"from {day(since)}" if since is not None else "")
             + (" " if since is not None and until is not None else "")
             + (f"until {day(until)}" if until is not None else ""),
             "line counts mined" if opts.get("line_counts", True) else "no line counts",
             {"none": "files of merge commits not recorded",
              "first-parent": "files of merge commits against their first parent"}.get(
                  str(opts.get("merge_files", "none")),
                  f"merge files: {opts.get('merge_files')}"),
             (f"subsystems from the rules file {opts['subsystem_rules']}"
              if opts.get("subsystem_rules") else
              "subsystems from MAINTAINERS where present" if opts.get("use_maintainers", True)
              else f"subsystems from the top {opts.get('prefix_depth', 1)} path level(s)"),
             ]
    if opts.get("repo_name"):
        parts.append(f"stored as “{opts['repo_name']}”")
    known = {"ref", "since", "until", "line_counts", "merge_files", "subsystem_rules",
             "use_maintainers", "prefix_depth", "repo_name", "batch_size", "rewrite_policy"}
    parts += [f"{k.replace('_', ' ')}: {json.dumps(v, sort_keys=True)}"
              for k, v in sorted(opts.items()) if k not in known and v is not None]
    return "; ".join(parts)


def section_scope(ctx: BuildContext) -> None:
    rep, sc = ctx.report, ctx.report.scope
    s = rep.add_section("scope", "Scope and provenance")
    s.p(f"This document examines the development history of the repository “{sc['repo']}” "
        f"as mined into a procmetrics store. It covers {sc['n_commits']:,} commits dated "
        f"from {date_text(sc['first_commit'])} to {date_text(sc['last_commit'])} (committer "
        f"dates, UTC); {sc['n_analysed']:,} of them are not merges and are analysed. "
        f"Periods are calendar {ctx.options.period}s unless stated otherwise"
        + (", and releases are the repository's tags." if ctx.options.period == "release"
           else "."))
    from procmetrics.report.scope_tables import scope_tables

    scope_tables(ctx, s)
    if ctx.policy_date is not None:
        s.p(f"The process change under examination took effect on "
            f"{ctx.policy_date:%Y-%m-%d} (given as “{ctx.options.policy}”). Comparisons split "
            "the history at that date.")
    else:
        s.p("No policy date was given, so no before/after comparison is made.")
    rows = [
        ("Repository", sc["repo"]), ("Location when mined", sc["path"] or "–"),
        ("Remote", sc["remote_url"] or "not recorded"), ("Ref mined", sc["ref"] or "–"),
        ("HEAD commit", sc["head_hash"] or "–"),
        ("Shallow clone", "yes: history is cut" if sc["is_shallow"] else "no"),
        ("Subsystems shown", ", ".join(sc["subsystems"]) or "all together"),
        ("Interval level", f"{ctx.options.level:.0%}"),
        ("Store checksum (SHA-256)", rep.store_checksum),
    ]
    rep.add_table(s, Table("scope-facts", "What was analysed.",
                           [("item", "Item"), ("value", "Value")],
                           pd.DataFrame(rows, columns=["item", "value"])))
    runs = pd.DataFrame(rep.provenance["mining_runs"])
    if len(runs):
        runs["head_hash"] = runs["head_hash"].astype(str).str[:12]
        runs["base_hash"] = runs["base_hash"].fillna("").astype(str).str[:12]
        rep.add_table(s, Table("mining-runs", "Mining runs recorded in the store.",
                               [("run_id", "Run"), ("status", "Status"), ("ref", "Ref"),
                                ("head_hash", "HEAD"), ("base_hash", "Continued from"),
                                ("n_commits", "Commits read")],
                               runs[["run_id", "status", "ref", "head_hash", "base_hash",
                                     "n_commits"]],
                               note="Run times, tool versions and the mining options are "
                                    "in manifest.json."))
    opts = sc["mining_options"]
    if opts:
        s.p("Mining options of the last run: " + mining_options_text(opts) + ".")
    from procmetrics.report.sec_claims import CAUTION_SHORT
    s.blocks.append(Block("caution", text=CAUTION_SHORT))


def section_quality(ctx: BuildContext) -> None:
    rep, q = ctx.report, ctx.quality
    s = rep.add_section("data-quality", "Data quality")
    fx, clock, m, ids = q["fix_references"], q["clock"], q["merges"], q["identities"]
    s.p(f"{m['n_merges_excluded']:,} merge commits are excluded from every measure (they "
        "carry no change of their own). A fix reference is a “Fixes:” line naming an "
        "earlier commit; only references that resolve to exactly one commit of this history "
        "give a defect.")
    limit = ctx.options.unresolved_share_limit
    share = fx["share_not_resolved"]
    rows = [{"what": f"status: {k}", "count": v,
             "share": v / fx["n_references"] if fx["n_references"] else None}
            for k, v in sorted(fx["by_status"].items())]
    rows += [{"what": "written outside the final trailer block",
              "count": fx["n_outside_trailer_block"],
              "share": fx["n_outside_trailer_block"] / fx["n_references"]
              if fx["n_references"] else None},
             {"what": "cited subject differs from the commit's subject",
              "count": fx["n_subject_mismatch"], "share": None},
             {"what": "reference lines that could not be parsed",
              "count": fx["n_unparsed"], "share": None}]
    rep.add_table(s, Table(
        "fix-references", "Fix references by resolution status.",
        [("what", "Fix references"), ("count", "Count"), ("share", "Share (%)")],
        pd.DataFrame(rows, columns=["what", "count", "share"]),
        note=(f"{fx['n_references']:,} references in {fx['n_fix_commits']:,} commits. "
              f"Every defect figure is flagged when more than {limit:.0%} of references are "
              "unresolved or ambiguous"
              + ("" if share is None else f"; here {share:.1%}") + ".")))
    _unresolved_table(ctx, s)
    rows = [
        {"check": f"author date later than committer date by more than "
                  f"{clock['skew_tolerance_hours']:g} h", "count": clock["n_author_after_committer"]},
        {"check": f"committed more than {clock['late_apply_days']:g} days after authoring",
         "count": clock["n_applied_late"]},
        {"check": "fix dated before the commit it fixes (author dates)",
         "count": clock["n_fix_before_introducer"]},
        {"check": "dated before 1990 (author or committer date)",
         "count": clock["n_before_1990"]},
        {"check": "dated after the store's last mining run ended (in the future)",
         "count": clock["n_after_mining"]},
        {"check": "date git could not read (stored without it)",
         "count": clock["n_unreadable_date"]},
    ]
    rep.add_table(s, Table("date-checks", "Date consistency.", [("check", "Check"),
                                                                 ("count", "Commits")],
                           pd.DataFrame(rows),
                           note=f"Of {clock['n_commits']:,} non-merge commits. Lifetimes use "
                                "committer dates; late-applied patches make author-date "
                                "lifetimes longer."))
    mapping = ids["subsystem_mapping"] or "not recorded"
    s.p(f"People are identified by name and e-mail address: "
        f"{ids['n_identities']:,} distinct pairs, {ids['n_names']:,} names and "
        f"{ids['n_emails']:,} e-mail addresses; {ids['n_names_with_several_emails']:,} names "
        f"appear with several addresses and {ids['n_emails_with_several_names']:,} addresses "
        f"with several names. {_identity_words(ids['identity_mapping'])} “Independent "
        "review” compares the reviewer's address with the author's, so a person reviewing "
        "their own change under an unmapped second address still counts as independent; "
        "names in trailers are taken as written. "
        f"Subsystems come from the mapping “{mapping}”"
        + (f" ({ids['subsystem_mapping_source']})" if ids["subsystem_mapping_source"] else "")
        + f"; {ids['n_commits_without_subsystem']:,} commits touch no mapped subsystem.")
    fu = q["first_use"]
    s.p(f"The first “Fixes:” reference appears on {date_text(fu['first_fixes'])} and the "
        f"first review trailer on {date_text(fu['first_review'])}. Before a trailer is in "
        "use, its absence says nothing about the process; the figure below shows how its use "
        "grew.")
    adoption_figure(ctx, s)


def adoption_figure(ctx: BuildContext, s: Any) -> None:
    """Share of commits carrying a Fixes: line, and a review trailer, per period."""
    from procmetrics.analyse.measures.metrics import ALL

    if ctx.metrics is None:
        return
    t = ctx.metrics.table
    rows = t[(t["subsystem"] == ALL) & (t["metric"] == "fixes_tag_adoption")]
    rows = rows.reset_index(drop=True)
    n = int(t[(t["subsystem"] == ALL) & (t["metric"] == "fixes_tag_adoption")]["n"].sum())
    adoption = [c for c in ctx.metrics.caveats if c.code == "tag_adoption_rising"]
    fig = Figure(
        "trailer-adoption", "Use of the Fixes: trailer over time",
        f"Share of non-merge commits per {ctx.options.period} carrying at least one Fixes: "
        "reference, resolved or not (review trailers: see the review coverage series)",
        n=n, method="share of commits per period", interval=f"{ctx.options.level:.0%} Wilson interval",
        data=rows, kinds=("history",),
        values={"first_use": ctx.quality["first_use"],
                "adoption_rising": [c.to_dict() for c in adoption]},
        png=plots.adoption_png(ctx, rows))
    ctx.add_figure(s, fig, result=adoption, min_n=None)


#: at most this many unresolved references are listed by name
MAX_LISTED = 15


def _unresolved_table(ctx: BuildContext, s: Any) -> None:
    """List (some of) the fix references that name no single commit, with their text."""
    fl_ = ctx.data["fix_links"]
    bad = fl_[fl_["status"].isin(["unresolved", "ambiguous"])]
    if bad.empty:
        return
    c = ctx.data["commits"][["hash", "subject"]]
    rows = bad.merge(c, left_on="fix_hash", right_on="hash", how="left")
    rows = rows.sort_values(["fix_committer_date", "fix_hash", "position"]).head(MAX_LISTED)
    out = pd.DataFrame({"fix": rows["fix_hash"].astype(str).str[:12],
                        "subject": rows["subject"].fillna(""),
                        "reference": rows["raw_text"].fillna(""),
                        "status": rows["status"]})
    ctx.report.add_table(s, Table(
        "unresolved-references", "Fix references that name no single commit of this history"
        + (f" (first {MAX_LISTED} of {len(bad)})" if len(bad) > MAX_LISTED else "") + ".",
        [("fix", "Fixing commit"), ("subject", "Its subject"),
         ("reference", "Reference as written"), ("status", "Status")], out,
        note="Text as written in the repository. Typical causes: a hash of a commit amended "
             "before merging, a commit of another project, a typing error, or a shallow clone."))


def _identity_words(mapping: str | None) -> str:
    """Plain words for the identity mapping git applied while mining."""
    if mapping is None:
        return "Whether a .mailmap was applied was not recorded by this store's mining run."
    if mapping == "none":
        return "The repository has no .mailmap, so no identities were merged."
    return (f"Author and committer identities were merged by the repository's own .mailmap "
            f"({mapping.split('@', 1)[-1][:12]}), as git itself does.")

