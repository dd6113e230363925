"""Cross-repository analyses: ``repo`` as a grouping variable of the tidy tables.

Two seeded synthetic histories (``bench/generate.py``: invented people and
folders) are mined into one store with :func:`procmetrics.mine.multi.mine_many`.
The analyses are then run per repository (split on the ``repo`` column) and
checked against values computed straight from git plumbing (``git log`` with
git's own trailer parser, ``git rev-parse`` for cited hashes), so no number
comes from procmetrics' own parser.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from lifelines import KaplanMeierFitter

from procmetrics.analyse.lifetimes.defects import build_defects
from procmetrics.analyse.lifetimes.analysis import analyse_lifetimes
from procmetrics.analyse.measures.metrics import ALL, MetricConfig, compute_period_metrics
from procmetrics.analyse.change.twosample import compare_distributions
from procmetrics.mine import MineOptions
from procmetrics.mine.multi import mine_many
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from tests.git_support import isolated_env

ROOT = Path(__file__).resolve().parents[2]
REVIEW = ("Reviewed-by", "Acked-by", "Tested-by")


def _generate(out: Path, seed: int, commits: int, years: float) -> Path:
    subprocess.run([sys.executable, str(ROOT / "bench" / "generate.py"), "--out", str(out),
                    "--commits", str(commits), "--extra", "0", "--files", "150", "--dirs", "12",
                    "--maintainers", "12", "--people", "40", "--seed", str(seed), "--years", str(years),
                    "--fix-distance", "40"], check=True, capture_output=True)
    return out


def _git(repo: Path, *args: str) -> str:
    return subprocess.run(["git", "-C", str(repo), *args], check=True, capture_output=True,
                          env=isolated_env(repo.parent)).stdout.decode("utf-8", "replace")


def _git_reviewed(repo: Path) -> tuple[int, int]:
    """(non-merge commits, those with a review-type trailer) by git's trailer parser."""
    keys = ",".join(f"key={k}" for k in REVIEW)
    out = _git(repo, "log", "--no-merges", f"--format=%H%x00%(trailers:{keys},valueonly,"
               "separator=%x01)%x02", "main")
    rows = [r.strip("\n") for r in out.split("\x02") if r.strip("\n")]
    return len(rows), sum(1 for r in rows if r.split("\x00", 1)[1].strip())


def _git_lifetimes(repo: Path) -> list[float]:
    """Days from introducer to its first fix (committer dates), by git plumbing alone."""
    out = _git(repo, "log", "--no-merges", "--format=%H %ct%x00%B%x02", "main")
    commit_time = dict(line.split() for line in _git(repo, "log", "--format=%H %ct",
                                                      "main").split("\n") if line)
    first_fix: dict[str, int] = {}
    for rec in out.split("\x02"):
        if not rec.strip():
            continue
        head, body = rec.strip("\n").split("\x00", 1)
        _fix, when = head.split()
        for line in body.splitlines():
            if not line.startswith("Fixes: "):
                continue
            word = line.split()[1]
            if word == "commit":
                word = line.split()[2]
            full = subprocess.run(["git", "-C", str(repo), "rev-parse", "-q", "--verify",
                                   f"{word}^{{commit}}"], capture_output=True, text=True,
                                  env=isolated_env(repo.parent)).stdout.strip()
            if full in commit_time:
                first_fix[full] = min(first_fix.get(full, 1 << 62), int(when))
    return sorted((fx - int(commit_time[i])) / 86400.0 for i, fx in first_fix.items())


@pytest.fixture(scope="module")
def two_repo_store(tmp_path_factory):
    base = tmp_path_factory.mktemp("cross")
    repos = {"north": _generate(base / "north", 11, 500, 12.0),     # ends 2017
             "south": _generate(base / "south", 12, 700, 20.0)}     # ends 2025
    url = "sqlite:///" + str(base / "store.sqlite")
    result = mine_many(list(repos.values()), store=url, jobs=2,
                       options=MineOptions(ref="main", progress=False))
    assert result.ok
    engine = open_store(url)
    tables = {n: read_table(engine, n) for n in ("commits", "trailers", "fix_links",
                                                 "commit_subsystems")}
    engine.dispose()
    return repos, tables


