"""Which upstream fixes does the tree carry, which does it lack.

An upstream fix is an upstream commit with a resolved ``Fixes:`` reference. It
concerns the tree when the tree carries one of its targets (the code the fix
repairs ships in the tree); it is due when it landed upstream (committer date)
on or before the tree's tip. Each upstream fix gets one status:

* ``shared``       - the tree holds the fix commit itself (shared history);
* ``carried``      - the tree carries it by a backport line or patch id;
* ``missing``      - due, concerns the tree, not carried: the list to act on;
* ``excluded``     - as ``missing`` but named in the exclusions file (with its reason);
  listed apart, never dropped;
* ``not-mirrored`` - the tree mirrors part of the upstream (a path map) and the fix
  touches none of the mirrored paths;
* ``not-relevant`` - no target of the fix is carried by the tree;
* ``not-due``      - landed upstream after the tree's tip.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from procmetrics.errors import ConfigError

CARRYOVER_COLUMNS = ["fix_hash", "fix_date", "subject", "subsystem", "target_hash",
                     "target_method", "status", "method", "tree_hash", "arrival_date",
                     "latency_days", "gap_days", "ambiguous", "exclusion_reason"]
DAY = 86400.0


@dataclass(frozen=True)
class Exclusion:
    """An upstream fix the tree need not carry, and why (from the exclusions file)."""

    upstream: str       # full hash or a unique prefix (7+ hex digits)
    reason: str


def _exclusion_map(exclusions: list[Exclusion], fixes: list[str]) -> dict[str, str]:
    out: dict[str, str] = {}
    for ex in exclusions:
        hit = [h for h in fixes if h.startswith(ex.upstream.lower())]
        if len(hit) > 1:
            raise ConfigError(f"exclusion {ex.upstream!r} matches {len(hit)} upstream fixes; "
                              "give more digits")
        if hit:
            out[hit[0]] = ex.reason
    return out


def carryover_table(upstream_fix_links: pd.DataFrame, upstream_commits: pd.DataFrame,
                    upstream_subsystems: pd.DataFrame, matches: pd.DataFrame,
                    tip_date: pd.Timestamp, exclusions: list[Exclusion] | None = None,
                    as_of: pd.Timestamp | None = None,
                    mirrored: set[str] | None = None) -> pd.DataFrame:
    """One row per upstream fix (columns :data:`CARRYOVER_COLUMNS`).

    Parameters
    ----------
    upstream_fix_links : tidy ``fix_links`` of the upstream history.
    upstream_commits : tidy ``commits`` of the upstream history.
    upstream_subsystems : tidy ``commit_subsystems`` of the upstream history.
    matches : :func:`~procmetrics.analyse.carryover.equivalence.match_commits` output.
    tip_date : committer date of the tree's tip.
    exclusions : upstream fixes the tree need not carry.
    as_of : the date the tree is judged at (default ``tip_date``); later than the tip
        only when the mined tip is still the tree's state then (a shipped release):
        fixes landed upstream up to ``as_of`` are due and gaps run to ``as_of``.
    mirrored : under a path map, the upstream commits that touch a mirrored path
        (:func:`touching`); None when the whole upstream counts.

    Returns
    -------
    DataFrame
        ``latency_days`` (arrival in the tree minus upstream committer date) for
        ``carried``; ``gap_days`` (tip minus upstream committer date) for
        ``missing`` and ``excluded``; ``target_method`` says how the carried target
        was matched.

    References
    ----------
    Linux kernel documentation, "Submitting patches": the ``Fixes:`` tag.
    """
    links = upstream_fix_links[upstream_fix_links["status"] == "resolved"]
    match = matches.set_index("upstream_hash")
    date = dict(zip(upstream_commits["hash"], upstream_commits["committer_date"]))
    subject = dict(zip(upstream_commits["hash"], upstream_commits["subject"]))
    subs = upstream_subsystems.groupby("hash")["subsystem"].agg(lambda s: ";".join(sorted(s)))
    fixes = list(dict.fromkeys(links["fix_hash"]))
    excluded = _exclusion_map(list(exclusions or []), fixes)
    targets = links.groupby("fix_hash", sort=False)["introducer_hash"].agg(list)
    cutoff = tip_date if as_of is None else as_of
    if cutoff < tip_date:
        raise ConfigError(f"the date to judge at ({cutoff:%Y-%m-%d}) is before the tree's "
                          f"tip ({tip_date:%Y-%m-%d})")
    rows = []
    for fix in fixes:
        carried_targets = [t for t in targets[fix] if t in match.index]
        target = carried_targets[0] if carried_targets else targets[fix][0]
        t_method = match.at[target, "method"] if carried_targets else None
        fd = date.get(fix)
        row = dict(fix_hash=fix, fix_date=fd, subject=subject.get(fix),
                   subsystem=subs.get(fix, ""), target_hash=target, target_method=t_method,
                   method=None, tree_hash=None, arrival_date=pd.NaT, latency_days=np.nan,
                   gap_days=np.nan, ambiguous=False, exclusion_reason=excluded.get(fix))
        if fix in match.index:
            m = match.loc[fix]
            row.update(method=m["method"], tree_hash=m["tree_hash"],
                       arrival_date=m["arrival_date"], ambiguous=bool(m["ambiguous"]))
        if row["method"] == "same-id":
            status = "shared"
        elif row["method"] is not None:
            status = "carried"
            row["latency_days"] = (m["arrival_date"] - fd).total_seconds() / DAY
        elif mirrored is not None and fix not in mirrored:
            status = "not-mirrored"
        elif not carried_targets:
            status = "not-relevant"
        elif fd > cutoff:
            status = "not-due"
        else:
            status = "excluded" if fix in excluded else "missing"
            row["gap_days"] = (cutoff - fd).total_seconds() / DAY
        row["status"] = status
        rows.append(row)
    out = pd.DataFrame(rows, columns=CARRYOVER_COLUMNS)
    out["ambiguous"] = out["ambiguous"].astype(bool)
    return out.sort_values(["fix_date", "fix_hash"], kind="mergesort", ignore_index=True)


def touching(file_changes: pd.DataFrame, pairs: list[tuple[str, str]]) -> set[str]:
    """Commits of ``file_changes`` (``hash``, ``path``, ``old_path``) that touch a path
    under an upstream prefix of ``pairs`` (an empty prefix: every path)."""
    ups = tuple(u for u, _ in pairs)
    if "" in ups:
        return set(file_changes["hash"])
    hit = pd.Series(False, index=file_changes.index)
    for col in ("path", "old_path"):
        hit |= file_changes[col].fillna("").astype(str).str.startswith(ups)
    return set(file_changes.loc[hit, "hash"])


def missing_fixes(table: pd.DataFrame) -> pd.DataFrame:
    """The missing and the excluded fixes, oldest gap first (excluded listed after)."""
    out = table[table["status"].isin(["missing", "excluded"])].copy()
    out["_order"] = (out["status"] == "excluded").astype(int)
    return (out.sort_values(["_order", "gap_days", "fix_hash"], ascending=[True, False, True],
                            kind="mergesort").drop(columns="_order").reset_index(drop=True))
