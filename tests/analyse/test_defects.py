"""The one-row-per-defect table: pairing rules, clocks, releases, flags."""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from procmetrics.analyse.lifetimes.defects import DEFECT_COLUMNS, build_defects
from procmetrics.errors import InsufficientData

T0 = pd.Timestamp("2022-01-01", tz="UTC")


def d(days: float) -> pd.Timestamp:
    return T0 + pd.Timedelta(days=days)


def link(fix, intro, fix_c, intro_c, *, status="resolved", fix_a=None, intro_a=None, pos=0):
    return {"repo": "r", "fix_hash": fix, "position": pos, "ref_hash": (intro or "x")[:12],
            "status": status, "introducer_hash": intro, "cited_subject": None,
            "subject_match": None, "in_trailer_block": True, "raw_text": "",
            "fix_author_date": d(fix_a if fix_a is not None else fix_c),
            "fix_committer_date": d(fix_c),
            "intro_author_date": d(intro_a if intro_a is not None else intro_c) if intro else pd.NaT,
            "intro_committer_date": d(intro_c) if intro else pd.NaT}


@pytest.fixture
def links() -> pd.DataFrame:
    rows = [
        link("f1", "i1", 10, 0),                      # plain defect: 10 days
        link("f2", "i2", 30, 5, pos=0),               # one fix naming two introducers
        link("f2", "i3", 30, 20, pos=1),
        link("f3", "i1", 40, 0),                      # a second fix of i1: follow-up
        link("f4", "i4", 50, 60),                     # fix dated before its introducer
        link("f5", None, 55, 0, status="unresolved"),
        link("f6", "i5", 70, 50, fix_a=52, intro_a=49),  # late-applied patch
    ]
    return pd.DataFrame(rows)


def test_pairing_rules(links):
    t = build_defects(links, end_date=d(100), links_from=None)
    df = t.defects
    assert list(df.columns) == DEFECT_COLUMNS
    assert sorted(df["introducer_hash"]) == ["i1", "i2", "i3", "i4", "i5"]
    i1 = df.set_index("introducer_hash").loc["i1"]
    # the lifetime ends at the FIRST fix; the later one is a follow-up
    assert i1["fix_hash"] == "f1" and i1["lifetime"] == 10
    assert i1["n_fixes"] == 2 and i1["follow_up_fixes"] == "f3"
    assert t.n_follow_up_fixes == 1
    # a fix with two introducers gives two defects
    assert set(df.loc[df["fix_hash"] == "f2", "introducer_hash"]) == {"i2", "i3"}
    assert t.link_counts == {"resolved": 6, "unresolved": 1}
    # window = end - introduction
    assert i1["window"] == 100


def test_negative_lifetimes_kept_flagged_and_caveated(links):
    t = build_defects(links, end_date=d(100), links_from=None)
    neg = t.defects[t.defects["negative"]]
    assert list(neg["introducer_hash"]) == ["i4"] and neg["lifetime"].iloc[0] == -10
    assert t.n_negative == 1
    assert any(c.code == "clock_skew" for c in t.caveats)


def test_author_basis_uses_author_dates(links):
    c = build_defects(links, end_date=d(100), links_from=None).defects.set_index("introducer_hash")
    a = build_defects(links, basis="author", end_date=d(100), links_from=None).defects.set_index("introducer_hash")
    assert c.loc["i5", "lifetime"] == 20 and a.loc["i5", "lifetime"] == 3
    assert (a["basis"] == "author").all()


def test_end_date_from_commits_and_covariates(links):
    commits = pd.DataFrame({
        "repo": "r", "hash": ["i1", "i2", "i3", "i4", "i5", "f1"],
        "committer_date": [d(x) for x in (0, 5, 20, 60, 50, 120)],
        "author_date": [d(x) for x in (0, 5, 20, 60, 49, 118)],
        "lines_added": pd.array([5, 10, None, 1, 2, 3], dtype="Int64"),
        "lines_deleted": pd.array([1, 0, None, 1, 0, 0], dtype="Int64"),
        "n_files": [1, 2, 1, 1, 1, 1]})
    subs = pd.DataFrame({"repo": "r", "hash": ["i1", "i1", "i2"], "subsystem": ["net", "fs", "fs"]})
    trailers = pd.DataFrame({"repo": "r", "hash": ["i2", "i3"], "key": ["Reviewed-by", "Signed-off-by"]})
    t = build_defects(links, commits=commits, commit_subsystems=subs, trailers=trailers,
                      period_cuts=["2022-01-15"], links_from=None)
    assert t.end_date == d(120)
    df = t.defects.set_index("introducer_hash")
    assert df.loc["i1", "subsystem"] == "(multiple)" and df.loc["i1", "subsystems"] == "fs;net"
    assert df.loc["i2", "subsystem"] == "fs" and df.loc["i3", "subsystem"] == "(none)"
    assert bool(df.loc["i2", "reviewed_introducer"]) and not bool(df.loc["i3", "reviewed_introducer"])
    assert df.loc["i1", "intro_lines"] == 6 and pd.isna(df.loc["i3", "intro_lines"])
    assert df.loc["i1", "period"] == "before" and df.loc["i3", "period"] == "after"


