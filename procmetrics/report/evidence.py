"""The evidence pack: the exact rows behind every claim, as CSV under ``evidence/<claim id>/``.

For each claim the rows are selected the way its claim kind selects them
(:mod:`procmetrics.claims`): the commits counted (with the trailers that made
them reviewed, or the ``Fixes:`` references that made them fixes), the periods
the model was fitted on, the fix links with their resolution, the defects with
the reason each one was left out. A row column ``counted`` marks the rows that
make up the claim's n; :func:`claim_pack` checks that their number equals the
n the verdict states, and the pack says so either way (``reproduces_n``).

``evidence/commits.csv`` lists every commit of the store with what the headline
figures counted it as and, for commits left out of a denominator (merges,
commits without a date or line count), why; so "n = 3,880 of 4,000 commits"
can be checked row by row.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.errors import ProcmetricsError
from procmetrics.store.frames import sort_key

SHARE_KINDS = ("rose_after", "fell_after", "review_coverage_rose", "at_least", "at_most")
TREND_KINDS = ("declining", "rising", "fix_ratio_declining")
EVIDENCE_DIR = "evidence"


@dataclass
class ClaimPack:
    """The files of one claim's evidence (name -> rows) and what they show."""

    claim_id: str
    files: dict[str, pd.DataFrame] = field(default_factory=dict)
    described: dict[str, str] = field(default_factory=dict)
    counted: int | None = None
    claim_n: int | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def reproduces_n(self) -> bool | None:
        if self.counted is None or self.claim_n is None:
            return None
        return self.counted == self.claim_n

    def add(self, name: str, rows: pd.DataFrame, what: str) -> None:
        self.files[name] = rows.reset_index(drop=True)
        self.described[name] = what

    def to_dict(self) -> dict[str, Any]:
        base = f"{EVIDENCE_DIR}/{self.claim_id}/"
        return {"folder": base,
                "files": [{"path": base + n, "rows": int(len(df)), "what": self.described[n]}
                          for n, df in self.files.items()],
                "counted_rows": self.counted, "claim_n": self.claim_n,
                "reproduces_n": self.reproduces_n, "notes": list(self.notes)}


# ------------------------------------------------------------------ row makers
def review_trailers(trailers: pd.DataFrame, keys: tuple[str, ...]) -> pd.Series:
    """hash -> "Reviewed-by: A <a@x>; Acked-by: B" (the trailers that count as review)."""
    t = trailers[trailers["key"].astype(str).str.casefold().isin({k.casefold() for k in keys})]
    if t.empty:
        return pd.Series(dtype=object)
    text = t["key"].astype(str) + ": " + t["value"].astype(str)
    return joined_by_key(text, t["hash"], "; ")


def fix_references(fix_links: pd.DataFrame) -> pd.Series:
    """hash -> "abc123456789 resolved; def0 unresolved" (each Fixes: reference, resolution)."""
    if fix_links.empty:
        return pd.Series(dtype=object)
    text = fix_links["ref_hash"].astype(str) + " " + fix_links["status"].astype(str)
    return joined_by_key(text, fix_links["fix_hash"], "; ")


def before_after(dates: pd.Series, at: Any) -> np.ndarray:
    """"after" for dates on or after ``at``, else "before" (missing dates too), as an
    object array holding the two strings themselves: numpy text, or a string assigned
    through a mask, becomes a new string per row (60 MB at a million commits)."""
    return np.array(["before", "after"], dtype=object)[(dates >= at).to_numpy(bool)
                                                         .astype(np.intp)]


def joined_by_key(text: pd.Series, key: pd.Series, sep: str) -> pd.Series:
    """``text.groupby(key).agg(sep.join)`` without a Python call per group: keys in
    sorted order (missing keys dropped), each key's texts in their order, joined."""
    keep = key.notna().to_numpy(bool)
    k, v = key.to_numpy(object)[keep], text.to_numpy(object)[keep]
    # a stable sort keeps each key's order; keys by code point (sort_key), not as objects
    order = np.argsort(sort_key(pd.Series(k)), kind="stable")
    k, v = k[order], v[order]
    starts = np.flatnonzero(np.r_[True, k[1:] != k[:-1]]) if len(k) else np.array([], int)
    ends = np.r_[starts[1:], len(k)]
    return pd.Series([sep.join(v[a:b]) for a, b in zip(starts.tolist(), ends.tolist())],
                     index=pd.Index(k[starts], name=key.name, dtype=object), dtype=object,
                     name=text.name)


