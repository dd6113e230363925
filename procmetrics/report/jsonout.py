"""The report's figures as deterministic JSON (validated against ``schema.json``).

Same store and options give byte-identical output: keys sorted, floats rounded
to 10 significant digits (then written by Python's shortest round-trip
``repr``), NaN/inf written as ``null``, dates ISO 8601 in UTC, and no run
time or local path (those belong to the manifest).
"""
from __future__ import annotations

import json
from importlib import resources
from pathlib import Path
from typing import Any

from procmetrics.analyse.result import to_plain
from procmetrics.report.jsontext import indented
from procmetrics.report.model import Report

FORMAT = "procmetrics-report/1"
SIGNIFICANT_DIGITS = 10


def canonical(value: Any) -> Any:
    """JSON-ready value with floats rounded to :data:`SIGNIFICANT_DIGITS`: ``to_plain``
    with the rounding applied to each float as it is converted (one walk of the tree;
    a second walk over a million cells took seconds)."""
    return to_plain(value, _round)


def _round(x: float) -> float:
    r = float(f"{x:.{SIGNIFICANT_DIGITS}g}")
    return 0.0 if r == 0 else r


def dumps(obj: Any) -> str:
    """Deterministic JSON text (sorted keys, two-space indent, trailing newline).

    The text of ``json.dumps(canonical(obj), sort_keys=True, indent=2,
    ensure_ascii=False, allow_nan=False)``, written by
    :func:`procmetrics.report.jsontext.indented` (the standard library's encoder runs
    in Python when it indents: a third of the JSON step at kernel scale)."""
    return indented(canonical(obj), ensure_ascii=False) + "\n"


def report_dict(report: Report, csv_names: dict[str, str]) -> dict[str, Any]:
    """The JSON document: every figure and table with its numbers, flags and claims
    (table rows as DataFrames: :func:`dumps` makes the whole of it JSON-ready)."""
    figures = []
    section_of = {b.ref: s.key for s in report.sections for b in s.blocks if b.ref}
    for fig in report.figures.values():
        figures.append({
            "number": fig.number, "key": fig.key, "section": section_of.get(fig.key, ""),
            "title": fig.title, "caption": fig.caption_line(), "n": fig.n,
            "method": fig.method, "interval": fig.interval,
            "csv": csv_names.get(fig.key), "values": fig.values,
            "flags": [f.to_dict() for f in fig.flags],
        })
    tables = []
    for tab in report.tables.values():
        tables.append({
            "number": tab.number, "key": tab.key, "section": section_of.get(tab.key, ""),
            "title": tab.title, "note": tab.note,
            "columns": [{"key": k, "heading": h} for k, h in tab.columns],
            # a frame: :func:`dumps` converts the whole document once
            "rows": tab.data.reindex(columns=[k for k, _ in tab.columns])
            .reset_index(drop=True),
            "csv": csv_names.get(tab.key), "flags": [f.to_dict() for f in tab.flags],
        })
    return {
        "format": FORMAT,
        "title": report.title,
        "scope": report.scope,
        "options": report.options.to_dict(),
        "store_checksum": report.store_checksum,
        "sections": [{"number": s.number, "key": s.key, "title": s.title}
                     for s in report.sections],
        "figures": figures,
        "tables": tables,
        "flags": [f.to_dict() for f in report.all_flags()],
        "claims": report.claims,
        "provenance": report.provenance,
    }


def schema() -> dict[str, Any]:
    """The JSON Schema shipped with the package."""
    text = resources.files("procmetrics.report").joinpath("schema.json").read_text("utf-8")
    return json.loads(text)


def write_json(report: Report, path: Path, csv_names: dict[str, str]) -> Path:
    path.write_text(dumps(report_dict(report, csv_names)), encoding="utf-8", newline="\n")
    return path
