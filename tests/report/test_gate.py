"""`check --json` carries provenance; `check --junit` writes JUnit XML a CI reads."""
from __future__ import annotations

import json
import subprocess
from xml.dom import minidom

from procmetrics.cli import main

CLAIMS = """\
[[claim]]
id = "rose"
text = "Review <b>rose</b> & \\"more\\" \\u0001 after the policy."
kind = "review_coverage_rose"
date = "policy"

[[claim]]
id = "none-left"
text = "No defects ]]> remain."
kind = "no_defects_remain"
"""


def test_check_json_and_junit(built, tmp_path, capsys):
    claims = tmp_path / "c.toml"
    claims.write_text(CLAIMS, encoding="utf-8")
    js, xml = tmp_path / "v.json", tmp_path / "v.xml"
    code = main(["check", str(claims), "--store", str(built.store), "--policy-date",
                 built.policy, "--json", str(js), "--junit", str(xml)])
    assert code == 12                        # 8 + 4: one claim not supportable
    doc = json.loads(js.read_text("utf-8"))
    prov = doc["provenance"]
    head = subprocess.run(["git", "-C", str(built.repo), "rev-parse", "HEAD"],
                          capture_output=True, text=True, check=True).stdout.strip()
    assert prov["head"] == head                                       # oracle: git plumbing
    report = json.loads((built.out / "report.json").read_text("utf-8"))
    assert prov["store_checksum_sha256"] == report["store_checksum"]
    assert prov["policy_date"].startswith(built.policy) and prov["version"]
    assert prov["options"]["period"] == "quarter" and doc["exit_code"] == 12
    assert [v["verdict"] for v in doc["verdicts"]] == ["supported", "not_supportable"]
    assert all("robustness_outcome" in v for v in doc["verdicts"])

    # JUnit: parsed by a second XML parser; texts survive escaping, one case per claim
    dom = minidom.parse(str(xml))
    cases = dom.getElementsByTagName("testcase")
    assert len(cases) == 2
    assert cases[0].getAttribute("name").startswith('rose: Review <b>rose</b> & "more"')
    assert not cases[0].getElementsByTagName("failure")
    fail = cases[1].getElementsByTagName("failure")
    assert len(fail) == 1 and fail[0].getAttribute("type") == "not_supportable"
    assert "]]>" in cases[1].getAttribute("name")
    suite = dom.getElementsByTagName("testsuite")[0]
    assert suite.getAttribute("tests") == "2" and suite.getAttribute("failures") == "1"
    props = {p.getAttribute("name"): p.getAttribute("value")
             for p in dom.getElementsByTagName("property")}
    assert props["head"] == head
