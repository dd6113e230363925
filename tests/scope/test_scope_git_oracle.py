"""In-scope commit counts against plain git on the demo history (the oracle).

``git rev-list --count --no-merges --full-history HEAD -- <pathspecs>`` counts the
non-merge commits whose diff against their parent touches a matching path: the
scope rule (adds, modifies, deletes, renames from or to). ``--full-history`` is
needed: without it git simplifies history at merges and hides side-branch commits
whose changes the merge result does not show (on the 1,500-commit demo, one commit
of the ``motor_can`` scope: 312 without, 313 with). Excludes are git's
``:(exclude,glob)`` magic, the window git's ``--since``/``--until`` (committer
date, both bounds inclusive).
"""
from __future__ import annotations

import pandas as pd
import pytest

from procmetrics.scope.apply import ScopeRequest
from procmetrics.store import open_store
from procmetrics.store.repodata import load_store_data
from tests.scope.scope_support import git

SCOPES = """
[scope.motor_can]
include = ["motor", "drivers/can/**"]
[scope.headers]
include = ["**/*.h"]
exclude = ["include/**"]
[scope.shipped]
include = ["motor/**", "drivers/**", "hal/*.c", "power"]
exclude = ["drivers/adc/**", "**/*_1*.c"]
[scope.ghost]
include = ["motor/**", "firmware/legacy/**", "drivers/*"]
exclude = ["nothing/here/**"]
"""
# the same scopes as git pathspecs
PATHSPECS = {
    "motor_can": ["motor", ":(glob)drivers/can/**"],
    "headers": [":(glob)**/*.h", ":(exclude,glob)include/**"],
    "shipped": [":(glob)motor/**", ":(glob)drivers/**", ":(glob)hal/*.c", "power",
                ":(exclude,glob)drivers/adc/**", ":(exclude,glob)**/*_1*.c"],
    "ghost": [":(glob)motor/**", ":(glob)firmware/legacy/**", ":(glob)drivers/*"],
}


@pytest.fixture(scope="module")
def scopes(tmp_path_factory):
    f = tmp_path_factory.mktemp("scopes") / "scopes.toml"
    f.write_text(SCOPES, encoding="utf-8")
    return f


def _load(store, request):
    engine = open_store(str(store), create=False, readonly=True)
    try:
        return load_store_data(engine, "aurora-fw", within=request)
    finally:
        engine.dispose()


def _non_merge(df: pd.DataFrame) -> pd.DataFrame:
    return df[~df["is_merge"].astype("boolean").fillna(False).astype(bool)]


@pytest.mark.parametrize("name", sorted(PATHSPECS))
def test_in_scope_commits_are_the_commits_git_lists(demo, scopes, name):
    repo, store = demo
    data = _load(store, ScopeRequest(f"{scopes}:{name}"))
    ours = set(_non_merge(data["commits"])["hash"])
    want = set(git(repo, "rev-list", "--no-merges", "--full-history", "HEAD", "--", *PATHSPECS[name]).split())
    count = int(git(repo, "rev-list", "--count", "--no-merges", "--full-history", "HEAD", "--",
                    *PATHSPECS[name]))
    print(f"{name}: {len(ours)} in-scope commits; git rev-list --count: {count}; "
          f"share {data.scope.share:.3f}")
    assert len(want) == count > 0
    assert ours == want
    assert data.scope.n_commits == count
    all_nm = int(git(repo, "rev-list", "--count", "--no-merges", "--full-history", "HEAD"))
    assert data.scope.n_commits_history == all_nm
    assert data.scope.share == pytest.approx(count / all_nm)


def test_patterns_matching_nothing_are_listed(demo, scopes):
    _, store = demo
    s = _load(store, ScopeRequest(f"{scopes}:ghost")).scope
    assert s.unmatched_include == ("firmware/legacy/**", "drivers/*")
    assert s.unmatched_exclude == ("nothing/here/**",)
    assert any("scope_unmatched" in line and "firmware/legacy/**" in line for line in s.lines())


