"""``applied_by_other`` counted against plain git, and the review-adoption era.

Oracle for the metric: ``git log --no-merges --format='%aE %cE'`` (author and
committer e-mail after the .mailmap) on a small history built with the real git;
a commit counts when the two differ case-insensitively. The history has a
maintainer applying others' patches, a merge (left out), an author whose old
address the .mailmap maps to the committer's (applied by themself), and a
committer address differing from the author's only in case (the same person).
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from procmetrics.analyse.measures.adoption import review_adoption
from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags, compute_period_metrics
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store.repodata import load_store_data
from tests.git_support import ALICE, BOB, CAROL, when

OLD_BOB = ("Bob Sample", "bob@old.example")
SHOUTY_CAROL = ("Carol Test", "CAROL@example.com")


def test_applied_by_other_counts_what_git_shows(git_history, tmp_path):
    h = git_history()
    h.write({".mailmap": "Bob Sample <bob@example.net> <bob@old.example>\n"})
    h.commit("mailmap", author=ALICE, date=when(0))
    h.commit("a", files={"a": "1\n"}, author=BOB, committer=ALICE, date=when(1))
    h.commit("b", files={"b": "1\n"}, author=CAROL, committer=ALICE, date=when(2))
    h.commit("c", files={"c": "1\n"}, author=OLD_BOB, committer=BOB, date=when(3))
    h.commit("d", files={"d": "1\n"}, author=CAROL, committer=SHOUTY_CAROL, date=when(4))
    h.branch("topic")
    h.checkout("topic")
    h.commit("e", files={"e": "1\n"}, author=BOB, date=when(5))
    h.checkout("main")
    h.commit("f", files={"f": "1\n"}, author=ALICE, committer=BOB, date=when(6))
    h.merge("topic", date=when(7))
    lines = h.git("log", "--no-merges", "--format=%aE %cE").splitlines()
    plain = h.git("log", "--no-merges", "--format=%ae %ce").splitlines()
    expected = sum(a.casefold() != c.casefold() for a, c in (x.split() for x in lines))
    assert expected == 3                            # a, b, f (c is Bob after the mailmap)
    assert sum(a.casefold() != c.casefold() for a, c in (x.split() for x in plain)) == 4

    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=MineOptions(progress=False, repo_name="r"))
    data = load_store_data(open_store(store), "r")
    flags = commit_flags(data["commits"], data["trailers"])
    assert len(flags) == len(lines)
    assert int(flags["applied_other"].sum()) == expected
    pm = compute_period_metrics(data["commits"], data["trailers"],
                                config=MetricConfig(period="year"))
    row = pm.table[(pm.table["metric"] == "applied_by_other")
                   & (pm.table["subsystem"] == "(all)")]
    assert (int(row["numerator"].sum()), int(row["denominator"].sum())) == (expected,
                                                                           len(lines))


def _table(shares: np.ndarray, n: int = 200, start: str = "2015-01-01", seed: int = 1):
    """Invented per-quarter review counts with known shares (a simulation)."""
    rng = np.random.default_rng(seed)
    starts = pd.date_range(start, periods=len(shares), freq="QS", tz="UTC")
    x = rng.binomial(n, shares)
    return pd.DataFrame({"period": [f"{d.year}Q{d.quarter}" for d in starts],
                         "period_start": starts, "period_end": starts + pd.offsets.QuarterBegin(),
                         "subsystem": "(all)", "metric": "review_coverage",
                         "numerator": x.astype(float), "denominator": float(n),
                         "value": x / n, "ci_low": np.nan, "ci_high": np.nan, "ci_method": "",
                         "n": n})


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_a_slow_ramp_settles_late_and_a_policy_step_does_not_count_as_adoption(seed):
    # ramp: 0 for 2 years, then logit rising 0.6 a year for 5 years, then flat for 3 years
    years = np.arange(40) / 4
    logit = np.where(years < 2, -9.0, -3.5 + 0.6 * np.clip(years - 2, 0, 5))
    ramp = review_adoption(_table(1 / (1 + np.exp(-logit)), seed=seed))
    assert ramp.settled_at is not None
    assert pd.Timestamp("2020-01-01", tz="UTC") <= ramp.settled_at <= pd.Timestamp(
        "2022-01-01", tz="UTC"), ramp.settled_at
    assert ramp.caveat_for(pd.Timestamp("2018-01-01", tz="UTC")).code \
        == "review_adoption_unsettled"
    assert ramp.caveat_for(pd.Timestamp("2023-01-01", tz="UTC")) is None
    # in use at 35% from the start, a step to 90% after 4 years: settled at once
    step = review_adoption(_table(np.where(years < 4, 0.35, 0.9), seed=seed))
    assert step.settled_at == step.first_use
    assert step.caveat_for(None) is None
