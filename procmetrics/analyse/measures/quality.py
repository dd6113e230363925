"""Data-quality bookkeeping for the report: counts and shares, no modelling.

Each function takes tidy tables and returns a small dict (or a tidy frame)
that the report prints and the JSON carries. The thresholds used are module
constants so the report can state them.
"""
from __future__ import annotations

import json
from typing import Any, Mapping

import numpy as np
import pandas as pd

#: the tidy tables of one repository (a StoreData or any mapping of table name to frame)
StoreData = Mapping[str, pd.DataFrame]

#: author date later than committer date by more than this counts as clock skew
SKEW_TOLERANCE = pd.Timedelta(hours=1)
#: dates before this are implausible for a version-controlled change (common practice)
EARLIEST_PLAUSIBLE = pd.Timestamp("1990-01-01", tz="UTC")
#: committer date later than author date by more than this: applied late
LATE_APPLY = pd.Timedelta(days=30)
#: trailer keys that count as evidence of review
REVIEW_KEYS = ("reviewed-by", "acked-by")


def non_merge(commits: pd.DataFrame) -> pd.DataFrame:
    return commits[~commits["is_merge"].fillna(False).astype(bool)]


def fix_reference_quality(data: StoreData) -> dict[str, Any]:
    """Fix references by resolution status, and where they sit in the message."""
    fl = data["fix_links"]
    counts = {str(k): int(v) for k, v in fl["status"].value_counts().sort_index().items()}
    total = int(len(fl))
    resolved = counts.get("resolved", 0)
    unresolved = counts.get("unresolved", 0)
    ambiguous = counts.get("ambiguous", 0)
    outside = int((~fl["in_trailer_block"].fillna(True).astype(bool)).sum())
    mismatch = int((fl["subject_match"] == False).sum())  # noqa: E712 - nullable boolean
    return {
        "n_references": total,
        "by_status": counts,
        "n_resolved": resolved,
        "n_unresolved": unresolved,
        "n_ambiguous": ambiguous,
        "share_not_resolved": (unresolved + ambiguous) / total if total else None,
        "n_outside_trailer_block": outside,
        "n_subject_mismatch": mismatch,
        "n_unparsed": int(len(data["unparsed_references"])),
        "n_fix_commits": int(fl["fix_hash"].nunique()),
    }


def clock_skew(data: StoreData) -> dict[str, Any]:
    """Commits whose dates are inconsistent, and fix links running backwards in time."""
    c = non_merge(data["commits"])
    ahead = c["author_date"] - c["committer_date"] > SKEW_TOLERANCE
    late = c["committer_date"] - c["author_date"] > LATE_APPLY
    fl = data["fix_links"]
    res = fl[fl["status"] == "resolved"]
    backwards = int((res["fix_author_date"] < res["intro_author_date"]).sum())
    dates = c[["author_date", "committer_date"]]
    runs = data["mining_runs"]
    mined_at = runs["ended"].max() if len(runs) else pd.NaT
    early = (dates < EARLIEST_PLAUSIBLE).any(axis=1)
    future = ((dates > mined_at).any(axis=1) if pd.notna(mined_at)
              else pd.Series(False, index=c.index))
    return {
        "n_before_1990": int(early.sum()),
        "n_after_mining": int(future.sum()),
        "n_unreadable_date": int(dates.isna().any(axis=1).sum()),
        "n_commits": int(len(c)),
        "n_author_after_committer": int(ahead.sum()),
        "n_applied_late": int(late.sum()),
        "n_fix_before_introducer": backwards,
        "skew_tolerance_hours": SKEW_TOLERANCE / pd.Timedelta(hours=1),
        "late_apply_days": LATE_APPLY / pd.Timedelta(days=1),
    }


def merges(data: StoreData) -> dict[str, Any]:
    c = data["commits"]
    m = int(c["is_merge"].fillna(False).astype(bool).sum())
    return {"n_commits": int(len(c)), "n_merges_excluded": m, "n_analysed": int(len(c) - m)}


def identities(data: StoreData) -> dict[str, Any]:
    """How people are identified: names per e-mail and e-mails per name."""
    c = non_merge(data["commits"])
    pairs = c[["author_name", "author_email"]].drop_duplicates()
    emails_per_name = pairs.groupby("author_name")["author_email"].nunique()
    names_per_email = pairs.groupby("author_email")["author_name"].nunique()
    repos = data["repositories"]
    row = repos.iloc[0] if len(repos) else None
    subs = data["commit_subsystems"]
    with_sub = subs["hash"].nunique() if len(subs) else 0
    runs = data["mining_runs"]
    done = runs[runs["status"] == "complete"]
    mailmap = None
    if len(done):
        env = json.loads(done.iloc[-1]["versions_json"] or "{}")
        mailmap = env.get("identity_mapping")       # None: mined before this was recorded
    return {
        "identity_mapping": mailmap,
        "n_identities": int(len(pairs)),
        "n_names": int(pairs["author_name"].nunique()),
        "n_emails": int(pairs["author_email"].nunique()),
        "n_names_with_several_emails": int((emails_per_name > 1).sum()),
        "n_emails_with_several_names": int((names_per_email > 1).sum()),
        "subsystem_mapping": None if row is None else row["mapping_kind"],
        "subsystem_mapping_source": None if row is None else row["mapping_source"],
        "n_commits_without_subsystem": int(len(c) - c["hash"].isin(subs["hash"]).sum())
        if len(c) else 0,
        "n_commits_with_subsystem": int(with_sub),
    }


