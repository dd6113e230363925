"""One row per defect: the commit that introduced it and the commit that fixed it.

A *defect* here is a resolved fix link: a fixing commit citing (``Fixes: <sha>``)
the commit that introduced the problem. The rules, fixed and documented:

* A fix naming several introducers gives several defects (one per distinct
  introducer).
* An introducer cited by several fixes is *one* defect whose lifetime ends at
  the FIRST fix (earliest fix date on the chosen basis, ties broken by hash);
  the later fixes are kept as ``follow_up_fixes`` and counted in ``n_fixes``.
* Links with status other than ``resolved`` (``unresolved``, ``ambiguous``,
  ``self``) give no defect; they are counted on the result.
* Negative lifetimes (fix dated before its introducer: clock skew, rebases,
  late-applied patches) are kept, flagged ``negative=True``, counted and
  carried with a ``clock_skew`` caveat. Estimators exclude them from
  estimation and report how many they excluded; nothing is clipped.
* **Link era.** A defect can only be seen once the project writes fix links.
  Before that date ``A`` no fix is linked, so a defect introduced at ``u < A``
  shows up only if its lifetime is at least ``A - u``: old introducers enter
  the table only with long lifetimes (left truncation on top of the right
  truncation at the end of the history). By default (``links_from=
  "first_link"``) ``A`` is the date of the first linked fix and defects
  introduced before ``A`` are left out and counted (``n_before_links``, and
  listed with the reason in :attr:`DefectTable.excluded`); for introducers from
  ``A`` on, the only truncation is at the end of the history. Where linking
  starts slowly, ``links_from="settled"`` starts the era where linking has
  settled (:mod:`procmetrics.analyse.lifetimes.linkera`); a
  ``tag_adoption_rising`` caveat says when the first year after ``A`` has far
  fewer links per commit than the rest. With ``links_from=None`` every
  introducer is kept and ``window_low`` records the lower truncation bound
  (``first linked fix - intro_date`` for introducers before it, else 0), for
  the doubly-truncated estimator.

Columns of :attr:`DefectTable.defects` (:data:`DEFECT_COLUMNS`):

``repo``, ``introducer_hash``, ``fix_hash`` (first fix), ``n_fixes`` (distinct
fixing commits), ``follow_up_fixes`` (space-separated hashes of later fixes),
``basis`` (``committer`` | ``author`` | ``releases``), ``intro_date``,
``fix_date`` (UTC, on the basis clock; committer clock for ``releases``),
``lifetime_days`` (float days between them), ``lifetime`` (in basis units:
days, or releases shipped), ``window`` (the truncation window in basis units:
the longest lifetime that could have been observed, ``end - intro_date`` in
days or the number of release tags containing the introducer), ``window_low``
(the shortest lifetime that could have been observed: 0 except for introducers
kept from before the first linked fix with ``links_from=None``; always 0 on the
releases basis), ``negative``,
``subsystem`` (the introducer's only subsystem, ``(multiple)`` or ``(none)``),
``subsystems`` (``;``-joined), ``period``, ``reviewed_introducer`` (boolean,
NA when trailers were not given), ``intro_lines`` (lines added + deleted, NA
when not mined), ``intro_files``.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal, NamedTuple, Sequence

import numpy as np
import pandas as pd

from procmetrics.analyse.measures.periods import utc_times
from procmetrics.analyse.memo import memoised
from procmetrics.analyse.result import Caveat, caveat, to_plain
from procmetrics.errors import InsufficientData

Basis = Literal["committer", "author", "releases"]

DEFECT_COLUMNS: list[str] = [
    "repo", "introducer_hash", "fix_hash", "n_fixes", "follow_up_fixes", "basis",
    "intro_date", "fix_date", "lifetime_days", "lifetime", "window", "window_low", "negative",
    "subsystem", "subsystems", "period", "reviewed_introducer", "intro_lines", "intro_files",
]

from procmetrics.analyse.lifetimes.ledger import (  # noqa: E402,F401  (re-exported)
    EXCLUDED_COLUMNS, LEDGER_COLUMNS, _excluded, defect_ledger,
)

REVIEW_KEYS: tuple[str, ...] = ("reviewed-by", "acked-by")
"""Trailer keys (compared case-insensitively) that count as review of a change."""

MULTIPLE = "(multiple)"
NONE = "(none)"


@dataclass(frozen=True)
class DefectTable:
    """The defect table with the counts an auditor needs to judge it.

    Attributes
    ----------
    defects : DataFrame with :data:`DEFECT_COLUMNS`, one row per defect.
    basis : clock the lifetimes are measured on.
    unit : ``"days"`` or ``"releases"``.
    end_date : the end of the observed history (``tau``), UTC.
    link_counts : number of fix links per status (``resolved``, ``unresolved``...).
    n_missing_dates : resolved links whose introducer or fix has no date (dropped).
    n_negative : defects with a negative lifetime (kept, flagged).
    n_follow_up_fixes : fix links beyond the first for an already-fixed introducer.
    population : plain-words description of what the rows represent.
    """

    defects: pd.DataFrame
    basis: str
    unit: str
    end_date: pd.Timestamp
    link_counts: dict[str, int]
    n_missing_dates: int
    n_negative: int
    n_follow_up_fixes: int
    population: str
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)
    links_from: pd.Timestamp | None = None
    n_before_links: int = 0
    link_era_rule: str = ""
    link_era: Any = None
    excluded: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=EXCLUDED_COLUMNS))

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def _utc(x: Any) -> pd.Timestamp:
    ts = pd.Timestamp(x)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def _periods(dates: pd.Series, cuts: Sequence[Any] | None, freq: str) -> pd.Series:
    if not cuts:
        return dates.dt.tz_convert("UTC").dt.tz_localize(None).dt.to_period(freq).astype(str)
    cut_ts = sorted(pd.Timestamp(c).tz_convert("UTC") if pd.Timestamp(c).tzinfo
                    else pd.Timestamp(c).tz_localize("UTC") for c in cuts)
    if len(cut_ts) == 1:
        labels = ["before", "after"]
    else:
        edges = [f"{c:%Y-%m-%d}" for c in cut_ts]
        labels = ([f"<{edges[0]}"] + [f"{a}..{b}" for a, b in zip(edges, edges[1:])]
                  + [f">={edges[-1]}"])
    idx = np.searchsorted(np.array([c.value for c in cut_ts]),
                          dates.dt.tz_convert("UTC").astype("int64").to_numpy(), side="right")
    return pd.Series([labels[i] for i in idx], index=dates.index, dtype=object)


def _release_counts(defects: pd.DataFrame, containment: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Releases shipped between introducer and fix, and the window in releases."""
    need = {"tag", "commit_hash", "contains"}
    if not need.issubset(containment.columns):
        raise InsufficientData(f"tag containment table needs columns {sorted(need)}")
    cont = containment[containment["contains"].astype(bool)]
    tags_of = cont.groupby("commit_hash")["tag"].agg(lambda s: frozenset(s)).to_dict()
    empty: frozenset[str] = frozenset()
    shipped, window = [], []
    for intro, fix in zip(defects["introducer_hash"], defects["fix_hash"]):
        ti, tf = tags_of.get(intro, empty), tags_of.get(fix, empty)
        shipped.append(len(ti - tf))
        window.append(len(ti))
    return np.asarray(shipped, float), np.asarray(window, float)


