"""Hash resolution: bisect prefix search, status rules, and git as the oracle."""
from __future__ import annotations

import pytest

from procmetrics.mine.git import GitRepo
from procmetrics.mine.resolve import (
    classify, find_candidates, prefix_matches, subject_match,
)
from tests.git_support import fast_import_commits

HASHES = sorted(["abc1234000", "abc1234999", "abd0000000", "ffff000000", "0000000001"])


@pytest.mark.parametrize("prefix,expected", [
    ("abc1234", ["abc1234000", "abc1234999"]), ("abc12340", ["abc1234000"]),
    ("abd", ["abd0000000"]), ("abe", []), ("ffff000000", ["ffff000000"]), ("0", ["0000000001"]),
])
def test_prefix_matches(prefix, expected):
    assert prefix_matches(HASHES, prefix) == expected


def test_classify_statuses():
    assert classify([], "c") == ("unresolved", None)
    assert classify(["abc1234000", "abc1234999"], "c") == ("ambiguous", None)
    assert classify(["abd0000000"], "c") == ("resolved", "abd0000000")
    assert classify(["abd0000000"], "abd0000000") == ("self", "abd0000000")
    assert classify(["abd0000000", "abd0000000"], "c") == ("resolved", "abd0000000")


@pytest.mark.parametrize("cited,actual,match", [
    ("net: fix leak", "net: fix leak", True), ("net:  fix  LEAK.", "net: fix leak", True),
    ("net: fix...", "net: fix leak in rx path", True), ("net: fix", "net: fix leak", False),
    (None, "x", None), ("x", None, None),
])
def test_subject_match(cited, actual, match):
    assert subject_match(cited, actual) is match


@pytest.fixture(scope="module")
def many_commits(tmp_path_factory):
    """1,500 commits: some pairs of hashes share a 5-digit prefix (birthday bound)."""
    from tests.git_support import GitHistory
    h = GitHistory.create(tmp_path_factory.mktemp("many") / "repo")
    revs = fast_import_commits(h, 1500)
    return h, revs


def _collision(revs, width):
    seen = {}
    for r in revs:
        if r[:width] in seen:
            return r[:width]
        seen[r[:width]] = r
    return None


def test_real_ambiguity_matches_git(many_commits):
    h, revs = many_commits
    repo = GitRepo.open(h.path)
    prefix = _collision(revs, 5) or _collision(revs, 4)
    assert prefix is not None
    # oracle: every object git lists for the prefix, restricted to commits
    listed = h.git("rev-parse", f"--disambiguate={prefix}").split()
    commits = sorted(x for x in listed if h.git("cat-file", "-t", x) == "commit")
    assert len(commits) >= 2
    store = sorted(revs[:700])          # the store holds only part of the history
    found = find_candidates(repo, revs[-1], [prefix],
                            lambda refs: {r: prefix_matches(store, r) for r in refs})
    assert sorted(found[prefix]) == commits
    assert classify(found[prefix], revs[0])[0] == "ambiguous"


def test_unique_prefixes_match_rev_parse(many_commits):
    h, revs = many_commits
    repo = GitRepo.open(h.path)
    store = sorted(revs[:700])
    refs = [revs[10][:12], revs[1000][:8], revs[1200], revs[1400][:7], "deadbeefdeadbeef"]
    found = find_candidates(repo, revs[-1], refs,
                            lambda rs: {r: prefix_matches(store, r) for r in rs})
    for r in refs[:4]:
        status, target = classify(found[r], "0" * 40)
        assert (status, target) == ("resolved", h.git("rev-parse", f"{r}^{{commit}}"))
    assert classify(found["deadbeefdeadbeef"], "0" * 40) == ("unresolved", None)


def test_only_branches_and_tags_count(git_history):
    h = git_history()
    base = h.commit("base", files={"a": "1\n"})
    h.branch("side")
    h.checkout("side")
    side = h.commit("on a side branch", files={"b": "1\n"})
    h.checkout("main")
    pr = h.commit("pull request only", files={"c": "1\n"})
    h.git("update-ref", "refs/pull/7/head", pr)
    h.git("reset", "-q", "--hard", base)
    repo = GitRepo.open(h.path)
    found = find_candidates(repo, base, [side[:12], pr[:12]], lambda rs: {r: [] for r in rs})
    assert found[side[:12]] == [side]
    assert found[pr[:12]] == []


def test_settled_one_by_one_as_the_walk_settles_them(many_commits, monkeypatch):
    """Oracle: the walk over every reachable commit (``git rev-list``). A few references
    that git must settle are asked about one by one; the answers must be the walk's."""
    from procmetrics.mine import resolve

    h, revs = many_commits
    h.git("update-ref", "refs/remotes/origin/pull/9/head", revs[-1])   # excluded ref kind
    repo = GitRepo.open(h.path)
    tip = revs[1100]                 # commits after it: on main only, not below the tip
    store = sorted(revs[:700])
    prefix = _collision(revs, 5) or _collision(revs, 4)
    refs = [prefix, revs[900][:10], revs[1300][:12], revs[1450][:9], "deadbeef0"]

    def stored(rs):
        return {r: prefix_matches(store, r) for r in rs}

    walked = {}
    monkeypatch.setattr(resolve, "ONE_BY_ONE", 0)
    walked = {r: sorted(v) for r, v in resolve.find_candidates(repo, tip, refs, stored).items()}
    monkeypatch.setattr(resolve, "ONE_BY_ONE", 16)
    asked = {r: sorted(v) for r, v in resolve.find_candidates(repo, tip, refs, stored).items()}
    assert asked == walked
    assert walked[revs[1300][:12]] == [revs[1300]]      # reachable through main
    assert walked["deadbeef0"] == []


def test_refs_count_one_by_one_as_in_the_walk(git_history, monkeypatch):
    """Remote-tracking branches count, remote pull-request refs do not: the same answers
    asked one by one as from the walk (oracle: ``git rev-list`` with its excludes)."""
    from procmetrics.mine import resolve

    h = git_history()
    base = h.commit("base", files={"a": "1\n"})
    fork = h.commit("fetched from a fork", files={"f": "1\n"})
    h.git("update-ref", "refs/remotes/upstream/main", fork)
    h.git("reset", "-q", "--hard", base)
    review = h.commit("under review", files={"r": "1\n"})
    h.git("update-ref", "refs/remotes/origin/pull/12/head", review)
    h.git("reset", "-q", "--hard", base)
    repo = GitRepo.open(h.path)
    refs = [fork[:12], review[:12]]
    empty = lambda rs: {r: [] for r in rs}       # noqa: E731 - nothing stored
    monkeypatch.setattr(resolve, "ONE_BY_ONE", 0)
    walked = resolve.find_candidates(repo, base, refs, empty)
    monkeypatch.setattr(resolve, "ONE_BY_ONE", 16)
    asked = resolve.find_candidates(repo, base, refs, empty)
    assert walked == asked == {fork[:12]: [fork], review[:12]: []}
