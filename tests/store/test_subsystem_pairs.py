"""The distinct (commit, subsystem) id pairs found in numpy equal the SQL join they
replace, computed here as a plain Python set over the same rows: a file row of a
visible commit pairs with every subsystem its commit's (repository, path) is mapped
to; rows of commits not visible (a hidden run, another repository) pair with none;
text compared exactly."""
from __future__ import annotations

import random

import numpy as np
import pandas as pd
import pytest

from procmetrics.store.tables import _subsystem_pairs

PATHS = ["a.c", "b/c.h", "fw", "fw\x00", "ünï/x", "", "drivers/net/e.c", "b/c.h "]


def oracle(files, commits: pd.DataFrame, mapped: pd.DataFrame) -> list[tuple[int, int]]:
    repo_of = dict(zip(commits["commit_id"], commits["repo_id"]))
    subs: dict[tuple, set] = {}
    for r, p, sub in mapped.itertuples(index=False, name=None):
        subs.setdefault((r, p), set()).add(sub)
    return sorted({(c, sub) for c, p in files if c in repo_of
                   for sub in subs.get((repo_of[c], p), ())})


def chunks(rows: list, size: int):
    for i in range(0, len(rows), size):
        yield rows[i:i + size]


@pytest.mark.parametrize("seed", range(30))
def test_pairs_equal_the_set_join(seed):
    rng = random.Random(seed)
    big = seed % 5 == 0                 # ids beyond the packed key: the structured path
    offset = 2 ** 40 if big else 0
    files = [(rng.randrange(1, 40) + offset, rng.choice(PATHS))
             for _ in range(rng.randrange(0, 200))]
    visible = [c + offset for c in range(1, 40) if rng.random() < 0.8]
    commits = pd.DataFrame({"commit_id": visible,
                            "repo_id": [rng.choice([1, 2]) for _ in visible]},
                           columns=["commit_id", "repo_id"])
    n_map = rng.randrange(0, 25)
    mapped = pd.DataFrame({"repo_id": [rng.choice([1, 2, 3]) for _ in range(n_map)],
                           "path": [rng.choice(PATHS) for _ in range(n_map)],
                           "subsystem_id": [rng.randrange(1, 6) for _ in range(n_map)]},
                          columns=["repo_id", "path", "subsystem_id"])
    got = _subsystem_pairs(chunks(files, rng.choice([1, 7, 1000])), commits, mapped)
    assert list(got.columns) == ["commit_id", "subsystem_id"]
    assert list(zip(got["commit_id"].tolist(), got["subsystem_id"].tolist())) == \
        oracle(files, commits, mapped)
    assert got["commit_id"].dtype == np.int64 and got["subsystem_id"].dtype == np.int64
