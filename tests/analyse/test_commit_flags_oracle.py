"""``commit_flags`` against its definition, row by row in plain Python.

The function joins review lines to commits by integer keys and counts per position
(fast at a million commits); the oracle reads the module docstring's definitions
literally: a commit is reviewed when one of its lines has a review key (case-blind),
independently reviewed when such a line's e-mail (the stored person's, else the address
in the value) differs case-blind from the author's, and its reviewers are the distinct
such e-mails. Frames mix repositories, merges, a duplicated commit row, review lines of
commits that are not there, missing e-mails and values that differ only after a NUL.
"""
from __future__ import annotations

import re

import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags

EMAILS = ["ann@x.org", "ANN@x.org ", "bo@y.org", "", "\x00", "c\x00@z"]
REPOS = ["fw", "fw\x00", "tools"]
HASHES = ["a1", "b2", "c3", "d4"]
KEYS = ["Reviewed-by", "reviewed-BY", "Acked-by", "Signed-off-by", "Tested-by"]


def _fold(v):
    return None if v is None else v.strip().casefold()


commit_rows = st.lists(st.tuples(st.sampled_from(REPOS), st.sampled_from(HASHES),
                                 st.sampled_from(EMAILS), st.sampled_from(EMAILS),
                                 st.booleans()), min_size=1, max_size=8)
line_rows = st.lists(st.tuples(st.sampled_from(REPOS), st.sampled_from(HASHES),
                               st.sampled_from(KEYS),
                               st.one_of(st.none(), st.sampled_from(EMAILS)),
                               st.sampled_from(["x", "Name <Bo@Y.org>", "<\x00@q>"])),
                     max_size=12)


@settings(max_examples=150, deadline=None)
@given(commit_rows, line_rows, st.booleans())
def test_flags_follow_their_definition(crows, lines, include_merges) -> None:
    commits = pd.DataFrame({
        "repo": [r[0] for r in crows], "hash": [r[1] for r in crows],
        "author_email": [r[2] for r in crows], "committer_email": [r[3] for r in crows],
        "is_merge": [r[4] for r in crows],
        "committer_date": pd.Timestamp("2024-01-01", tz="UTC"),
        "n_resolved_fixes": 0, "n_fix_refs": 0, "is_revert": False,
        "stable_request": False, "subject": "s", "lines_added": 1, "lines_deleted": 2,
    }).astype({"repo": object, "hash": object, "author_email": object,
               "committer_email": object})
    trailers = pd.DataFrame({"repo": [r[0] for r in lines], "hash": [r[1] for r in lines],
                             "key": [r[2] for r in lines],
                             "person_email": [r[3] for r in lines],
                             "value": [r[4] for r in lines]}, dtype=object)
    cfg = MetricConfig(include_merges=include_merges)
    got = commit_flags(commits, trailers, cfg)

    kept, seen = [], set()
    for r in crows:
        if (include_merges or not r[4]) and (r[0], r[1]) not in seen:
            seen.add((r[0], r[1]))
            kept.append(r)
    assert list(zip(got["repo"], got["hash"])) == [(r[0], r[1]) for r in kept]
    review = {k.casefold() for k in cfg.review_keys}
    for i, r in enumerate(kept):
        mine = [ln for ln in lines if (ln[0], ln[1]) == (r[0], r[1])
                and ln[2].casefold() in review]
        emails = []
        for ln in mine:
            e = _fold(ln[3])
            if e is None:
                m = re.search(r"<([^<>\s]+@[^<>\s]+)>", ln[4])
                e = _fold(m.group(1)) if m else None
            emails.append(e)
        author = _fold(r[2])
        assert got["reviewed"].iloc[i] == bool(mine)
        assert got["independent"].iloc[i] == any(e is not None and e != author
                                                  for e in emails)
        assert got["n_reviewers"].iloc[i] == len({e for e in emails if e is not None})
        assert got["author"].iloc[i] == author
        assert got["applied_other"].iloc[i] == (author != _fold(r[3]))
        assert got["unreviewed_self"].iloc[i] == (author == _fold(r[3]) and not mine)
