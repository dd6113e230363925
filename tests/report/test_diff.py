"""`procmetrics diff A B`: verdict changes, numbers beyond their intervals, provenance."""
from __future__ import annotations

import csv
import json
import shutil

from procmetrics.cli import main
from procmetrics.errors import EXIT_FIGURES_DIFFER
from procmetrics.report.diff import diff_reports


def test_same_store_twice_differs_only_in_provenance(built, capsys):
    # out (chromium or fallback engine "auto") and out2 (fallback): same data, other options
    assert main(["diff", str(built.out), str(built.out2)]) == 0
    text = capsys.readouterr().out
    assert "verdict changes: none" in text and "moved beyond their intervals: none" in text
    assert "pdf_engine" in text


def test_edited_copy_shows_verdict_change_and_moved_numbers(built, tmp_path, capsys):
    b = tmp_path / "b"
    shutil.copytree(built.out, b)
    doc = json.loads((b / "report.json").read_text("utf-8"))
    claim = doc["claims"][0]
    old = claim["verdict"]
    claim["verdict"], claim["verdict_label"] = "undecidable", "undecidable with this data"
    est = claim["evidence"]["estimate"]
    est["value"] = est["high"] * 2 + 1          # far outside A's interval
    (b / "report.json").write_text(json.dumps(doc), encoding="utf-8")
    # one series point moved far outside its interval
    fig = next(f for f in doc["figures"] if f["key"] == "series-review-coverage")
    path = b / fig["csv"]
    rows = list(csv.DictReader(open(path, encoding="utf-8", newline="")))
    row = next(r for r in rows if r["value"] and r["ci_high"] and float(r["ci_high"]) < 0.5)
    row["value"] = "0.99"
    with open(path, "w", encoding="utf-8", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    man = json.loads((b / "manifest.json").read_text("utf-8"))
    man["repository"]["tip_hash"] = "0" * 40
    (b / "manifest.json").write_text(json.dumps(man), encoding="utf-8")

    d = diff_reports(built.out, b)
    assert d.verdict_changes == [f"claim {claim['id']}: {old.replace('_', ' ')} -> "
                                 "undecidable with this data"]
    assert any(m.startswith(f"claim {claim['id']}") for m in d.moved)
    assert any("series-review-coverage" in m and row["period"] in m for m in d.moved)
    assert len(d.moved) == 2                    # nothing else moved
    assert any(p.startswith("HEAD:") for p in d.provenance)
    assert main(["diff", str(built.out), str(b), "--json", str(tmp_path / "d.json")]) \
        == EXIT_FIGURES_DIFFER
    assert json.loads((tmp_path / "d.json").read_text("utf-8"))["verdict_changes"]