def _only(df: pd.DataFrame, repo: str) -> pd.DataFrame:
    return df[df["repo"] == repo].reset_index(drop=True)


def test_period_metrics_per_repository_match_git(two_repo_store) -> None:
    repos, t = two_repo_store
    assert set(t["commits"]["repo"]) == set(repos)
    for name, path in repos.items():
        pm = compute_period_metrics(_only(t["commits"], name), _only(t["trailers"], name),
                                    config=MetricConfig(period="year"))
        cov = pm.series("review_coverage", ALL)
        n, reviewed = _git_reviewed(path)           # oracle: git's trailer parser
        assert int(cov["denominator"].sum()) == n
        assert int(cov["numerator"].sum()) == reviewed
    # pooled input has no repo dimension: "(all)" adds the repositories together
    pooled = compute_period_metrics(t["commits"], t["trailers"],
                                    config=MetricConfig(period="year"))
    assert pooled.n_commits == sum(_git_reviewed(p)[0] for p in repos.values())


def _defects(t: dict, repo: str | None):
    pick = (lambda d: d) if repo is None else (lambda d: _only(d, repo))
    return build_defects(pick(t["fix_links"]), commits=pick(t["commits"]),
                         commit_subsystems=pick(t["commit_subsystems"]), links_from=None)


def test_defect_lifetimes_per_repository_match_git(two_repo_store) -> None:
    repos, t = two_repo_store
    per_repo = {}
    for name, path in repos.items():
        table = _defects(t, name)
        got = np.sort(table.defects["lifetime_days"].to_numpy(float))
        want = np.asarray(_git_lifetimes(path))     # oracle: git rev-parse + %ct
        np.testing.assert_allclose(got, want, atol=1e-9)
        assert len(want) >= 10
        per_repo[name] = got
        res = analyse_lifetimes(table, n_boot=50, rng=np.random.default_rng(7))
        assert res.n_defects == len(want)
        naive = res.summary[(res.summary["method"] == "naive")
                            & (res.summary["quantile"] == 0.5)]
        # oracle: lifelines' Kaplan-Meier curve on the git-derived lifetimes; the median is
        # the first time where it reaches 0.5. Read with a 1e-9 tolerance: with an even n
        # the product-limit value there is 0.5 up to rounding, and lifelines'
        # median_survival_time_ (a strict <= 0.5) then flips with the last bit
        km = KaplanMeierFitter().fit(want, np.ones(len(want), dtype=bool))
        sf = km.survival_function_.iloc[:, 0]
        assert naive["value"].item() == pytest.approx(float(sf.index[sf <= 0.5 + 1e-9][0]))
    # repositories compared as two distributions: medians are the plain sample medians
    cmp = compare_distributions(per_repo["north"], per_repo["south"], quantity="lifetime_days",
                                label_a="north", label_b="south", n_resamples=99, n_boot=99)
    assert (cmp.n_a, cmp.n_b) == (len(per_repo["north"]), len(per_repo["south"]))
    assert cmp.median_a.value == pytest.approx(float(np.median(per_repo["north"])))
    assert cmp.median_b.value == pytest.approx(float(np.median(per_repo["south"])))


def test_pooled_defect_table_keeps_repositories_apart(two_repo_store) -> None:
    repos, t = two_repo_store
    pooled = _defects(t, None).defects
    for name in repos:
        alone = _defects(t, name).defects
        mine = pooled[pooled["repo"] == name]
        assert sorted(mine["introducer_hash"]) == sorted(alone["introducer_hash"])
        np.testing.assert_allclose(np.sort(mine["lifetime_days"].to_numpy(float)),
                                   np.sort(alone["lifetime_days"].to_numpy(float)))