def test_release_basis_counts_tags_with_introducer_not_fix(links):
    # v1 contains i1 only; v2 contains i1 and f1; v3 contains everything up to f3
    cont = pd.DataFrame([
        {"tag": "v1", "commit_hash": "i1", "contains": True},
        {"tag": "v2", "commit_hash": "i1", "contains": True},
        {"tag": "v2", "commit_hash": "f1", "contains": True},
        {"tag": "v1", "commit_hash": "f1", "contains": False},
    ])
    t = build_defects(links, basis="releases", tag_containment=cont, end_date=d(100),
                      links_from=None)
    row = t.defects.set_index("introducer_hash").loc["i1"]
    assert row["lifetime"] == 1 and row["window"] == 2
    assert t.unit == "releases"
    with pytest.raises(InsufficientData):
        build_defects(links, basis="releases")


def test_invariant_to_row_order_and_json(links):
    a = build_defects(links, end_date=d(100), links_from=None).defects
    b = build_defects(links.sample(frac=1, random_state=3), end_date=d(100), links_from=None).defects
    pd.testing.assert_frame_equal(a, b)
    json.dumps(build_defects(links, end_date=d(100), links_from=None).to_dict())


def test_link_era_default_drops_introducers_before_the_first_link(links):
    t = build_defects(links, end_date=d(100))
    # the first linked fix is f1 at day 10 (committer clock; f4 at day 50 is negative
    # but still a linked fix, f1 is earlier): introducers before day 10 are left out
    assert t.links_from == d(10)
    assert sorted(t.defects["introducer_hash"]) == ["i3", "i4", "i5"]
    assert t.n_before_links == 2
    assert "introduced on or after 2022-01-11" in t.population
    assert any(c.code == "truncation_bias" and "link era" in c.message for c in t.caveats)
    assert build_defects(links, end_date=d(100), links_from=d(25)).n_before_links == 3


def test_link_era_removes_left_truncation_bias_simulation():
    """Known truth: log-normal lifetimes (median 120 days, sigma 1), introductions uniform
    over 6 years, fixes linked only from year 3 on. Keeping old introducers inflates the
    lifetimes (they enter only when long); the link-era restriction recovers the truth."""
    from scipy import stats

    from procmetrics.analyse.lifetimes.estimators import quantile_estimates

    rng = np.random.default_rng(31)
    n = 3000
    t0 = pd.Timestamp("2015-01-01", tz="UTC")
    u = rng.uniform(0, 6 * 365, n)
    life = np.exp(np.log(120.0) + rng.normal(size=n))
    fix = u + life
    seen = (fix >= 3 * 365) & (fix <= 6 * 365)     # linked, and before the end
    df = pd.DataFrame([link(f"f{i}", f"i{i}", 0, 0) for i in np.flatnonzero(seen)])
    days = {"fix": fix[seen], "intro": u[seen]}
    for col, key in (("fix_committer_date", "fix"), ("fix_author_date", "fix"),
                     ("intro_committer_date", "intro"), ("intro_author_date", "intro")):
        df[col] = t0 + pd.to_timedelta(days[key], unit="D")
    end = t0 + pd.Timedelta(days=6 * 365)
    med = {}
    for mode in (None, "first_link"):
        t = build_defects(df, end_date=end, links_from=mode)
        q = quantile_estimates(t.defects["lifetime"], t.defects["window"], quantiles=(0.5,),
                               n_boot=100, rng=np.random.default_rng(0))[0]
        med[mode] = (q, t.defects["lifetime"].max())
    # the estimator targets the median given lifetime <= the longest observed one
    q, t_max = med["first_link"]
    f_max = stats.norm.cdf(np.log(t_max / 120.0))
    truth = 120.0 * np.exp(stats.norm.ppf(0.5 * f_max))
    assert q.low <= truth <= q.high
    # old introducers enter only with long lifetimes: the unrestricted estimate is far off
    assert med[None][0].low > 1.2 * truth


def test_link_era_rules_sharing_one_row_computation_give_the_plain_tables(links):
    """Inside ``kept_results`` the era-free rows are computed once for every rule
    (``_defect_rows``) and each rule then edits its own copy: each table must equal the
    one built with nothing kept, whatever rule ran before it (pandas' frame comparison)."""
    from procmetrics.analyse import memo
    from procmetrics.analyse.memo import kept_results

    commits = pd.DataFrame({
        "repo": "r", "hash": ["i1", "i2", "i3", "i4", "i5", "f1"],
        "committer_date": [d(x) for x in (0, 5, 20, 60, 50, 120)],
        "author_date": [d(x) for x in (0, 5, 20, 60, 49, 118)],
        "lines_added": [1, 2, 3, 4, 5, 6], "lines_deleted": [0] * 6, "n_files": [1] * 6})
    rules = [None, "first_link", "settled", d(15), None]

    def fields(t):
        return {k: v for k, v in vars(t).items() if not isinstance(v, pd.DataFrame)}

    plain = [build_defects(links, commits=commits, links_from=r) for r in rules]
    with kept_results():
        kept = [build_defects(links, commits=commits, links_from=r) for r in rules]
        computed = [k for k in memo._KEPT.get() if k[1] == "_defect_rows"]
    assert len(computed) == 1                  # one era-free computation for all rules
    for want, got in zip(plain, kept):
        pd.testing.assert_frame_equal(got.defects, want.defects)
        pd.testing.assert_frame_equal(got.excluded, want.excluded)
        assert repr(fields(got)) == repr(fields(want))
    assert [len(t.defects) for t in kept] != [len(kept[0].defects)] * len(rules)  # rules differ
