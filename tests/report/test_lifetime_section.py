"""The lifetimes section: the ledger is written with the other tables (CSV and JSON only),
and every lifetime figure and table points to it."""
from __future__ import annotations

import csv
import json


def test_defect_ledger_is_a_report_table_with_reasons(built):
    rep = json.loads((built.out / "report.json").read_text())
    tables = {t["key"]: t for t in rep["tables"]}
    assert "defect-ledger" in tables
    path = built.out / tables["defect-ledger"]["csv"]
    rows = list(csv.DictReader(path.open(encoding="utf-8")))
    # oracle: the ledger has one used row per defect of the figure, and every other row
    # names a reason from the fixed list
    fig = next(f for f in rep["figures"] if f["key"] == "lifetime-curves")
    assert sum(r["used"] == "true" for r in rows) == fig["n"]
    reasons = {"before link era", "negative lifetime", "follow-up fix", "missing date"}
    for r in rows:
        if r["used"] != "true":
            assert r["excluded_reason"] in reasons or r["excluded_reason"].startswith(
                "unresolved reference ("), r
    assert "defect ledger" in fig["caption"]
    assert "defect ledger" in tables["lifetime-quantiles"]["note"]
    # the HTML names the file instead of listing hundreds of rows
    html = (built.out / "report.html").read_text(encoding="utf-8")
    assert tables["defect-ledger"]["csv"] in html
    assert '<table id="defect-ledger"' not in html


def test_quantile_cells_state_their_support(built):
    rep = json.loads((built.out / "report.json").read_text())
    tab = next(t for t in rep["tables"] if t["key"] == "lifetime-quantiles")
    for row in tab["rows"]:
        for q in ("q25", "q50", "q75", "q90"):
            cell = row[q]
            assert "at risk" in cell or cell.startswith("beyond what the data support") \
                or cell == "not reached", cell