def test_pooled_defect_windows_use_each_repositorys_end(two_repo_store) -> None:
    repos, t = two_repo_store
    pooled = _defects(t, None).defects
    ends = t["commits"].groupby("repo")["committer_date"].max()
    assert ends["north"] != ends["south"]
    for name in repos:
        alone = _defects(t, name).defects.sort_values("introducer_hash")
        mine = pooled[pooled["repo"] == name].sort_values("introducer_hash")
        np.testing.assert_allclose(mine["window"].to_numpy(float),
                                   alone["window"].to_numpy(float))


def test_by_repo_gives_one_all_series_per_repository(two_repo_store) -> None:
    repos, t = two_repo_store
    pm = compute_period_metrics(t["commits"], t["trailers"],
                                commit_subsystems=t["commit_subsystems"],
                                config=MetricConfig(period="year", by_repo=True,
                                                    subsystem_all_up_to=10_000))
    assert list(pm.table.columns[:2]) == ["repo", "period"]
    for name, path in repos.items():
        # oracle: git's own count of non-merge commits on the mined ref
        n_git = int(_git(path, "rev-list", "--count", "--no-merges", "main").strip())
        commits = pm.series("commits", ALL, repo=name)
        assert int(commits["value"].sum()) == n_git
        # subsystem rows keyed by (repo, subsystem) equal a run on that repository alone
        alone = compute_period_metrics(_only(t["commits"], name), _only(t["trailers"], name),
                                       commit_subsystems=_only(t["commit_subsystems"], name),
                                       config=MetricConfig(period="year",
                                                           subsystem_all_up_to=10_000))
        mine = pm.table[(pm.table["repo"] == name) & (pm.table["subsystem"] != ALL)]
        theirs = alone.table[alone.table["subsystem"] != ALL]
        assert len(mine) and set(mine["subsystem"]) == set(theirs["subsystem"])
        a = mine[mine["metric"] == "review_coverage"].groupby("subsystem")["numerator"].sum()
        b = theirs[theirs["metric"] == "review_coverage"].groupby("subsystem")["numerator"].sum()
        pd.testing.assert_series_equal(a.sort_index(), b.sort_index(), check_names=False)


def test_subsystem_selection_rule(two_repo_store) -> None:
    """Above ``subsystem_all_up_to`` subsystems, the K largest with >= M commits each side."""
    _repos, t = two_repo_store
    commits, cs = _only(t["commits"], "south"), _only(t["commit_subsystems"], "south")
    at = commits["committer_date"].quantile(0.5)
    cfg = MetricConfig(period="year", subsystem_limit=3, subsystem_min_commits=40,
                       subsystem_all_up_to=2)
    pm = compute_period_metrics(commits, _only(t["trailers"], "south"), commit_subsystems=cs,
                                config=cfg, split_at=at)
    # expected straight from the tidy tables (common practice: count, filter, rank)
    nm = commits[~commits["is_merge"].astype(bool)][["hash", "committer_date"]]
    m = cs.merge(nm, on="hash")
    side = m.groupby(["subsystem", m["committer_date"] >= at]).size().unstack(fill_value=0)
    ok = side[side.min(axis=1) >= 40].sum(axis=1)
    expect = sorted(ok.index, key=lambda s: (-ok[s], s))[:3]
    assert list(pm.selection.chosen) == expect
    assert sorted(set(pm.table["subsystem"]) - {ALL}) == sorted(expect)
    assert pm.selection.n_left_out == cs["subsystem"].nunique() - len(expect)
    # naming the same subsystems gives the same rows (the rule only chooses)
    named = compute_period_metrics(commits, _only(t["trailers"], "south"), commit_subsystems=cs,
                                   config=MetricConfig(period="year", subsystems=tuple(expect)))
    pd.testing.assert_frame_equal(pm.table, named.table)
