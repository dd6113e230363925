"""Kept results (procmetrics.analyse.memo): one computation per distinct call while a
report or claims check runs, a private copy for every caller, nothing kept outside.
The flags and defect tables computed under it are compared with the plain functions'
(pandas' own ``assert_frame_equal`` as the oracle)."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from procmetrics.analyse import memo


def counting():
    calls = []

    @memo.memoised()
    def double(table: pd.DataFrame, factor: float = 2.0, names=("a",)) -> pd.DataFrame:
        calls.append((id(table), factor, names))
        return table * factor

    return double, calls


def test_nothing_is_kept_outside_a_block():
    double, calls = counting()
    t = pd.DataFrame({"a": [1, 2]})
    double(t), double(t)
    assert len(calls) == 2


def test_one_computation_per_distinct_call_and_a_private_copy_each():
    double, calls = counting()
    t, u = pd.DataFrame({"a": [1, 2]}), pd.DataFrame({"a": [1, 2]})
    with memo.kept_results():
        first = double(t)
        first.loc[0, "a"] = 99                    # a caller changing what it got ...
        second = double(t, 2.0)                   # ... (default given explicitly: same call)
        assert second["a"].tolist() == [2, 4]     # ... does not change the next result
        double(t, factor=3.0)                     # another argument value: computed
        double(u)                                 # an equal but other table: computed
        double(t, names=["a"])                    # a list counts as the tuple it equals
        with memo.kept_results():                 # nested: the outer block's results
            double(t)
    assert [c[1] for c in calls] == [2.0, 3.0, 2.0]
    with memo.kept_results():                     # a new block starts empty
        double(t)
    assert len(calls) == 4


def test_an_unhashable_argument_is_computed_every_time():
    double, calls = counting()
    t = pd.DataFrame({"a": [1]})
    with memo.kept_results():
        double(t, names=({"x": {1, 2}},)), double(t, names=({"x": {1, 2}},))
    assert len(calls) == 2


def test_a_failing_call_is_not_kept():
    n = []

    @memo.memoised()
    def fails(x: int) -> int:
        n.append(x)
        raise ValueError("no")

    with memo.kept_results():
        for _ in range(2):
            with pytest.raises(ValueError):
                fails(1)
    assert n == [1, 1]


def test_commit_flags_key_ignores_options_the_flags_do_not_read():
    from procmetrics.analyse.measures.metrics import MetricConfig, _flags_key

    c, t = pd.DataFrame(), pd.DataFrame()
    base = _flags_key(c, t, MetricConfig(period="quarter"))
    assert base == _flags_key(c, t, MetricConfig(period="month", metrics=("fix_ratio",)))
    assert base != _flags_key(c, t, MetricConfig(date_column="author_date"))
    assert base != _flags_key(c, t, MetricConfig(include_merges=True))
    assert base != _flags_key(c, t, MetricConfig(review_keys=("Reviewed-by",)))
    assert base != _flags_key(pd.DataFrame(), t, MetricConfig())


def test_kept_flags_equal_the_plain_computation():
    from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags

    rng = np.random.default_rng(7)
    n = 50
    hashes = [f"{i:040x}" for i in range(n)]
    commits = pd.DataFrame({
        "repo": "r", "hash": hashes, "is_merge": False, "is_revert": False,
        "stable_request": False, "subject": "x",
        "author_email": [f"a{i % 5}@example.org" for i in range(n)],
        "committer_email": [f"a{i % 3}@example.org" for i in range(n)],
        "committer_date": pd.date_range("2020-01-01", periods=n, freq="7D", tz="UTC"),
        "author_date": pd.date_range("2019-12-01", periods=n, freq="7D", tz="UTC"),
        "n_resolved_fixes": rng.integers(0, 2, n), "n_fix_refs": rng.integers(0, 2, n),
        "lines_added": rng.integers(0, 50, n), "lines_deleted": rng.integers(0, 50, n)})
    pick = rng.choice(n, 30)
    trailers = pd.DataFrame({"repo": "r", "hash": [hashes[i] for i in pick],
                             "key": "Reviewed-by", "value": "R <r@example.org>",
                             "person_email": [f"a{i % 4}@example.org" for i in pick]})
    plain = {b: commit_flags(commits, trailers, MetricConfig(date_column=b))
             for b in ("committer_date", "author_date")}
    with memo.kept_results():
        for period in ("month", "quarter", "month"):
            for b, want in plain.items():
                pd.testing.assert_frame_equal(
                    commit_flags(commits, trailers, MetricConfig(period=period, date_column=b)),
                    want)