def period_labels(dates: pd.Series, period: str) -> pd.Series:
    """Calendar period of each (UTC) date: ``2024-03``, ``2024Q1`` or ``2024``."""
    naive = dates.dt.tz_convert("UTC").dt.tz_localize(None)
    freq = {"month": "M", "quarter": "Q", "year": "Y"}.get(period, "Q")
    return naive.dt.to_period(freq).astype(str)


def trailer_adoption(data: StoreData, period: str) -> pd.DataFrame:
    """Per period: non-merge commits, and the share carrying a Fixes: line or a review trailer.

    Columns: ``period, period_start, n_commits, n_with_fixes, share_with_fixes,
    n_with_review, share_with_review``. ``release`` falls back to quarters here.
    """
    c = non_merge(data["commits"])
    cols = ["period", "period_start", "n_commits", "n_with_fixes", "share_with_fixes",
            "n_with_review", "share_with_review"]
    if c.empty:
        return pd.DataFrame(columns=cols)
    tr = data["trailers"]
    reviewed = set(tr.loc[tr["key"].str.lower().isin(REVIEW_KEYS), "hash"])
    per = "quarter" if period == "release" else period
    df = pd.DataFrame({
        "period": period_labels(c["committer_date"], per),
        "fixes": c["n_fix_refs"].to_numpy() > 0,
        "review": c["hash"].isin(reviewed).to_numpy(),
        "date": c["committer_date"],
    })
    g = df.groupby("period", sort=True)
    out = pd.DataFrame({
        "period_start": g["date"].min().dt.strftime("%Y-%m-%d"),
        "n_commits": g.size(),
        "n_with_fixes": g["fixes"].sum().astype(int),
        "n_with_review": g["review"].sum().astype(int),
    }).reset_index()
    out["share_with_fixes"] = out["n_with_fixes"] / out["n_commits"]
    out["share_with_review"] = out["n_with_review"] / out["n_commits"]
    return out[cols]


def first_use(data: StoreData) -> dict[str, Any]:
    """Date of the first Fixes: reference and of the first review trailer."""
    c = non_merge(data["commits"])
    tr = data["trailers"]
    out: dict[str, Any] = {"first_commit": None, "last_commit": None,
                           "first_fixes": None, "first_review": None}
    if c.empty:
        return out
    out["first_commit"] = c["committer_date"].min().isoformat()
    out["last_commit"] = c["committer_date"].max().isoformat()
    fx = c.loc[c["n_fix_refs"] > 0, "committer_date"]
    if len(fx):
        out["first_fixes"] = fx.min().isoformat()
    rv = c.loc[c["hash"].isin(tr.loc[tr["key"].str.lower().isin(REVIEW_KEYS), "hash"]),
               "committer_date"]
    if len(rv):
        out["first_review"] = rv.min().isoformat()
    return out


def history_state(data: StoreData) -> dict[str, Any]:
    """Shallow clone, rewritten history and incomplete runs, from the run records."""
    runs = data["mining_runs"]
    repos = data["repositories"]
    shallow = bool(repos["is_shallow"].fillna(False).any()) or \
        bool(runs["is_shallow"].fillna(False).any())
    complete = runs[runs["status"] == "complete"].sort_values("run_id")
    rewritten: list[str] = []
    prev_head = None
    for _, r in complete.iterrows():
        msg = str(r["message"] or "")
        if "rewrit" in msg.lower():
            rewritten.append(f"run {int(r['run_id'])}: {msg}")
        elif prev_head and r["base_hash"] and r["base_hash"] != prev_head:
            rewritten.append(f"run {int(r['run_id'])} continued from {str(r['base_hash'])[:12]}, "
                             f"not from the previous tip {str(prev_head)[:12]}")
        prev_head = r["head_hash"]
    options: list[dict[str, Any]] = []
    for _, r in complete.iterrows():
        try:
            options.append(json.loads(r["options_json"] or "{}"))
        except (TypeError, ValueError):
            options.append({"unreadable": str(r["options_json"])})
    partial = bool(complete["message"].fillna("").astype(str)
                   .str.contains("partial clone", regex=False).any())
    lacking = [f"run {int(r['run_id'])}: {m}" for _, r in complete.iterrows()
               for m in str(r["message"] or "").split("; ") if m.startswith("line counts missing")]
    return {
        "is_shallow": shallow,
        "is_partial_clone": partial,
        "line_counts_missing": lacking,
        "rewritten": rewritten,
        "n_runs": int(len(runs)),
        "n_failed_runs": int((runs["status"] == "failed").sum()),
        "n_incomplete_runs": int((~runs["status"].isin(["complete", "failed"])).sum()),
        "mining_options": options[-1] if options else {},
    }


def summary(data: StoreData, period: str) -> dict[str, Any]:
    """All data-quality figures in one JSON-ready dict."""
    adoption = trailer_adoption(data, period)
    return {
        "fix_references": fix_reference_quality(data),
        "clock": clock_skew(data),
        "merges": merges(data),
        "identities": identities(data),
        "first_use": first_use(data),
        "history": history_state(data),
        "n_periods": int(len(adoption)),
        "adoption_rows": int(np.asarray(adoption["n_commits"]).sum()) if len(adoption) else 0,
    }
