"""The evidence ledger's per-commit text (review trailers, fix references) is joined per
commit without a Python call per group; pandas' own ``groupby(key).agg(sep.join)`` is the
oracle: same keys in the same order, same texts in the same order, same names."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from procmetrics.report.evidence import joined_by_key


@pytest.mark.parametrize("seed", range(5))
def test_equals_pandas_groupby_join(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(0, 300))
    keys = [f"{int(x):040x}" for x in rng.integers(0, 40, n)]
    key = pd.Series(keys, name="hash", dtype=object)
    if n:
        key[rng.random(n) < 0.05] = None                 # dropped, as groupby drops them
    text = pd.Series([f"Reviewed-by: P{int(x)} <p{int(x)}@example.org>"
                      for x in rng.integers(0, 9, n)], dtype=object)
    want = text.groupby(key).agg(lambda s: "; ".join(s)) if n else None
    got = joined_by_key(text, key, "; ")
    if want is None:
        assert got.empty
        return
    pd.testing.assert_series_equal(got, want, check_index_type=False)
    assert got.index.name == "hash"


def test_order_within_a_key_is_the_input_order():
    key = pd.Series(["b", "a", "b", "a", "b"], name="fix_hash")
    text = pd.Series(["3", "2", "1", "9", "0"])
    assert joined_by_key(text, key, "; ").to_dict() == {"a": "2; 9", "b": "3; 1; 0"}