def _commit_rows(f: pd.DataFrame, cctx: Any, metric: str, keys: tuple[str, ...]
                 ) -> pd.DataFrame:
    from procmetrics.analyse.measures.periods import assign_periods

    labels, _ = assign_periods(f["date"], cctx.period, cctx.tags)
    rows = pd.DataFrame({"hash": f["hash"].to_numpy(), "date": f["date"].to_numpy(),
                         "period": labels.to_numpy(), "counted": True,
                         "in_numerator": f["hit"].to_numpy(bool)})
    if "fix" in metric or "stable" in metric:
        why = fix_references(cctx.fix_links)
        rows["fixes_references"] = rows["hash"].map(why).fillna("")
    else:
        why = review_trailers(cctx.trailers, keys)
        rows["review_trailers"] = rows["hash"].map(why).fillna("")
    return rows


def _left_out(pack: ClaimPack, cctx: Any, kept: int) -> None:
    """Say which commits of the store the claim's denominator leaves out, and why."""
    c = cctx.commits
    total = int(c["hash"].nunique())
    merges = int(c["is_merge"].astype("boolean").fillna(False).astype(bool).sum())
    other = total - kept - merges
    parts = [f"{merges:,} merge commits (the measures count non-merge commits)"] if merges \
        else []
    if other > 0:
        parts.append(f"{other:,} commits outside the claim's window, subsystem or "
                     "denominator (e.g. only commits with a Fixes: reference)")
    if parts:
        pack.notes.append(f"n = {kept:,} of the {total:,} commits in the store; left out: "
                          + "; ".join(parts))


def _shares(pack: ClaimPack, claim: Any, cctx: Any) -> None:
    from procmetrics.analyse.measures.vocabulary import DEFAULT_REVIEW_KEYS
    from procmetrics.claims import base as cl
    from procmetrics.claims.common import per_period, share_flags, window

    p = claim.params
    metric = p.get("metric", "review_coverage")
    f = share_flags(cctx, metric, p.get("subsystem"))
    split = None
    if "date" in p:
        split = cl.resolve_date(p["date"], cctx, "date")
    else:
        after, before = window(cctx, p)
        if after is not None:
            f = f[f["date"] >= after]
        if before is not None:
            f = f[f["date"] < before]
    rows = _commit_rows(f, cctx, metric, DEFAULT_REVIEW_KEYS)
    if split is not None:
        rows.insert(3, "side", before_after(f["date"], split))
    pack.add("commits.csv", rows, f"the {len(rows):,} commits in the {metric.replace('_', ' ')}"
             " denominator; in_numerator marks those counted in the share, with the "
             "trailers or Fixes: references that made them so")
    pack.counted = int(rows["counted"].sum())
    _left_out(pack, cctx, pack.counted)
    pack.add("periods.csv", per_period(f, cctx, split).rename(
        columns={"x": "in_numerator", "n": "commits", "t": "first_commit"}),
        f"the {cctx.period}s the model was fitted on: commits and numerator per period"
        + (" and side of the date" if split is not None else ""))


def _trend(pack: ClaimPack, claim: Any, cctx: Any) -> None:
    from procmetrics.analyse.measures.vocabulary import DEFAULT_REVIEW_KEYS
    from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags
    from procmetrics.claims.common import flag_column, per_period, subsystem_commits, window

    p = claim.params
    metric = p.get("metric", "fix_ratio")
    after, before = window(cctx, p)
    c = subsystem_commits(cctx, p.get("subsystem"))
    if after is not None:
        c = c[c["committer_date"] >= after]
    if before is not None:
        c = c[c["committer_date"] < before]
    f = commit_flags(c, cctx.trailers, MetricConfig(period=cctx.period))
    num, den = flag_column(metric)
    if den is not None:
        f = f[f[den]]
    f = f[f["date"].notna()].assign(hit=lambda x: x[num].astype(bool))
    rows = _commit_rows(f, cctx, metric, DEFAULT_REVIEW_KEYS)
    pack.add("commits.csv", rows, f"the {len(rows):,} commits of the window; in_numerator "
             f"marks those counted in {metric.replace('_', ' ')}")
    pack.counted = int(rows["counted"].sum())
    _left_out(pack, cctx, pack.counted)
    pack.add("periods.csv", per_period(f, cctx).rename(
        columns={"x": "in_numerator", "n": "commits", "t": "first_commit"}),
        f"the {cctx.period}s the trend was fitted on")


