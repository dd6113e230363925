"""Tidy CSV tables behind every figure and table, written deterministically.

One file per figure or table in ``tables/``, named from the figure's own key
(never from repository text): ``fig03-review-coverage.csv``. Floats use 10
significant digits, dates ISO 8601 UTC, missing values are empty, lines end
with ``\\n``.
"""
from __future__ import annotations

import csv
import io
import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from procmetrics.analyse.result import iso_seconds
from procmetrics.report.model import Report
from procmetrics.textsafe import FORMULA_STARTS, csv_text_cell

_KEY = re.compile(r"^[a-z0-9][a-z0-9-]*$")


def _cell(v: Any, raw: bool = False) -> str:
    if v is None or v is pd.NA or v is pd.NaT:
        return ""
    if isinstance(v, pd.Timestamp):
        return "" if pd.isna(v) else v.isoformat()
    if isinstance(v, (bool, np.bool_)):
        return "true" if v else "false"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        x = float(v)
        if math.isnan(x):
            return ""
        if math.isinf(x):
            return "inf" if x > 0 else "-inf"
        return format(x, ".10g")
    return csv_text_cell(str(v), raw=raw)   # text: neutralised against formula injection


def _float_cell(x: float) -> str:
    if x != x:
        return ""
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return format(x, ".10g")


def _each_distinct(keys: np.ndarray, values: np.ndarray, cell: Any) -> list[str]:
    """``[cell(v) for v in values]``, formatting each distinct value once when values
    repeat (``keys``: exact codes of the values, e.g. a float's bits): the per-commit
    columns behind an ECDF hold a million values of a few thousand kinds."""
    codes, first = pd.factorize(keys)
    if len(first) * 4 > len(values):
        return [cell(v) for v in values.tolist()]
    at = np.empty(len(first), dtype=np.int64)
    at[codes] = np.arange(len(codes))       # a row of each code (all hold the same value)
    cells = np.array([cell(v) for v in values[at].tolist()], dtype=object)
    return cells[codes].tolist()


def _column_cells(col: pd.Series, raw: bool) -> list[str]:
    """:func:`_cell` of every value of one column; plain numpy booleans, integers and
    floats take a path without the per-value type dispatch (same text)."""
    dt = col.dtype
    if dt == np.bool_:
        return np.where(col.to_numpy(), "true", "false").tolist()
    if isinstance(dt, np.dtype) and dt.kind in "iu":
        values = col.to_numpy()
        return _each_distinct(values, values, str)
    if isinstance(dt, np.dtype) and dt.kind == "f":
        values = np.ascontiguousarray(col.to_numpy(dtype=float))
        # distinct bit patterns, so that -0.0 ("-0") stays apart from 0.0 ("0")
        return _each_distinct(values.view(np.int64), values, _float_cell)
    kind = pd.api.types.infer_dtype(col, skipna=True) if dt == object else None
    if kind in ("string", "empty"):
        # all text: csv_text_cell (the one formula rule) applied only where it changes the
        # text, found by each value's first character in numpy (hashes, names and notes
        # rarely start like a formula); missing values of any kind empty
        vals = col.to_numpy(object)
        missing = pd.isna(vals)
        cells = vals.copy()
        cells[missing] = ""
        if not raw:
            present = np.flatnonzero(~missing)
            firsts = vals[present].astype("U1")      # "" for empty text
            for i in present[np.isin(firsts, FORMULA_STARTS)].tolist():
                cells[i] = csv_text_cell(vals[i])
        return cells.tolist()
    if kind == "boolean":
        # Python or numpy booleans with missing values (a flag looked up where some rows
        # have none): "true", "false" or empty, as _cell writes them
        vals = col.to_numpy(object)
        missing = pd.isna(vals)
        truth = np.zeros(len(vals), dtype=bool)
        truth[~missing] = vals[~missing].astype(bool)
        words = np.array(["false", "true", ""], dtype=object)
        return words[np.where(missing, 2, truth.astype(np.intp))].tolist()
    if isinstance(dt, (pd.Int64Dtype, pd.Int32Dtype, pd.UInt64Dtype, pd.BooleanDtype)):
        vals = col.to_numpy(dtype=object, na_value=None).tolist()
        if isinstance(dt, pd.BooleanDtype):
            return ["" if v is None else ("true" if v else "false") for v in vals]
        return ["" if v is None else str(v) for v in vals]
    seconds = iso_seconds(col)          # UTC or naive times of whole seconds, in numpy
    if seconds is not None:
        return ["" if v is None else v for v in seconds]
    if isinstance(dt, pd.DatetimeTZDtype) or (isinstance(dt, np.dtype) and dt.kind == "M"):
        # times: each distinct value formatted once (missing values become code -1, an
        # empty cell)
        codes, uniques = pd.factorize(col, use_na_sentinel=True)
        cells = np.array([_cell(u, raw) for u in uniques] + [""], dtype=object)
        return cells[codes].tolist()
    return [_cell(v, raw) for v in col.astype(object)]


