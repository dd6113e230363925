"""Which fix and revert links a run resolves again, and their resolution.

A reference's outcome depends on the commits reachable from the repository's tips
(:mod:`procmetrics.mine.resolve`); :func:`resolve_links` stores those tips with the
statuses and, at the next run, checks again only the links that the commits new to
that history (or the run's own) can change (DEVELOPERS.md, "What the miner relies on
to stay fast on a large store").
"""
from __future__ import annotations

from procmetrics.mine.git import GitRepo
from procmetrics.mine.references import HEX_MIN
from procmetrics.mine.resolve import (MOST_NEW_COMMITS, classify, commits_since,
                                      find_candidates, reachable_tips, subject_match)
from procmetrics.store.linkstore import LinkRow
from procmetrics.store.writer import StoreWriter


def resolve_links(git: GitRepo, writer: StoreWriter, repo_id: int, run_id: int,
                  tip: str) -> int:
    """(Re-)resolve the references whose outcome this run may have changed.

    A reference's outcome depends on the commits reachable from the repository's tips
    (:mod:`procmetrics.mine.resolve`). The tips each resolution used are stored with
    the statuses. When the last run that resolved completed, and the history reachable
    from those tips is still all reachable now, the commits reachable now and not then
    are the only ones that can change an outcome: a run then checks the links of its
    own commits and the links whose reference is a prefix of a commit new to the
    history or of its own (which covers a link resolved to a commit it now stores: a
    resolved reference is a prefix of its target). Otherwise (the first
    run, a deleted branch or tag, a failed run, a store from before schema 5, a large
    fetch) it checks every link not resolved to a stored commit, as it did before.
    At a million commits the unsettled links are 5,000 references that git resolves to
    nothing: checking them again took about 2 s of each incremental run.
    """
    full_len = len(tip)
    tips = reachable_tips(git, tip)
    todo = _links_changed_since(git, writer, repo_id, run_id, tips)
    if todo is None:
        todo = writer.links_to_check(repo_id, run_id, full_len)
    if not todo:
        writer.update_links([], repo_id=repo_id, run_id=run_id, tips=tips)
        return 0
    cands = find_candidates(git, tip, {ln.ref_hash for ln in todo},
                            lambda refs: writer.stored_matches(repo_id, refs, full_len))
    outcome = [(ln, *classify(cands[ln.ref_hash], ln.citing_hash)) for ln in todo]
    wanted = sorted({tg for ln, st, tg in outcome
                     if ln.kind == "fix" and ln.cited_subject is not None and tg})
    subjects = writer.stored_subjects(repo_id, wanted) if wanted else {}
    missing = [h for h in wanted if h not in subjects]
    if missing:
        for line in git.batch(["log", "--no-walk=unsorted", "--stdin", "--format=%H %s"],
                              missing):
            h, _, subj = line.partition(" ")
            subjects[h] = subj
    updates = [(ln, st, tg, subject_match(ln.cited_subject, subjects.get(tg)) if tg else None)
               for ln, st, tg in outcome]
    writer.update_links(updates, repo_id=repo_id, run_id=run_id, tips=tips)
    return len(updates)


def _links_changed_since(git: GitRepo, writer: StoreWriter, repo_id: int, run_id: int,
                         tips: list[str]) -> list[LinkRow] | None:
    """The links :func:`resolve_links` must check when the stored statuses still hold
    for the history they were resolved against; None when that is not known."""
    before = writer.checked_tips(repo_id)
    if before is None:
        return None
    new = commits_since(git, before, tips)
    if new is None:
        return None
    own = writer.run_hashes(repo_id, run_id)
    if len(own) > MOST_NEW_COMMITS:
        return None
    return writer.links_to_recheck(repo_id, run_id, [*new, *own], HEX_MIN)