def _defect_table(cctx: Any, kind: str) -> Any:
    """The same call the claim's verdict used (one computation per quantity)."""
    from procmetrics.claims.lifetimes import defect_table

    return defect_table(kind, cctx)


def _defect_rows(d: pd.DataFrame) -> pd.DataFrame:
    cols = [c for c in ("introducer_hash", "fix_hash", "intro_date", "fix_date",
                        "lifetime_days", "lifetime", "window", "subsystems", "negative")
            if c in d.columns]
    return d[cols].copy()


def _lifetimes(pack: ClaimPack, claim: Any, cctx: Any) -> None:
    from procmetrics.claims import base as cl
    from procmetrics.claims.common import window

    p = claim.params
    table = _defect_table(cctx, claim.kind)
    d = table.defects
    rows = _defect_rows(d)
    reason = pd.Series("", index=d.index, dtype=object)
    neg = d["negative"].astype(bool) | d["lifetime"].isna()
    reason[neg] = "fix dated before the introducer (negative lifetime) or no lifetime"
    sub = p.get("subsystem")
    if sub:
        out = ~d["subsystems"].astype(str).str.split(";").apply(lambda s: sub in s)
        reason[(reason == "") & out] = f"does not touch subsystem {sub}"
    if claim.kind == "median_lifetime_below":
        after, before = window(cctx, p)
        if after is not None:
            reason[(reason == "") & (d["intro_date"] < after)] = "introduced before the window"
        if before is not None:
            reason[(reason == "") & (d["intro_date"] >= before)] = "introduced after the window"
    else:
        date = cl.resolve_date(p["date"], cctx, "date")
        end = table.end_date
        horizon = float(p.get("horizon_days") or min(365.0, (end - date).days / 2))
        reason[(reason == "") & (d["window"] < horizon)] = (
            f"introduced less than the {horizon:.0f}-day horizon before the end of the history")
        reason[(reason == "") & (d["lifetime"] > horizon)] = (
            f"fixed after the {horizon:.0f}-day horizon")
        if claim.kind == "lifetimes_shortened_at":     # its local window, as the verdict
            from procmetrics.claims.lifetime_step import WINDOW_YEARS

            w = float(p.get("window_years") or WINDOW_YEARS)
            years = (d["intro_date"] - date).dt.total_seconds() / (365.25 * 86400)
            reason[(reason == "") & (years.abs() > w)] = (
                f"introduced more than {w:g} years from the date")
        rows.insert(2, "side", ["after" if t >= date else "before" for t in d["intro_date"]])
        pack.notes.append(f"common follow-up horizon {horizon:.0f} days, date {date:%Y-%m-%d}")
    rows["counted"] = (reason == "").to_numpy()
    rows["exclusion_reason"] = reason.to_numpy()
    pack.add("defects.csv", rows, "every defect with a resolved fix link; counted marks those "
             "in the estimate, exclusion_reason says why the others are not")
    pack.counted = int(rows["counted"].sum())
    _links(pack, cctx)


def _links(pack: ClaimPack, cctx: Any, hashes: pd.Series | None = None) -> None:
    fl = cctx.fix_links
    if hashes is not None:
        fl = fl[fl["fix_hash"].isin(hashes)]
    cols = [c for c in ("fix_hash", "ref_hash", "status", "introducer_hash",
                        "in_trailer_block", "fix_committer_date", "intro_committer_date")
            if c in fl.columns]
    pack.add("fix-links.csv", fl[cols], "the Fixes: references with their resolution "
             "(resolved: names one commit of this history; otherwise no defect is formed)")


