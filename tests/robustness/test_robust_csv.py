"""CSV formula injection: text cells that a spreadsheet would run as a formula (author
and subsystem names such as ``=cmd|' /C calc'!A0``) get a leading ``'`` in ``export``
and in the report's ``tables/*.csv``; numbers (negatives too) stay numbers;
``--raw-csv`` keeps the exact text. The cells are read back with the csv module."""
from __future__ import annotations

import csv
import io

import pandas as pd
import pytest

from procmetrics.report.csvout import frame_to_csv
from procmetrics.textsafe import csv_text_cell
from tests.git_support import GitHistory, when

EVIL = "=cmd|' /C calc'!A0"


@pytest.mark.parametrize("text, want", [
    (EVIL, "'" + EVIL), ("+1+1", "'+1+1"), ("-2+3", "'-2+3"), ("@SUM(A1)", "'@SUM(A1)"),
    ("\tx", "'\tx"), ("\rx", "'\rx"), ("plain", "plain"), ("", ""), ("a=b", "a=b"),
])
def test_text_cells_starting_like_a_formula_are_neutralised(text, want):
    assert csv_text_cell(text) == want
    assert csv_text_cell(text, raw=True) == text


def test_report_csv_keeps_negative_numbers_as_numbers():
    df = pd.DataFrame({"subsystem": [EVIL, "net"], "effect": [-0.5, 2.0], "n": [-3, 4]})
    rows = list(csv.reader(io.StringIO(frame_to_csv(df))))
    assert rows[1] == ["'" + EVIL, "-0.5", "-3"] and rows[2] == ["net", "2", "4"]
    raw = list(csv.reader(io.StringIO(frame_to_csv(df, raw=True))))
    assert raw[1][0] == EVIL


@pytest.fixture
def evil_store(tmp_path, cli):
    h = GitHistory.create(tmp_path / "repo")
    h.commit("one\n", files={"MAINTAINERS": f"{EVIL}\nF:\tsrc/\n", "src/a.c": "1\n"},
             author=("@attacker", "a@example.org"), date=when(0))
    h.commit("two\n", files={"src/a.c": "2\n"}, author=("+evil", "e@example.org"),
             date=when(1))
    store = tmp_path / "s.sqlite"
    assert cli("mine", h.path, "--store", store, "--no-progress").code == 0
    return store


def test_export_neutralises_and_raw_csv_keeps_exact_text(evil_store, tmp_path, cli):
    out = tmp_path / "cs.csv"
    ran = cli("export", "--store", evil_store, "--table", "commit_subsystems", "-o", out)
    assert ran.code == 0, ran.err
    cells = pd.read_csv(out, dtype=str)["subsystem"].tolist()
    assert "'" + EVIL in cells and EVIL not in cells
    ran = cli("export", "--store", evil_store, "--table", "commits", "-o", out)
    names = set(pd.read_csv(out, dtype=str)["author_name"])
    assert names == {"'@attacker", "'+evil"}
    ran = cli("export", "--store", evil_store, "--table", "commit_subsystems", "-o", out,
              "--raw-csv")
    assert EVIL in pd.read_csv(out, dtype=str)["subsystem"].tolist()


def test_column_fast_paths_write_the_cells_of_the_per_value_rule():
    """Plain boolean, integer and float columns take a column-wise path; read back with
    the csv module, every cell is what the per-value rule (``_cell``) gives, next to
    nullable, text, mixed-object and date columns (NaN, infinities, -0.0, 10 digits)."""
    import numpy as np

    from procmetrics.report.csvout import _cell

    rng = np.random.default_rng(11)
    n = 200
    df = pd.DataFrame({
        "b": rng.random(n) > 0.5, "i": rng.integers(-5, 10**12, n),
        "u": rng.integers(0, 5, n).astype("uint8"),
        "f": np.where(rng.random(n) > 0.9, np.nan, rng.normal(0, 1e6, n)),
        "g": np.r_[[np.inf, -np.inf, -0.0, 1e-300, 123456789012.5], rng.random(n - 5)],
        "I": pd.array(np.where(rng.random(n) > 0.8, None, rng.integers(0, 9, n)), dtype="Int64"),
        "s": np.where(rng.random(n) > 0.5, EVIL, 'a,b"c'),
        "o": [None, 1, 2.5, "x", True] * (n // 5),
        "t": pd.to_datetime(rng.integers(0, 2 * 10**9, n), unit="s", utc=True),
    })
    rows = list(csv.reader(io.StringIO(frame_to_csv(df))))
    assert rows[0] == list(df.columns)
    want = [[_cell(v) for v in row] for row in df.astype(object).itertuples(index=False)]
    assert rows[1:] == want
    assert rows[1][df.columns.get_loc("g")] == "inf" and rows[3][4] == "-0"