class _Rows(NamedTuple):
    """What :func:`build_defects` finds before the link era is applied."""

    d: pd.DataFrame                 # one row per introducer, link era not yet applied
    links: pd.DataFrame
    status: pd.Series
    link_counts: dict[str, int]
    n_missing: int
    missing_rows: pd.DataFrame
    n_follow: int
    first_by_repo: pd.Series
    tau: Any


@memoised()
def _defect_rows(fix_links: pd.DataFrame, basis: Basis, commits: pd.DataFrame | None,
                 commit_subsystems: pd.DataFrame | None,
                 tag_containment: pd.DataFrame | None, end_date: Any) -> _Rows:
    """The defect rows of :func:`build_defects` before the link-era rule, without the
    review flag (:func:`_reviewed_introducers`) and the period: they depend on none of
    these, so a report's tables under several rules, with trailers or without, with
    period cuts or without, share one computation."""
    clock = "author" if basis == "author" else "committer"
    status = fix_links["status"].fillna("unknown").astype(str)
    link_counts = {str(k): int(v) for k, v in status.value_counts().sort_index().items()}
    links = fix_links[status.eq("resolved") & fix_links["introducer_hash"].notna()].copy()
    links["_intro"] = utc_times(links[f"intro_{clock}_date"])
    links["_fix"] = utc_times(links[f"fix_{clock}_date"])
    missing = links["_intro"].isna() | links["_fix"].isna()
    n_missing = int(missing.sum())
    missing_rows = links[missing]
    links = links[~missing]
    # one row per (repo, introducer, fixing commit): duplicate citations collapse
    links = links.drop_duplicates(["repo", "introducer_hash", "fix_hash"])
    links = links.sort_values(["repo", "introducer_hash", "_fix", "fix_hash"], kind="mergesort")
    grp = links.groupby(["repo", "introducer_hash"], sort=False)
    first = grp.head(1).copy()
    n_fixes = grp["fix_hash"].transform("size")
    first["n_fixes"] = n_fixes.loc[first.index].astype("int64")
    later = links[grp.cumcount() > 0]
    follow = later.groupby(["repo", "introducer_hash"], sort=False)["fix_hash"].agg(" ".join)
    first["follow_up_fixes"] = (follow.reindex(pd.MultiIndex.from_arrays(
        [first["repo"], first["introducer_hash"]])).fillna("").to_numpy(object)
        if len(follow) else "")
    n_follow = int(len(links) - len(first))
    # the first linked fix of each repository (histories adopt Fixes: at different times)
    first_by_repo = links.groupby(links["repo"].astype(str))["_fix"].min()
    tau_by_repo: pd.Series | None = None
    if end_date is not None:
        tau = pd.Timestamp(end_date)
        tau = tau.tz_localize("UTC") if tau.tzinfo is None else tau.tz_convert("UTC")
    elif commits is not None and len(commits):
        # each repository's history ends at its own latest commit
        cdates = utc_times(commits[f"{clock}_date"])
        tau_by_repo = cdates.groupby(commits["repo"].astype(str)).max()
        tau = cdates.max()
    elif len(first):
        tau = first["_fix"].max()
    else:
        tau = pd.NaT

    d = pd.DataFrame({
        "repo": first["repo"].astype(str).to_numpy(),
        "introducer_hash": first["introducer_hash"].astype(str).to_numpy(),
        "fix_hash": first["fix_hash"].astype(str).to_numpy(),
        "n_fixes": first["n_fixes"].to_numpy(),
        "follow_up_fixes": first["follow_up_fixes"].to_numpy(),
        "basis": basis,
        "intro_date": first["_intro"].to_numpy(),
        "fix_date": first["_fix"].to_numpy(),
    })
    d["intro_date"] = utc_times(d["intro_date"])
    d["fix_date"] = utc_times(d["fix_date"])
    d["lifetime_days"] = (d["fix_date"] - d["intro_date"]).dt.total_seconds() / 86400.0
    if basis == "releases":
        shipped, window = _release_counts(d, tag_containment)  # type: ignore[arg-type]
        d["lifetime"], d["window"] = shipped, window
        # ancestry, not clocks, decides here: a skewed clock does not make it negative
        d["negative"] = np.zeros(len(d), dtype=bool)
    else:
        d["lifetime"] = d["lifetime_days"]
        ends = (utc_times(d["repo"].map(tau_by_repo)).fillna(tau)
                if tau_by_repo is not None else tau)
        d["window"] = (ends - d["intro_date"]).dt.total_seconds() / 86400.0
        d["negative"] = d["lifetime"] < 0

    subs: dict[tuple[Any, Any], list[str]] = {}
    if commit_subsystems is not None and len(commit_subsystems):
        # only the introducers' rows (a few per cent of the commits at kernel scale)
        wanted = commit_subsystems["hash"].isin(d["introducer_hash"])
        # each introducer's distinct names in code-point order, joined with ";"
        cs = commit_subsystems[wanted.to_numpy(bool)].dropna(subset=["subsystem"])
        cs = (cs.assign(subsystem=cs["subsystem"].map(str))
              .drop_duplicates(["repo", "hash", "subsystem"])
              .sort_values(["repo", "hash", "subsystem"], kind="mergesort"))
        # grouped in a dict (a pandas groupby and a lookup per defect in its MultiIndex
        # took ten seconds at a million commits)
        for r, h, name in zip(cs["repo"].tolist(), cs["hash"].tolist(),
                              cs["subsystem"].tolist()):
            subs.setdefault((r, h), []).append(name)
    keys = list(zip(d["repo"], d["introducer_hash"]))
    d["subsystems"] = [";".join(subs[k]) if k in subs else "" for k in keys]
    d["subsystem"] = [NONE if not s else (MULTIPLE if ";" in s else s) for s in d["subsystems"]]
    d["period"] = ""                  # build_defects sets it (it depends on the cuts)
    d["reviewed_introducer"] = pd.array([pd.NA] * len(d), dtype="boolean")
    if commits is not None and len(commits):
        # only the introducers' rows are looked up (a tenth of the commits, or less)
        c = commits[commits["hash"].isin(d["introducer_hash"]).to_numpy(bool)]
        c = c.set_index(["repo", "hash"])
        la = c["lines_added"].astype("Float64") + c["lines_deleted"].astype("Float64")
        kidx = pd.MultiIndex.from_tuples(keys, names=["repo", "hash"]) if keys else None
        la = la[~la.index.duplicated()]
        nf = c["n_files"][~c.index.duplicated()]
        d["intro_lines"] = (pd.array(la.reindex(kidx).to_numpy(), dtype="Float64").round()
                            .astype("Int64") if keys else pd.array([], dtype="Int64"))
        d["intro_files"] = (pd.array(nf.reindex(kidx).to_numpy(), dtype="Int64") if keys
                            else pd.array([], dtype="Int64"))
    else:
        d["intro_lines"] = pd.array([pd.NA] * len(d), dtype="Int64")
        d["intro_files"] = pd.array([pd.NA] * len(d), dtype="Int64")
    return _Rows(d, links, status, link_counts, n_missing, missing_rows, n_follow,
                 first_by_repo, tau)


