"""One computation for the carry-over figures: the ``carryover`` command, the claims
(``check``) and the report section show the same missing list and latency figures
for the same store and exclusions file (generated pair, real entry point)."""
from __future__ import annotations

import csv
import json
import re

import pytest

from tests.carryover.pair import MISSING_GAP_DAYS, mine_pair, run_cli

TREE = "orbitkit-vendor"
CLAIMS = """format = 1
[[claim]]
id = "none-10"
text = "no upstream fix older than 10 days is missing"
kind = "no_missing_upstream_fix_older_than"
days = 10
[[claim]]
id = "half-5"
text = "half of the upstream fixes arrive within 5 days"
kind = "half_carried_within"
days = 5
[[claim]]
id = "faster"
text = "carry-over got faster after October 2020"
kind = "carryover_faster_after"
date = "2020-10-01"
"""


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    root = tmp_path_factory.mktemp("onecomp")
    pair, store, r = mine_pair(root)
    ex = str(pair.exclusions_toml(root / "ex.toml"))
    claims = root / "claims.toml"
    claims.write_text(CLAIMS, encoding="utf-8")
    cmd = run_cli("carryover", "--store", store, "--repo", TREE, "--exclusions", ex,
               "--csv", str(root / "fixes.csv"))
    assert cmd.returncode == 0, cmd.stderr
    chk = run_cli("check", str(claims), "--store", store, "--repo", TREE, "--exclusions", ex,
               "--json", str(root / "check.json"))
    assert chk.returncode in range(8, 32), chk.stderr
    rep = run_cli("report", "--store", store, "--repo", TREE, "--out", str(root / "rep"),
               "--exclusions", ex, "--claims", str(claims), "--pdf-engine", "none",
               "--commit-url", "https://git.example.org/vendor/commit/{hash}")
    assert rep.returncode == 0, rep.stderr
    nochk = run_cli("check", str(claims), "--store", store, "--repo", TREE, "--no-panel",
                 "--json", str(root / "check-noex.json"))
    return {"pair": pair, "root": root, "cmd": cmd.stdout,
            "check": json.loads((root / "check.json").read_text("utf-8")),
            "check_noex": json.loads((root / "check-noex.json").read_text("utf-8")),
            "nochk": nochk,
            "report": json.loads((root / "rep" / "report.json").read_text("utf-8"))}


def _verdicts(doc):
    items = doc["claims"] if isinstance(doc, dict) and "claims" in doc else doc["verdicts"]
    return {v["claim"]["id"] if isinstance(v.get("claim"), dict) else v["id"]: v for v in items}


def _table(rep, key):
    return next(t for t in rep["tables"] if t["key"] == key)


def test_the_section_is_there_with_its_limits_and_links(outputs):
    rep, root = outputs["report"], outputs["root"]
    assert any(s["key"] == "carryover" for s in rep["sections"])
    fig = next(f for f in rep["figures"] if f["key"] == "carryover-curves") \
        if isinstance(rep["figures"], list) else rep["figures"]["carryover-curves"]
    assert fig["n"] == 9
    html = (root / "rep" / "report.html").read_text("utf-8")
    assert "Fixes:” line are invisible here" in html
    assert "core/sched.c rewritten in the vendor tree" in html      # the excluded, with reason
    up = outputs["pair"].up
    assert f"https://git.example.org/vendor/commit/{up['F5']}" in html
    assert (root / "rep" / "evidence" / "carryover" / "upstream_fixes.csv").is_file()
    assert (root / "rep" / "inputs" / "carryover-exclusions.toml").is_file()


def test_missing_list_is_the_commands(outputs):
    rows = _table(outputs["report"], "carryover-missing")["rows"]
    with (outputs["root"] / "fixes.csv").open(encoding="utf-8") as fh:
        cmd = [r for r in csv.DictReader(fh) if r["status"] in ("missing", "excluded")]
    assert {(r["fix_hash"], r["status"]) for r in rows} == \
        {(r["fix_hash"], r["status"]) for r in cmd}
    up = outputs["pair"].up
    got = {r["fix_hash"]: r["gap_days"] for r in rows if r["status"] == "missing"}
    assert got == {up[k]: float(v) for k, v in MISSING_GAP_DAYS.items()}
    printed = re.findall(r"^  (EXCLUDED )?([0-9a-f]{12}) ", outputs["cmd"], re.M)
    assert [h for _, h in printed] == [r["fix_hash"][:12] for r in rows]     # same order


def test_latency_figures_are_the_commands(outputs):
    m = re.search(r"\(n=(\d+): (\d+) carried, (\d+) censored .*median ([\d.]+) d, 95% "
                  r"interval ([\d.]+) to (\S+) d", outputs["cmd"])
    assert m, outputs["cmd"]
    med = _table(outputs["report"], "carryover-latency")["rows"][0]
    assert med["n"] == int(m.group(1)) == 9
    assert f"{med['value']:.1f}" == m.group(4) and f"{med['low']:.1f}" == m.group(5)
    assert med["high"] is None and m.group(6) == "inf"     # JSON null = no upper bound


def test_claims_read_the_exclusions_like_the_command(outputs):
    """F9 (gap 15 days) is excluded: with the file the claim counts the 3 missing fixes
    older than 10 days the command lists; without it, 4."""
    chk = _verdicts(outputs["check"])
    rep = _verdicts({"claims": outputs["report"]["claims"]})
    n_cmd = sum(1 for g in MISSING_GAP_DAYS.values() if g > 10)
    for v in (chk["none-10"], rep["none-10"]):
        assert v["evidence"]["estimate"]["value"] == n_cmd == 3
        assert any("excluded by the exclusions file" in r for r in v["reasons"])
    assert _verdicts(outputs["check_noex"])["none-10"]["evidence"]["estimate"]["value"] == 4
    # the Kaplan-Meier share within 5 days: one computation, one number
    assert chk["half-5"]["evidence"]["estimate"] == rep["half-5"]["evidence"]["estimate"]
    # 10 fixes concern the tree: too few for a before/after comparison, in both places
    assert chk["faster"]["verdict"] == rep["faster"]["verdict"] == "undecidable"


def test_claim_evidence_packs_list_the_fixes_counted(outputs):
    rep = _verdicts({"claims": outputs["report"]["claims"]})
    pack = rep["none-10"]["evidence_pack"]
    assert pack["reproduces_n"] is True and pack["counted_rows"] == 10   # 6 + 3 + 1 excluded
    path = outputs["root"] / "rep" / pack["files"][0]["path"]
    with path.open(encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 13 and sum(r["counted"].lower() == "true" for r in rows) == 10
