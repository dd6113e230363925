"""`procmetrics lifetimes` and `procmetrics growth` through the real entry point,
on the demo history, checked against the generator's ground truth."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from procmetrics.cli import main

ROOT = Path(__file__).resolve().parents[2]
CHANGE = "2022-07-01"


@pytest.fixture(scope="module")
def demo(tmp_path_factory) -> dict[str, Path]:
    base = tmp_path_factory.mktemp("demo")
    repo = base / "aurora-fw"
    subprocess.run([sys.executable, str(ROOT / "sample_repos" / "generate.py"), "--out",
                    str(repo)], check=True, capture_output=True)
    store = base / "store.sqlite"
    assert main(["mine", str(repo), "--store", str(store)]) == 0
    truth = json.loads((base / "aurora-fw.truth.json").read_text())
    return {"repo": repo, "store": store, "truth": truth, "base": base}


def test_truth_file_matches_the_assumptions_of_this_test(demo):
    t = demo["truth"]
    assert t["change"]["date"] == CHANGE
    assert t["lifetime"]["clock"].startswith("fix committer date")


@pytest.mark.slow
def test_lifetimes_recovers_the_planted_change(demo, capsys):
    out = demo["base"] / "lt"
    rc = main(["lifetimes", "--store", str(demo["store"]), "--by", "period", "--change-date",
               CHANGE, "--horizon", "365", "--boot", "200", "--out", str(out)])
    assert rc == 0
    text = capsys.readouterr().out
    assert "median" in text and "log-rank at horizon 365" in text
    res = json.loads((out / "lifetimes.json").read_text())["analysis"]
    rows = {(r["group"], r["method"]): r for r in res["summary"] if r["quantile"] == 0.5}
    planted = demo["truth"]["lifetime"]["parameters"]
    # ground truth: lognormal medians 120 days before the change, 60 after
    for period in ("before", "after"):
        r = rows[(period, "truncation_aware")]
        assert r["low"] <= planted[period]["median_days"] <= r["high"], (period, r)
    ratio = rows[("after", "truncation_aware")]["value"] / rows[("before", "truncation_aware")]["value"]
    planted_ratio = planted["after"]["median_days"] / planted["before"]["median_days"]
    # stated tolerance: the recovered ratio of medians within 0.15 of the planted 0.5
    assert abs(ratio - planted_ratio) < 0.15
    # right truncation biases the naive median of recent defects downwards
    assert rows[("after", "naive")]["value"] < rows[("after", "truncation_aware")]["value"]
    assert res["comparison"]["p_value"] < 0.01
    for f in ("defects.csv", "lifetime_quantiles.csv", "lifetime_curves.csv", "lifetimes.png",
              "lifetimes_by_period.png"):
        assert (out / f).stat().st_size > 0


def test_lifetimes_release_basis(demo, capsys):
    rc = main(["lifetimes", "--store", str(demo["store"]), "--basis", "releases", "--boot", "20"])
    assert rc == 0
    assert "unit releases" in capsys.readouterr().out


def test_growth_whole_history_refuses_and_release_fits(demo, capsys):
    rc = main(["growth", "--store", str(demo["store"]), "--boot", "30"])
    assert rc == 0
    text = capsys.readouterr().out
    # the demo project grows and fixes more over time: no growth model is earned
    assert "goel_okumoto: refused" in text and "power_law: refused" in text
    out = demo["base"] / "gr"
    rc = main(["growth", "--store", str(demo["store"]), "--after-tag", "v4.1", "--boot", "30",
               "--out", str(out)])
    assert rc == 0
    res = json.loads((out / "growth.json").read_text())
    assert res["trend"]["laplace"]["direction"] == "growth"
    for m in res["models"]:
        for p in m["predictions"]:
            assert p["estimate"] is None or p["estimate"]["extrapolated"] is True
    assert (out / "growth.png").stat().st_size > 0


def test_missing_store_is_one_line_and_exit_code(tmp_path, capsys):
    rc = main(["lifetimes", "--store", str(tmp_path / "none.sqlite")])
    err = capsys.readouterr().err
    assert rc == 5 and err.count("\n") == 1 and "store not found" in err