@pytest.mark.parametrize("name", ["motor_can", "shipped"])
def test_window_bounds_match_git_since_until(demo, scopes, name):
    repo, store = demo
    tags = git(repo, "tag", "--sort=creatordate").split()
    lo_tag, hi_tag = tags[len(tags) // 4], tags[3 * len(tags) // 4]
    lo = git(repo, "log", "-1", "--format=%cI", lo_tag).strip()
    hi = git(repo, "log", "-1", "--format=%cI", hi_tag).strip()
    data = _load(store, ScopeRequest(f"{scopes}:{name}", since=lo_tag, until=hi_tag))
    count = int(git(repo, "rev-list", "--count", "--no-merges", "--full-history", f"--since={lo}",
                    f"--until={hi}", "HEAD", "--", *PATHSPECS[name]))
    window = int(git(repo, "rev-list", "--count", "--no-merges", "--full-history", f"--since={lo}",
                     f"--until={hi}", "HEAD"))
    print(f"{name} {lo_tag}..{hi_tag}: {data.scope.n_commits} (git {count}) of "
          f"{data.scope.n_commits_window} (git {window})")
    assert 0 < count < window
    assert len(_non_merge(data["commits"])) == data.scope.n_commits == count
    assert data.scope.n_commits_window == window
    # defect analyses end at the window's end, not at the last in-scope commit
    assert data["defect_commits"]["committer_date"].max() == pd.Timestamp(hi).tz_convert("UTC")
    # defects of the window: introducer in scope and committed from --since, fix by --until
    touched = set(git(repo, "rev-list", "--full-history", f"--since={lo}", "HEAD", "--",
                      *PATHSPECS[name]).split())
    by_until = set(git(repo, "rev-list", f"--until={hi}", "HEAD").split())
    fl = data.whole_tree["fix_links"]
    fl = fl[fl["status"] == "resolved"]
    want = fl[fl["introducer_hash"].isin(touched) & fl["fix_hash"].isin(by_until)]
    got = data["fix_links"][data["fix_links"]["status"] == "resolved"]
    assert set(got["fix_hash"] + got["introducer_hash"]) == set(
        want["fix_hash"] + want["introducer_hash"])
    assert 0 < data.scope.n_defects == len(want)


def test_a_defect_is_in_scope_when_its_introducer_touched_the_scope(demo, scopes):
    repo, store = demo
    data = _load(store, ScopeRequest(f"{scopes}:motor_can"))
    whole = data.whole_tree["fix_links"]
    touched = set(git(repo, "rev-list", "--full-history", "HEAD", "--", *PATHSPECS["motor_can"]).split())
    resolved = whole[whole["status"] == "resolved"]
    want = set(resolved.loc[resolved["introducer_hash"].isin(touched), "fix_hash"]
               + "/" + resolved.loc[resolved["introducer_hash"].isin(touched),
                                    "introducer_hash"])
    got_rows = data["fix_links"][data["fix_links"]["status"] == "resolved"]
    got = set(got_rows["fix_hash"] + "/" + got_rows["introducer_hash"])
    print(f"in-scope defects: {len(got)} of {len(resolved)} resolved links")
    assert got == want and 0 < len(got) < len(resolved)
    assert data.scope.n_defects == len(got)


def test_line_share_is_the_in_scope_share_of_changed_lines(demo, scopes):
    """Recount with git --numstat for a few selected commits (line counts mined?)."""
    repo, store = demo
    data = _load(store, ScopeRequest(f"{scopes}:motor_can"))
    c = data["commits"]
    if c["lines_added"].isna().any():
        assert data.scope.line_share is None
        pytest.skip("the demo store was mined without line counts")
    spec = PATHSPECS["motor_can"]
    total = scoped = 0
    for h in c["hash"]:
        for line in git(repo, "show", "--numstat", "--format=", "-M", h).splitlines():
            a, d, _ = line.split("\t", 2)
            total += int(a) + int(d) if a != "-" else 0
        for line in git(repo, "show", "--numstat", "--format=", "-M", h, "--",
                        *spec).splitlines():
            a, d, _ = line.split("\t", 2)
            scoped += int(a) + int(d) if a != "-" else 0
    print(f"line share: ours {data.scope.line_share:.4f}, git numstat {scoped / total:.4f}")
    assert data.scope.line_share == pytest.approx(scoped / total, abs=0.01)
