"""`procmetrics lifetimes` and `procmetrics growth` through the real entry point,
on the demo history, checked against the generator's ground truth."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from procmetrics.analyse.lifetimes.szz import FAILURE_MODES
from procmetrics.cli import main
from tests.git_support import BOB, when

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
               CHANGE, "--horizon", "365", "--out", str(out)])
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
    rc = main(["growth", "--store", str(demo["store"]), "--boot", "30", "--links-from",
               "first"])
    assert rc == 0
    text = capsys.readouterr().out
    # counted from the first linked fix, the demo's fix count rises while Fixes: is still
    # being adopted (its truth: half of fixes linked from 2019-07, 92% from 2020-01):
    # no growth model is earned
    assert "goel_okumoto: refused" in text and "power_law: refused" in text
    # the default starts where linking has settled, and says so beside the count
    rc = main(["growth", "--store", str(demo["store"]), "--boot", "30"])
    assert rc == 0
    settled = capsys.readouterr().out
    assert "linking has settled" in settled
    n_first = int(text.split(" fix events")[0].rsplit(" ", 1)[1])
    n_settled = int(settled.split(" fix events")[0].rsplit(" ", 1)[1])
    assert n_settled < n_first
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


# --- blame-based (SZZ) heuristic through the CLI ---------------------------------------

def _lines(k: int, bad: int | None = None) -> str:
    return "".join(f"m{k} line {i}{' BUG' if i == bad else ''}\n" for i in range(1, 11))


@pytest.fixture
def szz_history(git_history) -> dict:
    """12 keyword-described fixes without Fixes: links, each undoing one planted change;
    one fix with a Fixes: link; one keyword fix that only adds lines; one plain commit."""
    h = git_history("gadget")
    h.commit("init", files={f"src/m{k}.c": _lines(k) for k in range(12)}, date=when(0),
             name="root")
    plan = []
    for k in range(12):
        day = 10 + 7 * k
        h.commit(f"m{k}: speed up", files={f"src/m{k}.c": _lines(k, bad=k % 10 + 1)},
                 author=BOB, date=when(day), name=f"intro{k}")
        plan.append((k, day, day + 3 + 4 * k))
    for k, _, fix_day in sorted(plan, key=lambda p: p[2]):
        h.commit(f"m{k}: fix wrong bound", files={f"src/m{k}.c": _lines(k)}, date=when(fix_day),
                 name=f"fix{k}")
    h.commit("m0: slow path", files={"src/m0.c": _lines(0, bad=3)}, date=when(200),
             name="intro_x")
    h.commit(f"m0: fix slow path\n\nFixes: {h.ids['intro_x'][:12]} (\"m0: slow path\")\n",
             files={"src/m0.c": _lines(0)}, date=when(210), name="fix_x")
    h.commit("m1: fix missing check", files={"src/m1.c": _lines(1) + "check\n"},
             date=when(220), name="add_only")
    h.commit("docs: wording", files={"README": "gadget\n"}, date=when(230), name="docs")
    return {"h": h, "fixes": [f"fix{k}" for k in range(12)]}


def test_szz_option_matches_plain_git_blame(szz_history, tmp_path, capsys):
    h = szz_history["h"]
    store = tmp_path / "g.sqlite"
    assert main(["mine", str(h.path), "--store", str(store)]) == 0
    capsys.readouterr()
    out = tmp_path / "out"
    rc = main(["lifetimes", "--store", str(store), "--szz", "--szz-check", "5", "--boot", "20",
               "--jobs", "2", "--out", str(out)])
    assert rc == 0
    text = capsys.readouterr().out
    assert "HEURISTIC" in text and "known failure modes" in text
    for mode in FAILURE_MODES:
        assert mode in text
    # oracle: plain git blame -w of each fix's removed line in the fix's parent
    d = pd.read_csv(out / "defects_heuristic.csv").set_index("fix_hash")
    assert len(d) == 12
    for k in range(12):
        fix = h.ids[f"fix{k}"]
        bad = k % 10 + 1
        ref = h.git("blame", "-w", "--porcelain", "-L", f"{bad},{bad}", f"{fix}^", "--",
                    f"src/m{k}.c").split()[0]
        assert d.loc[fix, "introducer_hash"] == ref == h.ids[f"intro{k}"]
        # lifetime from git's own committer timestamps
        ct = {c: int(h.git("log", "-1", "--format=%ct", c)) for c in (fix, ref)}
        assert d.loc[fix, "lifetime_days"] == pytest.approx((ct[fix] - ct[ref]) / 86400)
    res = json.loads((out / "lifetimes_heuristic.json").read_text())
    assert res["label"] == "heuristic"
    codes = {c["code"] for c in res["defect_table"]["caveats"]}
    assert "heuristic_classification" in codes
    assert res["defect_table"]["population"].startswith("HEURISTIC")
    sel = res["selection"]
    # the Fixes:-linked fix is left out, the add-only fix is selected but unblamable,
    # the docs commit and the introducers (no fix keyword) are not selected
    assert sel["n_with_fixes_link"] == 1 and sel["n_selected"] == 13
    assert res["szz"]["n_unblamable"] == 1 and res["szz"]["n_fixes_with_candidates"] == 12
    # the check blames the one linked fix and finds the introducer its developer named
    assert res["szz"]["agreement"]["n_found"] == 1 and res["szz"]["agreement"]["recall"] == 1
    assert (out / "lifetimes_heuristic.png").stat().st_size > 0
    # the explicit analysis is unchanged by the option and has no heuristic label
    plain = json.loads((out / "lifetimes.json").read_text())
    assert "HEURISTIC" not in plain["defect_table"]["population"]


def test_szz_commits_file_and_off_by_default(szz_history, tmp_path, capsys):
    h = szz_history["h"]
    store = tmp_path / "g.sqlite"
    assert main(["mine", str(h.path), "--store", str(store)]) == 0
    out = tmp_path / "plain"
    assert main(["lifetimes", "--store", str(store), "--boot", "10", "--out", str(out)]) == 0
    assert "HEURISTIC" not in capsys.readouterr().out
    assert not (out / "lifetimes_heuristic.json").exists()
    listing = tmp_path / "fixes.txt"
    listing.write_text(f"{h.ids['fix3'][:10]}\n{h.ids['docs']}\n{h.ids['fix_x']}\nabc\n")
    out = tmp_path / "listed"
    assert main(["lifetimes", "--store", str(store), "--szz", "--szz-commits", str(listing),
                 "--szz-check", "0", "--boot", "10", "--out", str(out)]) == 0
    res = json.loads((out / "lifetimes_heuristic.json").read_text())
    sel = res["selection"]
    assert sel["rule"] == "listed by the user"
    assert sel["n_selected"] == 2 and sel["n_with_fixes_link"] == 1 and sel["n_unknown"] == 1
    d = pd.read_csv(out / "defects_heuristic.csv")
    # docs commit changed nothing it could blame (new file): only fix3 gives a defect
    assert list(d["introducer_hash"]) == [h.ids["intro3"]]
