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


def test_digest_sum_equals_the_integer_definition() -> None:
    """The word-column sum of the digests is the integer sum of the definition
    (``int.from_bytes(sha256(line), "big")`` added line by line, modulo 2**256): lines
    with non-ASCII text, a lone surrogate, empty lines, several batches, and enough lines
    for the sum to pass 2**256 many times over."""
    import hashlib

    from procmetrics.store.digests import count_and_digest

    rng = np.random.default_rng(20261203)
    alphabet = list("abc\tÄß漢\\") + ["\udc80", "\n", ""]
    batches = [[("".join(rng.choice(alphabet, int(rng.integers(0, 12)))))
                for _ in range(int(rng.integers(0, 3000)))] for _ in range(7)]
    batches.append([])
    lines = [line for batch in batches for line in batch]
    total = sum(int.from_bytes(hashlib.sha256(line.encode("utf-8", "surrogatepass")).digest(),
                               "big") for line in lines)
    assert total > 1 << 256                       # the sum wraps: the modulus matters
    assert count_and_digest(iter(batches)) == (len(lines), format(total % (1 << 256), "064x"))
    assert count_and_digest(iter([])) == (0, "0" * 64)


def test_text_column_with_empty_strings_and_no_nulls_keeps_them() -> None:
    """A text column without NULLs is taken as it is (empty strings stay empty)."""
    import pandas as pd

    df = pd.DataFrame({"a": ["", "x", ""], "b": ["u", "", "w"]})
    assert canonical_column_lines(df, ["a", "b"]) == ["\tu", "x\t", "\tw"]
    assert sorted(canonical_column_lines(df, ["a", "b"])) == canonical_lines(df, ["a", "b"])


def test_reading_only_review_trailers_keeps_the_checksum(built, tmp_path) -> None:
    """The report reads only the review trailers; the checksum still covers every
    trailer line (stored digest, or all rows hashed in SQL when no digest is kept)."""
    from sqlalchemy import delete

    from procmetrics.analyse.measures.quality import REVIEW_KEYS
    from procmetrics.analyse.measures.vocabulary import REPORT_TRAILER_KEYS
    from procmetrics.store import schema as s

    assert set(REVIEW_KEYS) <= {k.lower() for k in REPORT_TRAILER_KEYS}
    loaded, full = _full(built)
    engine = open_store(str(built.store), create=False, readonly=True)
    try:
        some = load_store_data(engine, loaded.repo, trailer_keys=REPORT_TRAILER_KEYS)
    finally:
        engine.dispose()
    keys = {k.lower() for k in REPORT_TRAILER_KEYS}
    every = full["trailers"]
    assert set(some["trailers"]["key"].str.lower()) <= keys
    assert 0 < len(some["trailers"]) < len(every)          # other keys were left out
    kept = every[every["key"].str.lower().isin(keys)].reset_index(drop=True)
    import pandas as pd
    pd.testing.assert_frame_equal(some["trailers"], kept)
    assert some.checksum == loaded.checksum == store_checksum(full)
    # without the stored digests (a schema-3 store): the same checksum from SQL
    import sqlite3

    copy = tmp_path / "no-digests.sqlite"
    src, dst = sqlite3.connect(built.store), sqlite3.connect(copy)
    try:
        src.backup(dst)          # the WAL's pages too (a file copy can miss them)
    finally:
        src.close()
        dst.close()
    engine = open_store(str(copy), create=False)
    try:
        with engine.begin() as conn:
            conn.execute(delete(s.table_digest))
        assert load_store_data(engine, loaded.repo,
                               trailer_keys=REPORT_TRAILER_KEYS).checksum == loaded.checksum
    finally:
        engine.dispose()
