"""Which subsystems get their own series, models and tests.

A kernel-scale MAINTAINERS file names thousands of subsystems; fitting a model
to each costs time and memory in proportion to all of them while a reader looks
at a dozen, and most are too small to carry a model. The rule (one place, used
by :func:`~procmetrics.analyse.measures.metrics.compute_period_metrics` and
:func:`~procmetrics.analyse.change.policy.compare_policy`):

1. Subsystems named by the user (``MetricConfig.subsystems``): exactly those.
2. Otherwise, when at most ``all_up_to`` subsystems have commits in the window
   (default 20): every one of them (small projects: nothing is left out).
3. Otherwise the ``limit`` largest by non-merge commit count (default 12) among
   those with at least ``min_commits`` commits in every segment (default 30;
   a segment is the whole window, or each side of a policy date). Ties are
   broken by name, so the choice is reproducible.

The whole-project ``"(all)"`` series is always computed and is not part of the
choice. Multiple-comparison corrections use the number of tests actually run
(never the number of subsystems in the store); the report states how many
subsystems were left out and why.

References
----------
Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate.
JRSS B 57(1), 289-300 (the family is the set of hypotheses actually tested).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from procmetrics.analyse.result import to_plain

SELECTION_COLUMNS = ["key", "n_commits", "n_min_segment", "eligible", "chosen"]


@dataclass(frozen=True)
class SubsystemSelection:
    """The subsystems chosen for their own analyses, and why the rest were not.

    ``chosen`` holds subsystem names (or ``"repo: subsystem"`` labels when
    grouped by repository), largest first. ``counts`` (not in ``to_dict``) has
    :data:`SELECTION_COLUMNS`, one row per subsystem with commits in the window.
    """

    chosen: tuple[str, ...]
    rule: str            # "named", "all", "largest"
    n_available: int
    n_left_out: int
    limit: int
    min_commits: int
    reason: str
    counts: pd.DataFrame = field(default_factory=pd.DataFrame, metadata={"json": False})

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def check_subsystem_names(commit_subsystems: pd.DataFrame | None, names: Any,
                          option: str = "--subsystem") -> None:
    """A subsystem name the store does not map is a usage mistake (:class:`ConfigError`,
    naming ``option`` and up to 12 known names), in every command and the report."""
    from procmetrics.errors import ConfigError

    cs = commit_subsystems
    known = set(cs["subsystem"].dropna().astype(str)) if cs is not None and len(cs) else set()
    for name in names or ():
        if name not in known:
            have = ("the store maps no subsystems" if not known else "known: "
                    + ", ".join(sorted(known)[:12]) + (", ..." if len(known) > 12 else ""))
            raise ConfigError(f"subsystem {name!r} does not exist in the store ({have})",
                              key=option)


def subsystem_counts(flags: pd.DataFrame, commit_subsystems: pd.DataFrame, *,
                     split_at: pd.Timestamp | None = None,
                     by_repo: bool = False) -> pd.DataFrame:
    """Commits per subsystem (one groupby), and the smallest count over segments.

    ``flags`` has ``repo``, ``hash``, ``date`` (the commits measured);
    returns columns ``repo`` (when ``by_repo``), ``subsystem``, ``key``,
    ``n_commits``, ``n_min_segment``.
    """
    keys = ["repo", "subsystem"] if by_repo else ["subsystem"]
    cs = commit_subsystems[["repo", "hash", "subsystem"]].drop_duplicates()
    m = cs.merge(flags[["repo", "hash", "date"]], on=["repo", "hash"], how="inner")
    if split_at is None:
        g = m.groupby(keys, sort=True).size().rename("n_commits").reset_index()
        g["n_min_segment"] = g["n_commits"]
    else:
        side = (m["date"] >= split_at).map({True: "after", False: "before"})
        w = m.assign(side=side.to_numpy()).groupby(keys + ["side"]).size().unstack(
            "side", fill_value=0).reindex(columns=["before", "after"], fill_value=0)
        g = pd.DataFrame({"n_commits": w.sum(axis=1),
                          "n_min_segment": w.min(axis=1)}).reset_index()
    g["key"] = (g["repo"].astype(str) + ": " + g["subsystem"].astype(str)) if by_repo \
        else g["subsystem"].astype(str)
    return g


def select_subsystems(counts: pd.DataFrame, *, named: tuple[str, ...] | None = None,
                      limit: int = 12, min_commits: int = 30,
                      all_up_to: int = 20) -> SubsystemSelection:
    """Apply the rule of the module docstring to :func:`subsystem_counts` output.

    ``named`` are subsystem names (in ``by_repo`` mode they match the
    subsystem in every repository).
    """
    c = counts.copy()
    n_avail = len(c)
    if named is not None:
        want = set(named)
        c["eligible"] = c["subsystem"].isin(want)
        c["chosen"] = c["eligible"]
        rule, reason = "named", "the subsystems named in the options"
    elif n_avail <= all_up_to:
        c["eligible"] = True
        c["chosen"] = True
        rule = "all"
        reason = (f"every subsystem with commits ({n_avail}; at most {all_up_to} are all "
                  "shown)")
    else:
        c["eligible"] = c["n_min_segment"] >= min_commits
        order = c[c["eligible"]].sort_values(["n_commits", "key"], ascending=[False, True])
        top = set(order["key"].head(limit))
        c["chosen"] = c["key"].isin(top)
        rule = "largest"
        n_small = int((~c["eligible"]).sum())
        n_cut = int(c["eligible"].sum()) - len(top)
        reason = (f"the {len(top)} largest of {n_avail} subsystems by commit count among "
                  f"those with at least {min_commits} commits in each segment; left out: "
                  f"{n_small} with fewer commits than that, {n_cut} beyond the first {limit}")
    c = c.sort_values(["chosen", "n_commits", "key"], ascending=[False, False, True])
    chosen = tuple(c.loc[c["chosen"], "key"])
    return SubsystemSelection(chosen=chosen, rule=rule, n_available=n_avail,
                              n_left_out=n_avail - len(chosen), limit=limit,
                              min_commits=min_commits, reason=reason,
                              counts=c.reset_index(drop=True))
