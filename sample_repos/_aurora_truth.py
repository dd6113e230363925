"""Ground truth of a generated aurora-fw history, as a JSON-ready dict (schema in README.md)."""
from __future__ import annotations

import math
import statistics

from _aurora_data import PERSON, STABLE_ADDRESS, SUB, SUBSYSTEMS
from _aurora_model import (CHANGE_DATE, END, FIX_KINDS, FIXES_ADOPTION, LIFETIME, MERGE_SHARE,
                           P_DEFECT, P_LATE_APPLIED, P_REVIEW, P_SIGNOFF, P_STABLE, P_TESTED,
                           PROJECT, START, DAY, day_of, iso)

SCHEMA_VERSION = 1
PERIODS = ("before", "after")


def _share(a: int, n: int) -> float | None:
    return round(a / n, 6) if n else None


def _median(xs: list[float]) -> float | None:
    return round(statistics.median(xs), 4) if xs else None


def build_truth(h, marks: dict[int, str], *, head: str, seed: int, requested: int) -> dict:
    ev = h.events
    sha = lambda e: marks[e.mark]  # noqa: E731
    by_period = {p: [e for e in ev if e.period == p] for p in PERIODS}

    review = {p: {"commits": len(es), "reviewed": sum(e.reviewed for e in es),
                  "share": _share(sum(e.reviewed for e in es), len(es)),
                  "tested": sum(bool(e.tester) for e in es)} for p, es in by_period.items()}

    fix_ratio = {}
    for p, es in by_period.items():
        n = len(es)
        fixes = sum(e.kind == "fix" for e in es)
        with_line = sum(e.fix_ref != "none" for e in es)
        fix_ratio[p] = {"commits": n, "defect_fix_commits": fixes,
                        "commits_with_fixes_line": with_line,
                        "commits_with_fixes_trailer": sum(e.fix_ref == "trailer" for e in es),
                        "defects_introduced": sum(e.defect is not None for e in es),
                        "share_defect_fix": _share(fixes, n),
                        "share_with_fixes_line": _share(with_line, n),
                        "share_introducing": _share(sum(e.defect is not None for e in es), n)}

    defects, lifetime_real = [], {}
    for p in PERIODS:
        ds = [d for d in h.defects if d.intro.period == p]
        fixed = [d for d in ds if d.fix is not None]
        lifetime_real[p] = {
            "introduced": len(ds), "fixed": len(fixed), "unfixed": len(ds) - len(fixed),
            "fixed_with_fixes_line": sum(d.fix.fix_ref != "none" for d in fixed),
            "median_complete_days": _median([d.lifetime_days for d in ds]),
            "median_observed_days": _median([(d.fix.t - d.intro.t) / DAY for d in fixed])}
    for d in sorted(h.defects, key=lambda d: (d.intro.t, d.id)):
        f = d.fix
        defects.append({
            "introducer": sha(d.intro), "subsystem": SUB[d.intro.sub].title,
            "period": d.intro.period, "introduced_at": iso(d.intro.t),
            "lifetime_days": round(d.lifetime_days, 6),
            "fix": sha(f) if f else None, "fixed_at": iso(f.t) if f else None,
            "observed_lifetime_days": round((f.t - d.intro.t) / DAY, 6) if f else None,
            "fixes_line": f.fix_ref if f else None, "stable_request": bool(f and f.stable)})

    messy = []
    for e in ev:
        for kind in e.messy:
            item = {"kind": kind, "commit": sha(e)}
            if kind in FIX_KINDS:
                item["lines"] = list(e.fix_lines)
                item["in_trailer_block"] = e.fix_ref == "trailer"
                item["introducers"] = [sha(x) for x in (e.second, e.fixes.intro) if x]
            elif kind == "odd_key_spelling":
                item["key"] = e.odd_key[1]
            else:
                item["author_date"], item["committer_date"] = iso(e.author_t), iso(e.t)
            messy.append(item)
        if e.kind == "unknown_fix":
            messy.append({"kind": "unknown_target", "commit": sha(e), "lines": e.fix_lines,
                          "in_trailer_block": True, "missing_hash": e.unknown_hash})
        if e.kind == "revert":
            messy.append({"kind": "revert", "commit": sha(e), "reverted": sha(e.target)})
        if e.kind == "html":
            messy.append({"kind": "html_in_subject", "commit": sha(e), "subject": e.subject})
    ylva = next(e for e in ev if e.author == "ylva")
    messy.append({"kind": "non_ascii_author", "commit": sha(ylva), "name": PERSON["ylva"].name})
    kaito = PERSON["kaito"]
    old = next(e for e in ev if e.author == "kaito" and day_of(e.author_t) < kaito.email_switch)
    new = next(e for e in ev if e.author == "kaito" and day_of(e.author_t) >= kaito.email_switch)
    for e, email in ((old, kaito.email), (new, kaito.new_email)):
        messy.append({"kind": "mailmap_identity", "commit": sha(e), "email": email,
                      "canonical": f"{kaito.name} <{kaito.new_email}>"})

    authors = {PERSON[e.author].email_at(day_of(e.author_t)) for e in ev}
    authors |= {PERSON[m.committer].email_at(day_of(m.t)) for m in h.merges}
    canonical = {kaito.new_email if a == kaito.email else a for a in authors}
    return {
        "schema_version": SCHEMA_VERSION,
        "project": PROJECT,
        "seed": seed,
        "requested_commits": requested,
        "head": head,
        "history": {"branch": "main", "first_commit_at": iso(ev[0].t),
                    "last_commit_at": iso(max(ev[-1].t, h.merges[-1].t)),
                    "commits": len(ev) + len(h.merges), "merges": len(h.merges),
                    "non_merge_commits": len(ev), "merge_share_target": MERGE_SHARE,
                    "author_emails": len(authors), "author_emails_after_mailmap": len(canonical),
                    "clock": "committer date, UTC"},
        "change": {"date": CHANGE_DATE.isoformat(),
                   "description": "review becomes mandatory; defects introduced from this "
                                  "date are rarer and live half as long",
                   "commit": sha(next(e for e in ev if e.kind == "policy")),
                   "periods": {"before": f"committer date < {CHANGE_DATE.isoformat()}",
                               "after": f"committer date >= {CHANGE_DATE.isoformat()}"}},
        "review": {"definition": "non-merge commit with at least one Reviewed-by or Acked-by "
                                 "trailer (any key spelling) from someone other than the author; "
                                 "Tested-by only appears together with one of them",
                   "p_before": P_REVIEW["before"], "p_after": P_REVIEW["after"],
                   "p_tested_given_reviewed": dict(P_TESTED),
                   "excluded": "the initial import commit never carries review trailers",
                   "realised": review},
        "fix_ratio": {"definition": "share of non-merge commits (by committer-date period) "
                                    "that fix a planted defect",
                      "p_defect_before": P_DEFECT["before"], "p_defect_after": P_DEFECT["after"],
                      "p_defect_applies_to": "each ordinary commit, times its subsystem factor",
                      "subsystem_defect_factor": {s.title: s.defect_factor for s in SUBSYSTEMS},
                      "realised": fix_ratio},
        "fixes_trailer_adoption": [{"from": d.isoformat(), "p": p} for d, p in FIXES_ADOPTION],
        "lifetime": {"family": "lognormal", "unit": "days",
                     "clock": "fix committer date minus introducer committer date",
                     "parameters": {p: {"mu": round(math.log(LIFETIME[p][0]), 6),
                                        "sigma": LIFETIME[p][1], "median_days": LIFETIME[p][0],
                                        "mean_days": round(LIFETIME[p][0] * math.exp(
                                            LIFETIME[p][1] ** 2 / 2), 4)} for p in PERIODS},
                     "period_of_defect": "committer date of the introducing commit",
                     "truncation": f"a defect whose fix would fall after {iso(END)} is never "
                                   "fixed in the history (right-censored)",
                     "realised": lifetime_real},
        "defects": {"introduced": len(h.defects),
                    "fixed": sum(d.fix is not None for d in h.defects),
                    "unfixed": sum(d.fix is None for d in h.defects),
                    "list": defects},
        "other_rates": {"p_signoff": P_SIGNOFF, "p_stable_request": P_STABLE,
                        "p_late_applied": P_LATE_APPLIED, "history_start": iso(START)},
        "stable_requests": {"address": STABLE_ADDRESS,
                            "commits": [sha(e) for e in ev if e.stable]},
        "messy": messy,
        "tags": [{"name": t.name, "commit": marks[t.mark], "date": iso(t.t), "annotated": True}
                 for t in h.tags],
        "binary_files": sorted(p for s in SUBSYSTEMS for p in s.files
                               if p.endswith((".png", ".der", ".bin"))),
        "subsystems": [{"title": s.title, "home": s.home,
                        "maintainers": [PERSON[m].name for m in s.maintainers]}
                       for s in SUBSYSTEMS],
        "mailmap": {"name": kaito.name, "emails": [kaito.email, kaito.new_email],
                    "canonical_email": kaito.new_email},
    }
