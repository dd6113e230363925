"""The evidence pack: follow every claim's links from the HTML and recount the claim's n
from the CSV rows; page one carries the summary (hashes becoming links when asked:
tests/report/test_folder.py, whose report is written with --commit-url)."""
from __future__ import annotations

import csv
import json
import shutil
import subprocess
from pathlib import Path

import pytest

from procmetrics.report.build import make_report
from procmetrics.report.model import ReportOptions
from tests.report.html_links import Links

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def demo_run(request, tmp_path_factory) -> tuple[Path, Path]:
    """(repository, report folder): the README's ``make demo`` (the shared session fixture
    ``make_demo``: the full demo with the demo claims and scope files); without make, the
    same report written here from the small history of tests/report/conftest.py."""
    if shutil.which("make") is not None:
        run = request.getfixturevalue("make_demo")
        assert run.returncode == 0, run.output
        return run.repo, run.out
    built = request.getfixturevalue("built")
    out = tmp_path_factory.mktemp("evidence") / "rep"
    make_report(str(built.store), out, ReportOptions(
        policy=built.policy, claims_path=str(ROOT / "sample_repos" / "demo_claims.toml"),
        scope_file=str(ROOT / "sample_repos" / "demo_scopes.toml"), pdf_engine="none"))
    return built.repo, out


@pytest.fixture(scope="module")
def demo(demo_run):
    out = demo_run[1]
    html = (out / "report.html").read_text("utf-8")
    parser = Links()
    parser.feed(html)
    return out, json.loads((out / "report.json").read_text("utf-8")), html, parser


