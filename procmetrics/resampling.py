"""Resampling defaults every command and the report share.

One seed, one bootstrap size and one random stream per analysis, so that the
``lifetimes`` command and the report's lifetime table (or ``growth`` and the
report's growth section) draw the same resamples and print the same interval.

``N_BOOT`` is the default number of bootstrap resamples. 200 (the old default)
moved the upper bound of one lifetime median between 478 and 1,063 days across
seeds on a real history; 2,000 keeps percentile bounds within a few percent
(shared/FINDINGS.md). Percentile bounds of a quantile sit on the observed
values, so a bound whose level falls at the edge between two values can still
alternate between them across seeds at any size: the tests measure which
displayed intervals are stable (tests/report/test_consistency.py).
"""
from __future__ import annotations

import hashlib
from typing import Any

import numpy as np

#: default seed of every command and the report
SEED = 20240601
#: default bootstrap resamples (or parametric bootstrap refits)
N_BOOT = 2000
#: default permutations for permutation p-values
N_PERMUTATIONS = 999
#: one stream per analysis: adding an analysis never shifts another's draws
SALTS = {"lifetimes": 11, "growth": 23, "compare": 31, "changes": 41, "claims": 53}


def data_keyed_rng(*arrays: Any, purpose: str = "") -> np.random.Generator:
    """A generator seeded by the bytes of ``arrays`` (None entries skipped) and a
    ``purpose`` tag: the same data always draw the same resamples, whatever the seed
    and call order, so a command and the report print one interval for one set of
    data. The Monte-Carlo error of a resampled figure is then frozen, not removed:
    its method text states the number of resamples."""
    h = hashlib.sha256(purpose.encode("utf-8"))
    for a in arrays:
        if a is not None:
            h.update(np.ascontiguousarray(np.asarray(a, float)).tobytes())
    return np.random.default_rng(int.from_bytes(h.digest()[:16], "big"))


def analysis_rng(seed: int, analysis: str) -> np.random.Generator:
    """The generator of one analysis for a seed (the same in the CLI and the report)."""
    return np.random.default_rng([int(seed), SALTS[analysis]])