def frame_to_csv(df: pd.DataFrame, *, raw: bool = False) -> str:
    buf = io.StringIO()
    _write_rows(df, buf, raw, len(df) or 1)
    return buf.getvalue()


#: rows formatted at a time when a table is written to a file: the cells of a
#: million-row evidence ledger held at once were over a GB at kernel scale
CHUNK_ROWS = 100_000


def write_frame_csv(df: pd.DataFrame, path: Path, *, raw: bool = False,
                    chunk: int = CHUNK_ROWS) -> None:
    """:func:`frame_to_csv` written to ``path`` ``chunk`` rows at a time (same text)."""
    with open(path, "w", encoding="utf-8", newline="") as fh:
        _write_rows(df, fh, raw, chunk)


def _write_rows(df: pd.DataFrame, fh: Any, raw: bool, chunk: int) -> None:
    w = csv.writer(fh, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    w.writerow([str(c) for c in df.columns])
    if not df.shape[1]:
        return                       # no columns: no rows (as itertuples gives none)
    for start in range(0, len(df), chunk):
        part = df.iloc[start:start + chunk]
        w.writerows(zip(*[_column_cells(part.iloc[:, j], raw) for j in range(df.shape[1])]))


def csv_names(report: Report) -> dict[str, str]:
    """Output name (relative to the report folder) for every figure and table."""
    names: dict[str, str] = {}
    for fig in report.figures.values():
        if not _KEY.match(fig.key):
            raise ValueError(f"figure key {fig.key!r} is not a safe file name")
        names[fig.key] = f"tables/fig{fig.number:02d}-{fig.key}.csv"
    for tab in report.tables.values():
        if not _KEY.match(tab.key):
            raise ValueError(f"table key {tab.key!r} is not a safe file name")
        names[tab.key] = f"tables/tab{tab.number:02d}-{tab.key}.csv"
    return names


def write_csvs(report: Report, out: Path) -> dict[str, str]:
    """Write every figure's and table's data; return key -> relative file name.

    Text cells starting like a spreadsheet formula get a leading ``'``
    (:func:`procmetrics.textsafe.csv_text_cell`) unless the report was asked for
    ``raw_csv``."""
    raw = bool(getattr(report.options, "raw_csv", False))
    names = csv_names(report)
    (out / "tables").mkdir(parents=True, exist_ok=True)
    for fig in report.figures.values():
        write_frame_csv(fig.data, out / names[fig.key], raw=raw)
    for tab in report.tables.values():
        df = tab.data.reindex(columns=[k for k, _ in tab.columns])
        write_frame_csv(df, out / names[tab.key], raw=raw)
    return names


def write_evidence(report: Report, out: Path) -> list[str]:
    """Write the evidence pack (``report.evidence``); return the relative names written.

    Names come from our own keys and claim ids (checked by the claims reader:
    letters, digits, '-', '_', '.'), never from repository text.
    """
    names = []
    for rel, df in sorted(report.evidence.items()):
        parts = rel.split("/")
        if parts[0] != "evidence" or any(p in ("", ".", "..") for p in parts):
            raise ValueError(f"evidence path {rel!r} is not a safe file name")
        path = out.joinpath(*parts)
        path.parent.mkdir(parents=True, exist_ok=True)
        write_frame_csv(df, path)
        names.append(rel)
    return names
