"""Blame-based (SZZ-style) fix-to-introducer linking: optional and heuristic.

Explicit ``Fixes:`` links are the primary source. Where a project does not
write them, the commits that last touched the lines a fix removed or changed
are *candidate* introducers (Śliwerski, Zimmermann & Zeller 2005). This is a
heuristic and every result carries the ``heuristic_classification`` caveat and
its failure modes (:data:`FAILURE_MODES`). It is off by default: the CLI and
the report use it only when asked.

Input is the blame table from :func:`procmetrics.mine.blame.blame_fixes`
(``fix_hash, path, line, blamed_hash, blamed_path``) and the tidy ``commits``
table. ``SZZResult.links`` columns (:data:`SZZ_COLUMNS`): ``repo``,
``fix_hash``, ``introducer_hash``, ``n_lines``, ``share``, ``intro_date``,
``fix_date``. :func:`as_fix_links` turns them into rows shaped like the tidy
``fix_links`` table (``raw_text = "szz-blame"``) so
:func:`procmetrics.analyse.lifetimes.defects.build_defects` can use them.

Which commits are blamed (:func:`select_unlinked_fixes`): non-merge commits
that have **no resolved** ``Fixes:`` link (those already name their
introducer), and either whose subject contains a fix keyword (a second
heuristic, :data:`procmetrics.analyse.measures.metrics.DEFAULT_FIX_KEYWORDS`, matched at
the start of a word, case-insensitive), or that the user lists explicitly.
The keyword rule misses fixes described otherwise and includes commits that
only mention a fix; both heuristics are named in the caveats.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import re
from typing import Iterable, Sequence

import numpy as np
import pandas as pd

from procmetrics.analyse.measures.metrics import DEFAULT_FIX_KEYWORDS
from procmetrics.analyse.result import Caveat, caveat, to_plain

SZZ_COLUMNS = ["repo", "fix_hash", "introducer_hash", "n_lines", "share", "intro_date",
               "fix_date"]
FAILURE_MODES: tuple[str, ...] = (
    "refactorings and whitespace or formatting changes get blamed instead of the real "
    "introducer (whitespace is ignored with -w, moves and reformatting are not)",
    "cosmetic lines changed alongside the fix (comments, renames of variables) add false "
    "candidates",
    "fixes that only add lines (a missing check) cannot be blamed at all",
    "tangled commits mix the fix with unrelated changes whose lines are blamed too",
    "renamed or moved files and code moved between files lose the history blame follows",
    "the introducer may be older than the blamed commit (a latent defect exposed later)",
)


@dataclass(frozen=True)
class FixSelection:
    """The commits chosen for blaming and how they were chosen."""

    hashes: tuple[str, ...]
    rule: str
    keywords: tuple[str, ...]
    n_candidates: int          # non-merge commits the rule looked at
    n_with_fixes_link: int     # left out: they already have a resolved Fixes: link
    n_unknown: int             # user-listed hashes not in the commits table (or merges)

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def select_unlinked_fixes(commits: pd.DataFrame, fix_links: pd.DataFrame, *,
                          keywords: Sequence[str] = DEFAULT_FIX_KEYWORDS,
                          hashes: Iterable[str] | None = None) -> FixSelection:
    """Fix commits to blame: no resolved ``Fixes:`` link, keyword subject or listed.

    Parameters
    ----------
    commits : tidy ``commits`` table.
    fix_links : tidy ``fix_links`` table (commits with a resolved link are left out).
    keywords : subject words marking a fix (matched at a word start,
        case-insensitive); ignored when ``hashes`` is given.
    hashes : the user's own list of fix commits (full hashes or unique
        prefixes of at least 7 digits) instead of the keyword rule.

    References
    ----------
    Mockus & Votta (2000), "Identifying reasons for software changes using
    historic databases", ICSM (keyword classification of changes).
    """
    c = commits.drop_duplicates("hash")
    merge = c["is_merge"].fillna(False).astype(bool) if "is_merge" in c else False
    c = c[~merge]
    linked = set(fix_links.loc[fix_links["status"] == "resolved", "fix_hash"])
    if hashes is not None:
        wanted = [h.strip().lower() for h in hashes if h and h.strip()]
        full = c["hash"].astype(str)
        picked, unknown = [], 0
        for h in dict.fromkeys(wanted):
            hit = full[full.str.startswith(h)] if len(h) >= 7 else full[full == h]
            if len(hit) == 1:
                picked.append(str(hit.iloc[0]))
            else:
                unknown += 1
        chosen = [h for h in picked if h not in linked]
        return FixSelection(tuple(chosen), "listed by the user", (), len(picked),
                            len(picked) - len(chosen), unknown)
    kw = tuple(keywords)
    pat = r"\b(?:" + "|".join(re.escape(k) for k in kw) + r")"
    hit = c["subject"].astype("string").str.contains(pat, case=False, regex=True)
    hit = hit.fillna(False).to_numpy(dtype=bool)
    cand = c[hit]
    chosen = cand[~cand["hash"].isin(linked)]
    return FixSelection(tuple(chosen["hash"].astype(str)),
                        "subject contains a fix keyword (heuristic)", kw, int(len(cand)),
                        int(len(cand) - len(chosen)), 0)


def sample_linked_fixes(fix_links: pd.DataFrame, n: int,
                        rng: np.random.Generator) -> tuple[str, ...]:
    """Up to ``n`` fix commits with a resolved ``Fixes:`` link, drawn without replacement.

    Blaming them and comparing with the developers' own links measures how
    often the heuristic finds the introducer they named (``agreement``).
    """
    fixes = sorted(set(fix_links.loc[fix_links["status"] == "resolved", "fix_hash"]))
    if n <= 0 or not fixes:
        return ()
    if n >= len(fixes):
        return tuple(fixes)
    return tuple(fixes[i] for i in sorted(rng.choice(len(fixes), n, replace=False)))


@dataclass(frozen=True)
class SZZResult:
    """Candidate introducers per fix, with counts and failure modes."""

    links: pd.DataFrame
    n_fixes: int
    n_fixes_with_candidates: int
    n_unblamable: int
    n_dropped_later_than_fix: int
    agreement: dict[str, Any]
    failure_modes: tuple[str, ...]
    method: str
    caveats: tuple[Caveat, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def szz_candidates(blame_rows: pd.DataFrame, commits: pd.DataFrame, *, repo: str | None = None,
                   n_fixes: int | None = None, unblamable: int = 0,
                   explicit_links: pd.DataFrame | None = None,
                   top_only: bool = False,
                   checked_fixes: Iterable[str] | None = None) -> SZZResult:
    """Candidate introducers from blame rows.

    Candidates dated (committer clock) after their fix are impossible and are
    dropped and counted. With ``top_only`` only the candidate owning most
    blamed lines is kept per fix (ties: the latest). With ``explicit_links``
    (tidy ``fix_links``) the share of explicit introducers found among the
    candidates is reported as ``agreement`` — a recall against the
    developers' own links, not a validation of the heuristic. Pass
    ``checked_fixes`` (every fix that was blamed for the check, including
    those that gave no blame rows) so that unblamable fixes count as misses.

    References
    ----------
    Śliwerski, Zimmermann & Zeller (2005), MSR; Kim et al. (2006), "Automatic
    identification of bug-introducing changes", ASE; Rodríguez-Pérez,
    Robles & González-Barahona (2018), IST 99 (reproducibility of SZZ).
    """
    c = commits.drop_duplicates("hash").set_index("hash")
    repo_name = repo if repo is not None else (str(commits["repo"].iloc[0]) if len(commits) else "")
    b = blame_rows[blame_rows["blamed_hash"] != blame_rows["fix_hash"]]
    g = b.groupby(["fix_hash", "blamed_hash"]).size().rename("n_lines").reset_index()
    g["share"] = g["n_lines"] / g.groupby("fix_hash")["n_lines"].transform("sum")
    date = pd.to_datetime(c["committer_date"], utc=True)
    g["intro_date"] = g["blamed_hash"].map(date)
    g["fix_date"] = g["fix_hash"].map(date)
    later = g["intro_date"] > g["fix_date"]
    n_later = int(later.sum())
    g = g[~later]
    if top_only and len(g):
        g = (g.sort_values(["fix_hash", "n_lines", "intro_date"], ascending=[True, False, False])
             .groupby("fix_hash").head(1))
    links = g.rename(columns={"blamed_hash": "introducer_hash"}).assign(repo=repo_name)
    links = links[SZZ_COLUMNS].sort_values(["fix_hash", "introducer_hash"]).reset_index(drop=True)
    n_all = int(n_fixes if n_fixes is not None else blame_rows["fix_hash"].nunique() + unblamable)
    agreement: dict[str, Any] = {}
    if explicit_links is not None:
        ex = explicit_links[explicit_links["status"] == "resolved"]
        scope = set(checked_fixes) if checked_fixes is not None else set(blame_rows["fix_hash"])
        ex = ex[ex["fix_hash"].isin(scope)].drop_duplicates(["fix_hash", "introducer_hash"])
        pairs = set(zip(links["fix_hash"], links["introducer_hash"]))
        hit = [(f, i) in pairs for f, i in zip(ex["fix_hash"], ex["introducer_hash"])]
        agreement = {"n_explicit": len(hit), "n_found": int(sum(hit)),
                     "recall": (sum(hit) / len(hit)) if hit else None,
                     "mean_candidates_per_fix": float(links.groupby("fix_hash").size().mean())
                     if len(links) else None}
    cav = [caveat("heuristic_classification", "blame-based introducers are candidates found "
                  "by a heuristic, not links written by developers: " + "; ".join(FAILURE_MODES))]
    if unblamable:
        cav.append(caveat("too_few_observations", f"{unblamable} fix(es) only add lines and "
                          "cannot be blamed", "info"))
    if n_later:
        cav.append(caveat("clock_skew", f"{n_later} blamed commit(s) dated after their fix "
                          "were dropped", "info"))
    return SZZResult(links, n_all, int(links["fix_hash"].nunique()), int(unblamable), n_later,
                     agreement, FAILURE_MODES,
                     "SZZ: git blame (-w) of lines removed or changed by the fix, in its parent"
                     + (", top candidate only" if top_only else ", all candidates"), tuple(cav))


def as_fix_links(result: SZZResult, commits: pd.DataFrame) -> pd.DataFrame:
    """SZZ candidates shaped like the tidy ``fix_links`` table (``status='resolved'``)."""
    c = commits.drop_duplicates("hash").set_index("hash")
    L = result.links
    out = pd.DataFrame({
        "repo": L["repo"], "fix_hash": L["fix_hash"],
        "position": L.groupby("fix_hash").cumcount(), "ref_hash": L["introducer_hash"],
        "status": "resolved", "introducer_hash": L["introducer_hash"], "cited_subject": None,
        "subject_match": pd.NA, "in_trailer_block": False, "raw_text": "szz-blame",
        "fix_author_date": L["fix_hash"].map(pd.to_datetime(c["author_date"], utc=True)),
        "fix_committer_date": L["fix_hash"].map(pd.to_datetime(c["committer_date"], utc=True)),
        "intro_author_date": L["introducer_hash"].map(pd.to_datetime(c["author_date"], utc=True)),
        "intro_committer_date": L["introducer_hash"].map(
            pd.to_datetime(c["committer_date"], utc=True)),
    })
    return out