def _growth(pack: ClaimPack, claim: Any, cctx: Any) -> None:
    """The fix events the claim counted, by the claim's own selection (one call), and
    every other commit with a resolved fix link with the reason it is not an event."""
    from procmetrics.claims.growth import claim_fix_events

    ft = claim_fix_events(claim, cctx)
    events = set(ft.events["fix_hash"].astype(str))
    h = cctx.history
    c = h[~h["is_merge"].astype("boolean").fillna(False).astype(bool)]
    # under a scope, the fixes of in-scope defects (the fix itself may touch anything)
    fixing = (c["n_resolved_fixes"].fillna(0) > 0) & c["hash"].isin(set(
        cctx.fix_links.loc[cctx.fix_links["status"].astype(str) == "resolved", "fix_hash"]))
    rows = c.loc[fixing, ["hash", "committer_date", "n_resolved_fixes"]].rename(
        columns={"committer_date": "date"})
    rows["counted"] = rows["hash"].astype(str).isin(events).to_numpy()
    origin = f"{ft.origin:%Y-%m-%d %H:%M}"
    rows["exclusion_reason"] = [
        "" if k else (f"at or before the origin {origin} (the start of observation is not an "
                      "event)" if d <= ft.origin else "after the end of the window"
                      if d > ft.end_date else "not the first fix of any defect it names")
        for k, d in zip(rows["counted"], rows["date"])]
    rows = rows.sort_values("date", kind="mergesort")
    pack.add("fixing-commits.csv", rows, "the commits with at least one resolved Fixes: "
             "link; counted marks the fix events of the growth model")
    pack.counted = int(rows["counted"].sum())
    _links(pack, cctx, rows["hash"])


def _carryover(pack: ClaimPack, claim: Any, cctx: Any) -> None:
    """Every upstream fix with its status; counted marks the population the claim's n is
    (carried, missing and - for the count of missing fixes - excluded)."""
    from procmetrics.claims import base as cl

    t = cctx.carryover
    if t is None:
        pack.notes.append("no upstream reference is mined for this tree: no rows")
        return
    pop = ["carried", "missing"] + (["excluded"] if claim.kind ==
                                    "no_missing_upstream_fix_older_than" else [])
    rows = t[["fix_hash", "fix_date", "status", "method", "tree_hash", "latency_days",
              "gap_days", "exclusion_reason"]].copy()
    rows["counted"] = rows["status"].isin(pop).to_numpy()
    if "date" in claim.params:
        date = cl.resolve_date(claim.params["date"], cctx, "date")
        rows["landed"] = ["from the date" if d >= date else "before the date"
                          for d in rows["fix_date"]]
    pack.add("upstream-fixes.csv", rows, "every upstream fix with its status; counted marks "
             "the fixes the claim is judged on (the others do not concern the tree, are in "
             "the shared history, or are not yet due)")
    pack.counted = int(rows["counted"].sum())


def claim_pack(claim: Any, cctx: Any, verdict: dict[str, Any]) -> ClaimPack:
    """The evidence rows of one claim (never raises for a data problem: says so instead)."""
    pack = ClaimPack(claim.id, claim_n=(verdict.get("evidence") or {}).get("n"))
    kind = claim.kind
    makers = {**{k: _shares for k in SHARE_KINDS}, **{k: _trend for k in TREND_KINDS},
              "median_lifetime_below": _lifetimes, "lifetimes_shorter_after": _lifetimes,
              "lifetimes_shortened_at": _lifetimes,
              "fix_rate_declining": _growth, "no_missing_upstream_fix_older_than": _carryover,
              "half_carried_within": _carryover, "carryover_faster_after": _carryover}
    maker = makers.get(kind)
    if maker is None:
        pack.notes.append("no rows: no commit data can support this kind of claim, so none "
                          "were used" if verdict.get("verdict") == "not_supportable" else
                          f"no evidence rows are defined for the claim kind {kind!r} yet")
        return pack
    from procmetrics.claims.base import Undecidable

    try:
        maker(pack, claim, cctx)
    except (Undecidable, ProcmetricsError, KeyError, ValueError) as exc:
        pack.notes.append(f"the rows could not be selected: {exc}")
    if pack.reproduces_n is False:
        pack.notes.append(f"the counted rows ({pack.counted:,}) differ from the claim's n "
                          f"({pack.claim_n:,}): the claim's method selects differently than "
                          "this evidence pack; read the rows with care")
    return pack