def _rows(path: Path) -> list[dict[str, str]]:
    with open(path, encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def test_every_claim_links_its_evidence_and_the_rows_reproduce_its_n(demo):
    out, doc, _, parser = demo
    checked = 0
    for i, claim in enumerate(doc["claims"], 1):
        hrefs = parser.by_claim.get(f"claim-{i}", [])
        files = [h for h in hrefs if h.startswith("evidence/")]
        n = claim["evidence"]["n"]
        if claim["verdict"] == "not_supportable":
            assert not files, claim["id"]       # no data can carry it: none is offered
            continue
        assert files, f"claim {claim['id']} links no evidence"
        assert all(f.startswith(f"evidence/{claim['id']}/") for f in files)
        for f in files:
            assert (out / f).is_file(), f
        if n is None:
            continue
        main = out / files[0]
        counted = sum(r["counted"] == "true" for r in _rows(main))
        print(f"{claim['id']}: n = {n}, counted rows in {files[0]} = {counted}")
        assert counted == n, claim["id"]
        assert claim["evidence_pack"]["reproduces_n"] is True
        checked += 1
    assert checked >= 3            # shares, trends and lifetimes at least


def test_share_rows_recount_numerator_and_denominator(demo):
    """review-rose: the counted commits recount n and the per-period counts the model used."""
    out, doc, _, _ = demo
    claim = next(c for c in doc["claims"] if c["id"] == "review-rose")
    if claim["verdict"] == "undecidable":
        pytest.skip("too little data in this history for the step model")
    rows = _rows(out / "evidence" / "review-rose" / "commits.csv")
    counted = [r for r in rows if r["counted"] == "true"]
    assert len(counted) == claim["evidence"]["n"]
    # the per-period counts the model was fitted on are the counted commits, recounted
    periods = _rows(out / "evidence" / "review-rose" / "periods.csv")
    for per in periods:
        mine = [r for r in counted if r["period"] == per["period"]
                and (r["side"] == "after") == (per["after"] == "true")]
        assert (len(mine), sum(r["in_numerator"] == "true" for r in mine)) == \
            (int(per["commits"]), int(per["in_numerator"])), per["period"]
    # every commit counted as reviewed names the trailer that made it so
    assert all(r["review_trailers"] for r in rows if r["in_numerator"] == "true")
    assert not any(r["review_trailers"] for r in rows if r["in_numerator"] == "false")


def test_commit_ledger_matches_git_and_explains_left_out_commits(demo, demo_run):
    out, doc, _, _ = demo
    repo = demo_run[0]
    rows = _rows(out / "evidence" / "commits.csv")
    merges = subprocess.run(["git", "-C", str(repo), "rev-list", "--merges", "--count",
                             "HEAD"], capture_output=True, text=True, check=True).stdout
    total = subprocess.run(["git", "-C", str(repo), "rev-list", "--count", "HEAD"],
                           capture_output=True, text=True, check=True).stdout
    assert len(rows) == int(total)                                    # oracle: git plumbing
    assert sum(r["merge"] == "true" for r in rows) == int(merges)
    assert all(r["excluded_because"] for r in rows if r["in_share_denominators"] == "false")
    fig = next(f for f in doc["figures"] if f["key"] == "series-review-coverage")
    if fig["n"] < int(total):
        assert f"{int(merges):,} merge commits" in fig["values"]["denominator"]


def test_page_one_is_the_summary_then_the_contents(demo):
    _, doc, html, parser = demo
    ids = parser.ids
    assert ids.index("summary") < ids.index("claims-summary") < ids.index("scope")
    front = html[:html.index('<nav class="toc"')]
    for c in doc["claims"]:
        assert c["id"] in front and c["verdict_label"] in front
    assert "never replace" in front and doc["store_checksum"] in front
    assert "Robustness" in front and "interval" in front


def test_lifetime_step_rows_count_only_its_local_window():
    """``lifetimes_shortened_at`` fits only defects introduced within ``window_years`` of
    the date: its evidence rows mark the others excluded, so the counted rows reproduce
    the verdict's n (a simulated history with defects over ten years, window 1 year)."""
    import numpy as np

    from procmetrics.claims.base import Claim
    from procmetrics.claims.registry import evaluate_claim
    from procmetrics.report.evidence import claim_pack
    from tests.claims.sim import lifetime_history

    ctx, at = lifetime_history(np.random.default_rng(3), n_visible=900)
    claim = Claim("s", "x", "lifetimes_shortened_at",
                  {"date": at.date(), "window_years": 1.0})
    v = evaluate_claim(claim, ctx)
    pack = claim_pack(claim, ctx, v.to_dict())
    assert v.n and pack.counted == v.n and pack.reproduces_n
    reasons = pack.files["defects.csv"]["exclusion_reason"]
    assert (reasons == "introduced more than 1 years from the date").sum() > 100


def test_commit_ledger_lookups_and_order_are_pandas_map_and_sort():
    """The ledger finds each commit's flags by one shared lookup and orders rows with
    ``numpy.lexsort``; oracle: pandas' ``Series.map`` of each flag column and
    ``sort_values(["date", "hash"])`` (missing dates last) on the same rows. Covers
    merges without flags, a commit without a date, repeated dates, a duplicated hash,
    non-ASCII hash text and an empty flags table."""
    import numpy as np
    import pandas as pd

    from procmetrics.report.evidence import commit_ledger

    rng = np.random.default_rng(20261204)
    n = 300
    hashes = [f"{rng.integers(0, 16 ** 6):06x}{i:04d}" for i in range(n)]
    hashes[5], hashes[9] = "zé-önly", "z\u00e9"
    dates = pd.Series(pd.to_datetime(rng.integers(0, 40, n) * 86400, unit="s", utc=True))
    dates[[3, 17]] = pd.NaT
    commits = pd.DataFrame({
        "hash": hashes + [hashes[0]], "committer_date": pd.concat([dates, dates[:1]]).values,
        "is_merge": pd.array(list(rng.random(n) < 0.1) + [False], dtype="boolean"),
        "n_files": list(rng.integers(0, 3, n)) + [1]})
    kept = ~commits["is_merge"].to_numpy(bool)
    flags = pd.DataFrame({
        "hash": commits["hash"][kept], "date": commits["committer_date"][kept],
        "reviewed": rng.random(kept.sum()) < 0.5, "independent": rng.random(kept.sum()) < 0.3,
        "n_reviewers": rng.integers(0, 3, kept.sum()), "fix": rng.random(kept.sum()) < 0.2,
        "fix_ref": rng.random(kept.sum()) < 0.25,
        "churn": np.where(rng.random(kept.sum()) < 0.2, np.nan, rng.integers(0, 50, kept.sum()))})
    trailers = pd.DataFrame({"hash": [hashes[1], hashes[1], hashes[5]],
                             "key": ["Reviewed-by", "Acked-by", "Reviewed-by"],
                             "value": ["Ada <a@x>", "Bo <b@x>", "Cy <c@x>"]})
    fix_links = pd.DataFrame({"fix_hash": [hashes[2]], "ref_hash": ["abcdef123456"],
                              "status": ["resolved"]})
    for fl in (flags, flags.iloc[:0]):
        got = commit_ledger(commits, trailers, fix_links, fl)
        c = commits.drop_duplicates(subset=["hash"]).reset_index(drop=True)
        f = fl.drop_duplicates(subset=["hash"]).set_index("hash")
        assert got["hash"].tolist() == (c.assign(date=c["committer_date"])
                                        .sort_values(["date", "hash"], kind="mergesort")
                                        ["hash"].tolist())
        by_hash = got.set_index("hash")
        for col, name in (("reviewed", "reviewed"), ("n_reviewers", "n_reviewers"),
                          ("fix", "fix_resolved"), ("churn", "lines_changed")):
            want = c["hash"].map(f[col])
            got_col = by_hash[name].reindex(c["hash"]).reset_index(drop=True)
            pd.testing.assert_series_equal(got_col, want.rename(name), check_names=False)
        assert (by_hash.loc[hashes[1], "review_trailers"]
                == "Reviewed-by: Ada <a@x>; Acked-by: Bo <b@x>")
        assert by_hash.loc[hashes[2], "fixes_references"] == "abcdef123456 resolved"
        merged = by_hash["merge"]
        assert (by_hash.loc[merged, "excluded_because"]
                == "merge commit (the measures count non-merge commits)").all()


def test_before_after_sides_are_the_per_date_comparison():
    """``before_after`` (the report's distribution sides and the claims' evidence rows)
    against a Python comparison per date, missing dates "before"; its two strings are
    shared, not one per row."""
    import numpy as np
    import pandas as pd

    from procmetrics.report.evidence import before_after

    rng = np.random.default_rng(7)
    dates = pd.Series(pd.to_datetime(rng.integers(0, 100, 500) * 86400, unit="s", utc=True))
    dates[[0, 10]] = pd.NaT
    at = pd.Timestamp(50 * 86400, unit="s", tz="UTC")
    got = before_after(dates, at)
    assert got.tolist() == ["after" if d >= at else "before" for d in dates]
    assert len({id(v) for v in got}) == 2