def _reviewed_introducers(trailers: pd.DataFrame, review_keys: tuple[str, ...]
                          ) -> set[tuple[Any, Any]]:
    """The (repo, hash) of every commit with a trailer line whose key is one of
    ``review_keys`` (case-blind). Not memoised: a kept result is handed out as a deep
    copy, and copying a set of a million pairs took longer than building it."""
    rk = {k.lower() for k in review_keys}
    rev = trailers[trailers["key"].astype(str).str.lower().isin(rk)]
    return set(zip(rev["repo"], rev["hash"]))


@memoised()
def build_defects(
    fix_links: pd.DataFrame,
    *,
    basis: Basis = "committer",
    commits: pd.DataFrame | None = None,
    commit_subsystems: pd.DataFrame | None = None,
    trailers: pd.DataFrame | None = None,
    tag_containment: pd.DataFrame | None = None,
    end_date: Any = None,
    period_cuts: Sequence[Any] | None = None,
    period_freq: str = "Y",
    review_keys: Sequence[str] = REVIEW_KEYS,
    links_from: Any = "first_link",
    link_source: str = "resolved Fixes: link",
) -> DefectTable:
    """Build the one-row-per-defect table from the tidy ``fix_links`` table.

    Parameters
    ----------
    fix_links : tidy ``fix_links`` table (see ``procmetrics.store.tables``).
    basis : ``"committer"`` (default) or ``"author"`` dates, or ``"releases"``:
        the number of release tags whose commit contains the introducer but not
        the fix (needs ``tag_containment``).
    commits : tidy ``commits`` table; gives the end of history (latest date on
        the basis clock) and the introducer's size. Optional.
    commit_subsystems : tidy ``commit_subsystems`` table (introducer's subsystems).
    trailers : tidy ``trailers`` table (was the introducer reviewed?).
    tag_containment : DataFrame ``tag, commit_hash, contains`` (``contains`` is
        True when the tag's commit has ``commit_hash`` as an ancestor); computed
        on the mining side by ``procmetrics.mine.ancestry.tag_containment``.
    end_date : end of the observed history; default: latest commit date on
        the basis clock (``commits``), else the latest fix date.
    period_cuts : dates splitting introductions into periods (one date gives
        ``before``/``after``); default: calendar periods of ``period_freq``.
    review_keys : trailer keys that count as review (case-insensitive).
    links_from : start of the link era (see module docstring): ``"first_link"``
        (default here: the first linked fix on the basis clock), ``"settled"``
        (where linking has settled; needs ``commits``; the CLI's and report's
        default), a date, or None (keep every introducer; ``window_low`` then
        records their lower truncation bound).
    link_source : how the links were found, for the population text. Any
        value other than the default marks the links as heuristic (a
        ``heuristic_classification`` caveat is attached).

    Returns
    -------
    DefectTable

    References
    ----------
    Śliwerski, Zimmermann & Zeller (2005), "When do changes induce fixes?"
    (the introducer/fix pairing this table records, here from explicit links).
    """
    if basis not in ("committer", "author", "releases"):
        raise ValueError(f"unknown basis {basis!r}")
    if basis == "releases" and tag_containment is None:
        raise InsufficientData("basis 'releases' needs a tag containment table "
                               "(procmetrics.mine.ancestry.tag_containment)")
    clock = "author" if basis == "author" else "committer"
    d, links, status, link_counts, n_missing, missing_rows, n_follow, first_by_repo, tau = \
        _defect_rows(fix_links, basis, commits, commit_subsystems, tag_containment,
                     end_date)
    d["period"] = _periods(d["intro_date"], period_cuts, period_freq) if len(d) else []
    if trailers is not None:
        reviewed = _reviewed_introducers(trailers, tuple(review_keys))
        d["reviewed_introducer"] = pd.array(
            [k in reviewed for k in zip(d["repo"], d["introducer_hash"])], dtype="boolean")
    era_rule = ""
    era_info: Any = None
    if isinstance(links_from, str) and links_from in ("first_link", "settled"):
        from procmetrics.analyse.lifetimes.linkera import era_by_repository

        era_by_repo, era_rule, era_info = era_by_repository(
            first_by_repo, fix_links, commits, clock=clock, settled=links_from == "settled")
        era = era_by_repo.min() if len(era_by_repo) else pd.NaT
        era_row = d["repo"].map(era_by_repo)
        before = (d["intro_date"] < era_row).fillna(False).astype(bool)
    else:
        era = pd.NaT if links_from is None else _utc(links_from)
        era_rule = ("all: every introducer kept (defects introduced before the first "
                    "linked fix are truncated at both ends)" if links_from is None
                    else f"date: the link era starts at the given date {era:%Y-%m-%d}")
        before = ((d["intro_date"] < era) if pd.notna(era)
                  else pd.Series(False, index=d.index))
    n_before = int(before.sum())
    # lower truncation bound: only with every introducer kept, for those introduced
    # before their repository's first linked fix (they are seen only if fixed after it)
    low_row = (d["repo"].map(first_by_repo) - d["intro_date"]).dt.total_seconds() / 86400.0
    d["window_low"] = (low_row.clip(lower=0).fillna(0.0).to_numpy(float)
                       if links_from is None and link_source == "resolved Fixes: link"
                       else 0.0)
    d["_before"] = before.to_numpy(bool)

    if basis == "releases":
        d["window_low"] = 0.0      # the lower bound is not expressed in releases
    d = d[DEFECT_COLUMNS + ["_before"]].sort_values(["repo", "intro_date", "introducer_hash"],
                                                    kind="mergesort").reset_index(drop=True)
    pre = d[d["_before"]].drop(columns="_before").reset_index(drop=True)
    d = d[~d["_before"]].drop(columns="_before").reset_index(drop=True)
    excluded = _excluded(fix_links, links, pre, status, clock, missing_rows)

    cav: list[Caveat] = []
    n_neg = int(d["negative"].sum())
    n_skew = int((d["lifetime_days"] < 0).sum())
    if basis == "releases" and n_skew:
        cav.append(caveat("clock_skew", f"{n_skew} defect(s) have a fix dated before the "
                          "introducer on the committer clock; release counts use ancestry "
                          "and keep them"))
    if n_neg:
        cav.append(caveat("clock_skew", f"{n_neg} defect(s) have a fix dated before the "
                          f"introducer on the {clock} clock; they are kept and flagged "
                          "(negative=True) and excluded from lifetime estimation"))
    n_unres = sum(v for k, v in link_counts.items() if k not in ("resolved", "self"))
    n_all = sum(v for k, v in link_counts.items() if k != "self")
    if n_all and n_unres / n_all > 0.1:
        cav.append(caveat("unresolved_fix_references",
                          f"{n_unres} of {n_all} fix references did not resolve to one "
                          "commit of this history and give no defect"))
    if n_missing:
        cav.append(caveat("too_few_observations", f"{n_missing} resolved link(s) lack a "
                          "date for the introducer or the fix and were dropped", "info"))
    if n_before:
        cav.append(caveat("truncation_bias", f"{n_before} defect(s) introduced before the "
                          f"link era began ({era:%Y-%m-%d}) were left out: before that date no "
                          "fix was linked, so old introducers appear only with long lifetimes",
                          "info"))
    heuristic = link_source != "resolved Fixes: link"
    if heuristic:
        cav.append(caveat("heuristic_classification", f"HEURISTIC: the links are "
                          f"{link_source}s found by a heuristic, not links written by the "
                          "developers; introducers and lifetimes may be wrong"))
    if pd.notna(era) and not heuristic:
        from procmetrics.analyse.lifetimes.linkera import adoption_caveat

        adopt = adoption_caveat(links.drop_duplicates("fix_hash")["_fix"], commits, era,
                                 tau, clock)
        if adopt is not None:
            cav.append(adopt)
    cav.append(caveat("truncation_bias", "only defects fixed (with a link) before the end "
                      "of the history appear: long lifetimes of recent defects are missing",
                      "info"))
    kind = link_source if heuristic else "Fixes: link"
    cav.append(caveat("not_identifiable", f"defects never found or fixed without a {kind} "
                      "are absent; their number cannot be estimated from this data", "info"))
    unit = "releases" if basis == "releases" else "days"
    since = f"introduced on or after {era:%Y-%m-%d} (start of the link era), " \
        if pd.notna(era) else ""
    population = (("HEURISTIC: " if heuristic else "") + "defects whose fixing commit is "
                  f"linked to the introducing commit by a {link_source}, {since}fixed "
                  f"before {tau:%Y-%m-%d}; lifetime = {unit} from introducer to first fix"
                  if pd.notna(tau) else "no defects")
    return DefectTable(d, basis, unit, tau, link_counts, n_missing, n_neg, n_follow,
                       population, tuple(cav), era if pd.notna(era) else None, n_before,
                       era_rule, era_info, excluded)


def lifetimes_for_estimation(defects: pd.DataFrame) -> tuple[pd.DataFrame, int]:
    """Rows usable by the estimators (non-negative lifetime) and the number excluded."""
    ok = ~defects["negative"].astype(bool) & defects["lifetime"].notna()
    return defects[ok], int((~ok).sum())