def commit_ledger(commits: pd.DataFrame, trailers: pd.DataFrame, fix_links: pd.DataFrame,
                  flags: pd.DataFrame) -> pd.DataFrame:
    """Every commit of the store with what each headline figure counted it as.

    ``flags`` is :func:`procmetrics.analyse.measures.metrics.commit_flags` of the commits.

    Each commit's flags row is found once (one hash lookup, shared by every flag column;
    a commit without one, such as a merge, gets missing values, as ``Series.map`` gives
    them), and the rows are ordered by date and hash with :func:`numpy.lexsort` over
    typed keys (dates as integers, missing last; hashes by code point): at a million
    commits the per-column ``map``, the ``Timestamp`` objects of the dates and pandas'
    sort over text cost most of the ledger.
    """
    from procmetrics.analyse.measures.vocabulary import DEFAULT_REVIEW_KEYS

    c = commits.drop_duplicates(subset=["hash"])
    merge = c["is_merge"].astype("boolean").fillna(False).to_numpy(bool)
    files = pd.to_numeric(c["n_files"], errors="coerce")
    hashes = c["hash"].to_numpy(object)
    out = pd.DataFrame({"hash": hashes, "date": c["committer_date"].reset_index(drop=True),
                        "merge": merge, "files_changed": files.to_numpy()})
    f = flags.drop_duplicates(subset=["hash"])
    at = pd.Index(f["hash"].to_numpy(object)).get_indexer(hashes)
    found = at >= 0
    has_date = f["date"].notna().to_numpy(bool)
    in_share = np.zeros(len(out), dtype=bool)
    in_share[found] = has_date[at[found]]
    out["in_share_denominators"] = in_share
    # texts picked by code from one object array: each row holds a shared string
    reasons = np.array(["", "merge commit (the measures count non-merge commits)",
                        "no committer date"], dtype=object)
    out["excluded_because"] = reasons[np.where(merge, 1, np.where(in_share, 0, 2))]
    for col, name in (("reviewed", "reviewed"), ("independent", "independent"),
                      ("n_reviewers", "n_reviewers"), ("fix", "fix_resolved"),
                      ("fix_ref", "any_fixes_reference"), ("churn", "lines_changed")):
        # Series.map's missing value and dtype for rows without flags (bool -> object,
        # int -> float; all float NaN when there are no flags at all)
        out[name] = (pd.NA if col not in f.columns else np.full(len(out), np.nan) if not len(f)
                     else pd.api.extensions.take(f[col].to_numpy(), at, allow_fill=True))
    no_lines = out["lines_changed"].isna().to_numpy(bool) & ~merge
    empty = out["files_changed"].fillna(-1).to_numpy() == 0
    notes = np.array(["", "no file changed (empty commit): left out of lines-changed figures",
                      "no line count (binary files only, or line counts not mined): left out "
                      "of lines-changed figures"], dtype=object)
    out["line_count_note"] = notes[np.where(no_lines, np.where(empty, 1, 2), 0)]
    out["review_trailers"] = out["hash"].map(review_trailers(trailers, DEFAULT_REVIEW_KEYS)
                                             ).fillna("")
    out["fixes_references"] = out["hash"].map(fix_references(fix_links)).fillna("")
    date = out["date"]
    missing = date.isna().to_numpy(bool)
    seconds = np.where(missing, 0, date.array.asi8)
    out = out.take(np.lexsort((sort_key(out["hash"]), seconds, missing)))
    out.index = pd.RangeIndex(len(out))     # not reset_index: that copies every column again
    return out


def denominator_note(n: int | None, ledger: pd.DataFrame, *, lines: bool = False,
                     rest_reason: str = "other commits") -> str:
    """Plain words for the commits a figure's n leaves out ("" when none are).

    ``ledger`` is :func:`commit_ledger`; ``lines`` for figures of lines changed,
    which also leave out commits without a line count (binary files only, or
    line counts not mined).
    """
    if n is None:
        return ""
    total = int(len(ledger))
    missing = total - int(n)
    if missing <= 0:
        return ""
    merges = int(ledger["merge"].sum())
    nodate = int((~ledger["merge"] & ~ledger["in_share_denominators"]).sum())
    noline = ledger["in_share_denominators"] & ledger["lines_changed"].isna()
    empty = noline & (ledger["files_changed"].fillna(-1) == 0)
    n_empty = int(empty.sum()) if lines else 0
    nolines = int((noline & ~empty).sum()) if lines else 0
    parts = []
    if merges:
        parts.append(f"{merges:,} merge commits (the measures count non-merge commits)")
    if nodate:
        parts.append(f"{nodate:,} commits without a committer date")
    if n_empty:
        parts.append(f"{n_empty:,} empty commits (no file changed, so no line count; they "
                     "still count as commits, e.g. as unreviewed in review coverage)")
    if nolines:
        parts.append(f"{nolines:,} commits without a line count (binary files only, or line "
                     "counts not mined)")
    rest = missing - merges - nodate - n_empty - nolines
    if rest > 0:
        parts.append(f"{rest:,} {rest_reason}")
    return (f"n = {int(n):,} of {total:,} commits in the store; left out: "
            + "; ".join(parts) + ". Every commit and why it was left out: "
            "evidence/commits.csv.")
