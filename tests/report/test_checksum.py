"""The store checksum: streamed from the store without holding file_changes,
equal to the same definition computed over every table in memory, independent
of row order, and sensitive to one changed value."""
from __future__ import annotations

import numpy as np

from procmetrics.store.repodata import (CHECKSUM_TABLES, StoreData, canonical_column_lines,
                                     canonical_lines, load_store_data, store_checksum)
from procmetrics.store import open_store
from procmetrics.store.tables import COLUMNS, read_tables


def _full(built):
    engine = open_store(str(built.store), create=False, readonly=True)
    try:
        repo = read_tables(engine, ["repositories"])["repositories"]["repo"].iloc[0]
        return load_store_data(engine, repo), StoreData(repo, read_tables(engine, COLUMNS, repo))
    finally:
        engine.dispose()


def test_streamed_checksum_equals_in_memory_definition(built) -> None:
    loaded, full = _full(built)
    assert "file_changes" not in loaded.tables          # the report never holds it
    assert loaded.checksum == store_checksum(full)
    for name in CHECKSUM_TABLES:                         # column-wise == value-by-value
        cols = COLUMNS[name]
        assert sorted(canonical_column_lines(full[name], cols)) == \
            canonical_lines(full[name], cols)


def test_checksum_ignores_row_order_and_sees_one_change(built) -> None:
    _loaded, full = _full(built)
    rng = np.random.default_rng(7)
    shuffled = {n: df.sample(frac=1.0, random_state=rng) for n, df in full.tables.items()}
    assert store_checksum(StoreData(full.repo, shuffled)) == store_checksum(full)
    changed = dict(full.tables)
    fc = changed["file_changes"].copy()
    fc.loc[fc.index[0], "lines_added"] = int(fc["lines_added"].fillna(0).iloc[0]) + 1
    changed["file_changes"] = fc
    assert store_checksum(StoreData(full.repo, changed)) != store_checksum(full)


def test_column_lines_escape_text_as_the_value_by_value_definition() -> None:
    """The fast text path (no value needs escaping) and the escaping path give the lines
    of the value-by-value definition: NULL, a literal backslash-N, tab, newline and
    backslash inside values, NaN in a text column, integers, a missing column."""
    import pandas as pd

    df = pd.DataFrame({"a": ["x", None, "\\N", "a\tb", "c\\d\ne"],
                       "b": [1, 2, 3, 4, 5],
                       "c": [None] * 5,
                       "d": ["p", np.nan, "q", "r", "s"],
                       "e": ["plain", "text", "only", "here", None]})
    cols = ["a", "b", "c", "d", "e", "missing"]
    assert sorted(canonical_column_lines(df, cols)) == canonical_lines(df, cols)
    assert canonical_column_lines(df, ["a"])[2] == "\\\\N"     # a literal \N is escaped
    assert canonical_column_lines(df, ["a"])[1] == "\\N"       # NULL
