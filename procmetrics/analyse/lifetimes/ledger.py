"""The defect ledger: every defect, and every fix link left out, with the reason.

An auditor must be able to trace each lifetime figure to the commits behind it,
and to see what was left out and why. The reasons, fixed:

* ``before link era``: introduced before the link era began (see
  :mod:`procmetrics.analyse.lifetimes.linkera`); the row carries its full
  lifetime and window;
* ``negative lifetime``: the fix is dated before its introducer (kept in the
  defect table, flagged, excluded from estimation);
* ``follow-up fix``: a later fix of an introducer already fixed (the defect's
  lifetime ends at its first fix);
* ``unresolved reference (status)``: a fix reference that did not resolve to
  one commit of the history (``unresolved``, ``ambiguous``, ``self``);
* ``missing date``: a resolved link whose introducer or fix has no date.
"""
from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from procmetrics.analyse.measures.periods import utc_times

#: every link or defect left out of estimation, with the reason (:func:`defect_ledger`)
EXCLUDED_COLUMNS: list[str] = [
    "repo", "introducer_hash", "fix_hash", "intro_date", "fix_date", "lifetime_days",
    "lifetime", "window", "window_low", "subsystem", "reason",
]
LEDGER_COLUMNS: list[str] = [
    "repo", "introducer_hash", "fix_hash", "intro_date", "fix_date", "lifetime_days",
    "lifetime", "window", "window_low", "subsystem", "used", "excluded_reason",
]
BEFORE_ERA, NEGATIVE, FOLLOW_UP, UNRESOLVED, MISSING_DATE = (
    "before link era", "negative lifetime", "follow-up fix", "unresolved reference",
    "missing date")


def _excluded(fix_links: pd.DataFrame, links: pd.DataFrame, pre: pd.DataFrame,
              status: pd.Series, clock: str, missing_rows: pd.DataFrame) -> pd.DataFrame:
    """Rows left out before the defect table: unresolved references, links without a
    date, follow-up fixes and (with their full columns) defects before the link era."""
    def rows(df: pd.DataFrame, intro: str, fix: str, reason: str) -> pd.DataFrame:
        i = utc_times(df[intro]) if len(df) else pd.Series(dtype="datetime64[ns, UTC]")
        f = utc_times(df[fix]) if len(df) else pd.Series(dtype="datetime64[ns, UTC]")
        return pd.DataFrame({
            "repo": df["repo"].astype(str).to_numpy(),
            "introducer_hash": df["introducer_hash"].astype(object).to_numpy(),
            "fix_hash": df["fix_hash"].astype(str).to_numpy(),
            "intro_date": i.to_numpy(), "fix_date": f.to_numpy(),
            "lifetime_days": ((f - i).dt.total_seconds() / 86400.0).to_numpy(),
            "lifetime": np.nan, "window": np.nan, "window_low": np.nan,
            "subsystem": None, "reason": reason})

    bad = fix_links[~status.eq("resolved") | fix_links["introducer_hash"].isna()]
    bad = bad.assign(introducer_hash=bad["introducer_hash"].where(
        bad["introducer_hash"].notna(), bad.get("ref_hash")))
    unres = rows(bad, f"intro_{clock}_date", f"fix_{clock}_date", UNRESOLVED)
    if len(unres):
        unres["reason"] = [f"{UNRESOLVED} ({s})" for s in status[bad.index]]
    follow = links[links.duplicated(["repo", "introducer_hash"], keep="first")]
    parts = [unres,
             rows(missing_rows, f"intro_{clock}_date", f"fix_{clock}_date", MISSING_DATE),
             rows(follow, "_intro", "_fix", FOLLOW_UP)]
    if len(pre):
        parts.append(pre.assign(reason=BEFORE_ERA)[EXCLUDED_COLUMNS])
    parts = [p for p in parts if len(p)]
    if not parts:
        return pd.DataFrame(columns=EXCLUDED_COLUMNS)
    out = pd.concat(parts, ignore_index=True)[EXCLUDED_COLUMNS]
    return out.sort_values(["reason", "repo", "fix_hash"], kind="mergesort",
                           key=lambda c: c.astype(str)).reset_index(drop=True)


def defect_ledger(table: Any) -> pd.DataFrame:
    """Every defect and every left-out link, one row each, with the reason it was left out.

    Columns :data:`LEDGER_COLUMNS`; ``used`` is True for the defects the estimators
    use; ``excluded_reason`` is empty for them and otherwise one of ``before link
    era``, ``negative lifetime``, ``follow-up fix``, ``unresolved reference (status)``,
    ``missing date``.
    """
    d = table.defects
    used = d.assign(used=~d["negative"].astype(bool),
                    excluded_reason=np.where(d["negative"].astype(bool), NEGATIVE, ""))
    ex = table.excluded.rename(columns={"reason": "excluded_reason"}).assign(used=False)
    parts = [p[LEDGER_COLUMNS] for p in (used, ex) if len(p)]
    if not parts:
        return pd.DataFrame(columns=LEDGER_COLUMNS)
    out = pd.concat(parts, ignore_index=True)[LEDGER_COLUMNS]
    for c in ("intro_date", "fix_date"):
        out[c] = utc_times(out[c])
    return out


