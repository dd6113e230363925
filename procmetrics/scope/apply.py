"""Cut one repository's tidy tables to a scope and a committer-date window, once,
so every analysis downstream sees the same scoped tables.

The rules (stated in the README and carried on every result as ``rule``):

- a commit is in scope when it touches an in-scope path (:data:`RULE`);
- a defect is in scope when its introducing commit did (:data:`DEFECT_RULE`);
- the window keeps commits whose committer date lies in ``[since, until]``, both
  bounds included (:data:`WINDOW_RULE`).

Defect analyses (lifetimes, fix events) take their end of observation and their
introducer look-ups from ``defect_commits``: every commit up to ``until`` (or the
tip), so a scope never moves the end of the history to its last in-scope commit.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import pandas as pd

from procmetrics.errors import InsufficientData

RULE = ("a commit is in scope when one of its stored changes adds, modifies, deletes or "
        "changes the type of an in-scope path, or renames a file from or to one; merge "
        "commits have stored changes only when mined with first-parent merge diffs, and each "
        "analysis counts merges by its own rule (--include-merges)")
DEFECT_RULE = ("a defect (a resolved Fixes: link) is in scope when its introducing commit "
               "(the Fixes: target) touched an in-scope path, whatever the fix touched; an "
               "unresolved reference is kept when its fixing commit is in scope")
WINDOW_RULE = ("the window keeps commits whose committer date lies between --since and "
               "--until, both included (a bare date is 00:00 UTC; a tag is its commit's "
               "committer date); a defect is in the window when its introducing commit was "
               "committed on/after --since and its fix on/before --until (a cohort born in the "
               "window: no defect is seen only because it lived long), and defect analyses "
               "end at --until (or the tip); an unresolved reference when its fixing commit "
               "is in the window")

#: tables cut to the kept commits (scope and window) by their commit column
_BY_HASH = {"reverts": "hash", "unparsed_references": "hash", "file_changes": "hash",
            "patch_ids": "hash", "backport_lines": "hash"}
#: lookup tables cut to the in-scope commits only (not the window): an in-scope
#: introducer older than --since keeps its trailers and subsystems
_BY_SCOPE = {"trailers": "hash", "commit_subsystems": "hash"}


@dataclass(frozen=True)
class ScopeSummary:
    """What a scope and window selected, for headers, JSON and the report."""

    scope: Mapping[str, Any] | None
    since: pd.Timestamp | None
    until: pd.Timestamp | None
    n_stored_paths: int
    n_paths: int
    #: non-merge commits kept (in scope and in the window) / non-merge commits in the window
    n_commits: int
    n_commits_window: int
    n_commits_history: int
    n_defects: int
    n_defects_window: int
    #: in-scope changed lines / all changed lines of the kept commits (None: not counted)
    line_share: float | None
    unmatched_include: tuple[str, ...] = ()
    unmatched_exclude: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def share(self) -> float | None:
        return self.n_commits / self.n_commits_window if self.n_commits_window else None

    def to_dict(self) -> dict[str, Any]:
        def day(ts: pd.Timestamp | None) -> str | None:
            return None if ts is None else ts.isoformat()
        return {
            "scope": dict(self.scope) if self.scope is not None else None,
            "since": day(self.since), "until": day(self.until),
            "n_stored_paths": self.n_stored_paths, "n_paths": self.n_paths,
            "n_commits": self.n_commits, "n_commits_window": self.n_commits_window,
            "n_commits_history": self.n_commits_history,
            "commit_share": None if self.share is None else round(self.share, 6),
            "n_defects": self.n_defects, "n_defects_window": self.n_defects_window,
            "line_share": None if self.line_share is None else round(self.line_share, 6),
            "unmatched_include": list(self.unmatched_include),
            "unmatched_exclude": list(self.unmatched_exclude),
            "notes": list(self.notes),
            "rule": RULE if self.scope is not None else None,
            "defect_rule": DEFECT_RULE if self.scope is not None else None,
            "window_rule": WINDOW_RULE if (self.since or self.until) else None,
        }

    def lines(self) -> list[str]:
        """The header lines the CLI prints before any figure."""
        out = []
        if self.scope is not None:
            sc = self.scope
            out.append(f"scope: {sc['name']} from {sc['file']} ({sc['kind']}, sha256 "
                       f"{sc['file_sha256'][:16]}...): {self.n_paths} of "
                       f"{self.n_stored_paths} stored paths")
        if self.since is not None or self.until is not None:
            out.append(f"window: committer date {_day(self.since)} .. "
                       + ("the tip" if self.until is None else _day(self.until)))
        share = "-" if self.share is None else f"{self.share:.1%}"
        out.append(f"selected: {self.n_commits} of {self.n_commits_window} non-merge commits "
                   f"({share}; {self.n_commits_history} in the whole history), "
                   f"{self.n_defects} of {self.n_defects_window} resolved fix links")
        if self.line_share is not None:
            out.append(f"in-scope share of the selected commits' changed lines: "
                       f"{self.line_share:.1%}")
        for kind, pats in (("include", self.unmatched_include),
                           ("exclude", self.unmatched_exclude)):
            if pats:
                shown = ", ".join(pats[:10]) + (f" ... ({len(pats)} in all)"
                                                if len(pats) > 10 else "")
                out.append(f"warning [scope_unmatched] {len(pats)} {kind} pattern(s) match no "
                           f"path of the history: {shown}")
        out.extend(f"note: {n}" for n in self.notes)
        return out


def _day(ts: pd.Timestamp | None) -> str:
    return "the first commit" if ts is None else ts.strftime("%Y-%m-%d %H:%M:%S UTC")


def resolve_window(tables: Mapping[str, pd.DataFrame], since: str | None, until: str | None
                   ) -> tuple[pd.Timestamp | None, pd.Timestamp | None]:
    """``--since``/``--until`` through the one date parser (date, tag or commit)."""
    from procmetrics.analyse.measures.periods import resolve_when
    from procmetrics.errors import ConfigError

    lo = None if since is None else resolve_when(since, commits=tables["commits"],
                                                 tags=tables["tags"], option="--since")
    hi = None if until is None else resolve_when(until, commits=tables["commits"],
                                                 tags=tables["tags"], option="--until")
    if lo is not None and hi is not None and lo > hi:
        raise ConfigError(f"--since {since} ({lo.date()}) is after --until {until} "
                          f"({hi.date()})", key="--since")
    return lo, hi


def apply_scope(tables: Mapping[str, pd.DataFrame], selection: Any | None,
                since: pd.Timestamp | None = None, until: pd.Timestamp | None = None
                ) -> tuple[dict[str, pd.DataFrame], ScopeSummary]:
    """The tables cut to ``selection`` (a :class:`~procmetrics.scope.select.ScopeSelection`,
    or None for the whole tree) and the window, with the summary of what was kept."""
    commits = tables["commits"]
    date = commits["committer_date"]
    in_window = pd.Series(True, index=commits.index)
    if since is not None:
        in_window &= date >= since
    if until is not None:
        in_window &= date <= until
    merge = commits["is_merge"].astype("boolean").fillna(False).astype(bool)
    if selection is not None:
        scope_hashes = set(selection.commits["hash"])
        keep = in_window & commits["hash"].isin(scope_hashes)
    else:
        scope_hashes = None
        keep = in_window
    kept = set(commits.loc[keep, "hash"])
    out = dict(tables)
    out["commits"] = commits[keep].reset_index(drop=True)
    for name, col in _BY_HASH.items():
        if name in out and out[name] is not None and col in out[name]:
            out[name] = out[name][out[name][col].isin(kept)].reset_index(drop=True)
    if scope_hashes is not None:
        for name, col in _BY_SCOPE.items():
            if name in out and out[name] is not None and col in out[name]:
                out[name] = out[name][out[name][col].isin(scope_hashes)].reset_index(drop=True)
    # defect analyses end at the window's end (or the tip), not at the last in-scope
    # commit, and look introducers up whatever they touched: the whole tree up to --until
    out["defect_commits"] = (commits if until is None else commits[date <= until]
                             ).reset_index(drop=True)
    fl = tables["fix_links"]
    resolved = fl["status"].astype(str) == "resolved"
    fix_in_window = pd.Series(True, index=fl.index)
    if until is not None:
        fix_in_window &= fl["fix_committer_date"] <= until
    if since is not None:
        born = fl["intro_committer_date"] >= since
        fix_in_window &= (resolved & born.fillna(False).astype(bool)) | (
            ~resolved & (fl["fix_committer_date"] >= since))
    if scope_hashes is not None:
        fl_keep = fix_in_window & ((resolved & fl["introducer_hash"].isin(scope_hashes))
                                   | (~resolved & fl["fix_hash"].isin(scope_hashes)))
    else:
        fl_keep = fix_in_window
    out["fix_links"] = fl[fl_keep].reset_index(drop=True)
    if not len(out["commits"]):
        raise InsufficientData("the scope and window select no commit of the history")
    line_share = None
    if selection is not None:
        sel = selection.commits[selection.commits["hash"].isin(kept)]
        tot = out["commits"][["lines_added", "lines_deleted"]]
        if len(sel) and sel["scope_lines"].notna().all() and tot.notna().all().all():
            denom = float(tot.sum().sum())
            line_share = float(sel["scope_lines"].sum()) / denom if denom else None
    summary = ScopeSummary(
        scope=selection.scope.to_dict() if selection is not None else None,
        since=since, until=until,
        n_stored_paths=selection.n_stored_paths if selection is not None else 0,
        n_paths=len(selection.paths) if selection is not None else 0,
        n_commits=int((keep & ~merge).sum()), n_commits_window=int((in_window & ~merge).sum()),
        n_commits_history=int((~merge).sum()),
        n_defects=int((fl_keep & resolved).sum()),
        n_defects_window=int((fix_in_window & resolved).sum()),
        line_share=line_share,
        unmatched_include=selection.unmatched_include if selection is not None else (),
        unmatched_exclude=selection.unmatched_exclude if selection is not None else (),
        notes=selection.scope.notes if selection is not None else ())
    return out, summary


@dataclass(frozen=True)
class ScopeRequest:
    """``--scope``/``--since``/``--until`` as given; call it on a connection and the
    freshly read tables (one snapshot) to get the scoped tables and their summary."""

    spec: str | None = None
    since: str | None = None
    until: str | None = None
    #: the scope file claims take their named scopes from, and the names they use
    claim_file: str | None = None
    claim_names: tuple[str, ...] = ()

    @property
    def active(self) -> bool:
        return any(v is not None for v in (self.spec, self.since, self.until)) \
            or bool(self.claim_names)

    def variants(self, conn: Any, repo: str, tables: Mapping[str, pd.DataFrame]
                 ) -> dict[str, tuple[dict[str, pd.DataFrame], ScopeSummary]]:
        """The tables (from the whole tree, in this window) of every scope claims name."""
        if not self.claim_names:
            return {}
        from procmetrics.errors import ConfigError

        if self.claim_file is None:
            raise ConfigError("claims name the scope(s) " + ", ".join(sorted(
                self.claim_names)) + ": give the scope file with --scope-file",
                key="--scope-file")
        return {name: ScopeRequest(f"{self.claim_file}:{name}", self.since, self.until)(
            conn, repo, tables) for name in sorted(set(self.claim_names))}

    def __call__(self, conn: Any, repo: str, tables: Mapping[str, pd.DataFrame]
                 ) -> tuple[dict[str, pd.DataFrame], ScopeSummary | None]:
        from procmetrics.scope.definition import read_scope
        from procmetrics.scope.select import select_scope

        if all(v is None for v in (self.spec, self.since, self.until)):
            return dict(tables), None          # only claims' named scopes (see variants)
        lo, hi = resolve_window(tables, self.since, self.until)
        selection = None
        if self.spec is not None:
            root = None
            repos = tables.get("repositories")
            if repos is not None and len(repos):
                hit = repos[repos["repo"] == repo]
                root = str((hit if len(hit) else repos)["path"].iloc[0])
            selection = select_scope(conn, repo, read_scope(self.spec, root))
        return apply_scope(tables, selection, lo, hi)
