"""The report's JSON text equals the standard library's encoder, character for character.

``jsonout.dumps`` writes the indented text itself (the standard encoder runs in
Python when it indents, a third of the JSON step at kernel scale). Oracle:
``json.dumps(canonical(obj), sort_keys=True, indent=2, ensure_ascii=False,
allow_nan=False)``, on seeded random documents and on a table frame with every
column kind a report table has.
"""
from __future__ import annotations

import json
import random

import numpy as np
import pandas as pd
import pytest

from procmetrics.report.jsonout import canonical, dumps

TEXTS = ["", "plain", "quote \" and back\\slash", "tab\tnew\nline\r", "ünïcödé ≤ 60 d",
         "\x00\x1f control", "emoji \U0001f600", "</script>", "a, b: c"]


def oracle(obj) -> str:
    return json.dumps(canonical(obj), sort_keys=True, indent=2, ensure_ascii=False,
                      allow_nan=False) + "\n"


def _value(rng: random.Random, depth: int):
    kind = rng.randrange(11 if depth < 4 else 7)
    if kind == 0:
        return rng.choice(TEXTS)
    if kind == 1:
        return rng.choice([None, True, False])
    if kind == 2:
        return rng.choice([0, -1, 7, 2 ** 70, -(2 ** 63), np.int64(42), np.bool_(True)])
    if kind == 3:
        return rng.choice([0.0, -0.0, 1.5, 1e-300, -2.5e300, 0.1 + 0.2, 1 / 3,
                           float("nan"), float("inf"), np.float32(0.1), np.float64(2.0)])
    if kind == 4:
        return pd.Timestamp("2019-01-24 10:00", tz="UTC")
    if kind == 5:
        return rng.uniform(-1e6, 1e6)
    if kind == 6:
        return rng.randrange(-10 ** 9, 10 ** 9)
    if kind in (7, 8):
        return {rng.choice(TEXTS + ["k1", "k2", "z", "a"]) + str(i): _value(rng, depth + 1)
                for i in range(rng.randrange(4))}
    if kind == 9:
        return [_value(rng, depth + 1) for _ in range(rng.randrange(4))]
    return tuple(_value(rng, depth + 1) for _ in range(rng.randrange(3)))


@pytest.mark.parametrize("seed", range(40))
def test_random_documents(seed):
    doc = {"root": _value(random.Random(seed), 0), "n": seed, 3: "int key"}
    assert dumps(doc) == oracle(doc)


def test_a_table_frame_inside_the_document():
    df = pd.DataFrame({
        "hash": ["a1b2", "c3d4", None],
        "lifetime_days": [12.5, np.nan, 1 / 7],
        "n": pd.array([1, None, 3], dtype="Int64"),
        "fixed": pd.array([True, None, False], dtype="boolean"),
        "when": pd.to_datetime(["2019-01-01 00:00", None, "2020-02-29 12:00"], utc=True),
        "note": ["ok", "tab\there", "≤ 5"],
    })
    doc = {"tables": [{"rows": df, "title": "t"}, {"rows": df.iloc[:0], "title": "empty"}]}
    assert dumps(doc) == oracle(doc)


def test_empty_containers_and_refusals():
    assert dumps({}) == oracle({}) == "{}\n"
    assert dumps([[], {}, ()]) == oracle([[], {}, ()])
    with pytest.raises(TypeError):
        dumps({"x": object()})


@pytest.mark.parametrize("seed", range(40))
def test_command_files_write_the_standard_text(seed, tmp_path):
    """``lifetimes.json`` and ``growth.json`` (ASCII escapes, no rounding): the text of
    ``json.dumps(obj, indent=2, sort_keys=True, allow_nan=False)`` itself."""
    from procmetrics.analyse.result import to_plain
    from procmetrics.report.command_outputs import write_json

    rng = random.Random(1000 + seed)
    doc = to_plain({"root": _value(rng, 0), "rows": [_value(rng, 3) for _ in range(5)]})
    try:
        want = json.dumps(doc, indent=2, sort_keys=True, allow_nan=False) + "\n"
    except ValueError:          # a NaN the oracle refuses: so must the writer
        with pytest.raises(ValueError):
            write_json(tmp_path / "x.json", doc)
        return
    assert write_json(tmp_path / "x.json", doc).read_text() == want


def test_flat_rows_at_every_depth_match_the_standard_text():
    """Rows of scalars (the C-encoded case) nested at several levels, with lists of
    scalars, empty rows and text that needs escapes."""
    rows = [{"a": 1, "b": None, "c": "tab\t\u00e9", "d": 1.5, "e": True}, {}, {"only": []}]
    doc = {"x": rows, "y": [[1, 2.5, "s", None, False], [], [[{"z": rows}]]]}
    for ascii_only in (True, False):
        from procmetrics.report.jsontext import indented
        assert indented(doc, ensure_ascii=ascii_only) == json.dumps(
            doc, indent=2, sort_keys=True, allow_nan=False, ensure_ascii=ascii_only)
    with pytest.raises(ValueError):
        indented({"row": {"v": float("nan")}}, ensure_ascii=True)


def _rounded_walk(value):
    """The report's rounding as a second walk over ``to_plain``'s output (its earlier
    form), kept as the reference for ``canonical``'s one walk."""
    import math

    if isinstance(value, dict):
        return {str(k): _rounded_walk(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_rounded_walk(v) for v in value]
    if isinstance(value, float):
        if math.isnan(value) or math.isinf(value):
            return None
        r = float(f"{value:.10g}")
        return 0.0 if r == 0 else r
    return value


@pytest.mark.parametrize("seed", range(40))
def test_canonical_rounds_as_a_walk_over_plain_values(seed):
    from procmetrics.analyse.result import to_plain

    rng = random.Random(2000 + seed)
    n = rng.randrange(0, 30)
    df = pd.DataFrame({"x": [rng.choice([rng.uniform(-1e9, 1e9), 1 / 3, -0.0, 1e-320,
                                         float("nan"), float("inf")]) for _ in range(n)],
                       "when": pd.to_datetime([rng.choice([None, "2019-01-24 10:00:01",
                                                           "2020-02-29 00:00:00.5"])
                                               for _ in range(n)], utc=True, format="mixed"),
                       "t": [rng.choice(["a", None, 2.5, np.float32(0.1)]) for _ in range(n)]})
    doc = {"root": _value(rng, 0), "rows": df}
    assert canonical(doc) == _rounded_walk(to_plain(doc))
