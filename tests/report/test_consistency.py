"""One number per quantity: the demo report and the CLI print the same figures.

The full demo history (sample_repos/generate.py, 4,000 commits), its store and its
report with the demo claims and scope files are those of the README's ``make demo``
(the session fixture ``make_demo``, run once and shared with tests/test_readme_demo.py);
the analysis commands then run through the real entry point with their default options. Every quantity
that appears in more than one place (report.json sections and claim blocks,
tables/*.csv, command output) must be printed identically. Before this test, the
same demo printed 443 (``growth``), 417 (report figure and table) and 444 (growth
claim) fix events; a median of 85.7 [73.7, 103.4] days in ``lifetimes`` against
86 (75–102) in the table; and ``series`` by month against the report by quarter.
"""
from __future__ import annotations

import csv
import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from procmetrics import textfmt
from procmetrics.cli import main

ROOT = Path(__file__).resolve().parents[2]
GEN = str(ROOT / "sample_repos" / "generate.py")


def _own_demo(base: Path) -> tuple[Path, Path]:
    """Without make: the demo mined and reported here, as ``make demo`` does it."""
    from procmetrics.mine import MineOptions, mine_repository
    from procmetrics.report.build import make_report
    from procmetrics.report.model import ReportOptions

    repo = base / "aurora-fw"
    subprocess.run([sys.executable, GEN, "--out", str(repo)], check=True, capture_output=True)
    store = base / "store.sqlite"
    mine_repository(repo, store=store, options=MineOptions(progress=False))
    out = base / "report"
    make_report(str(store), out, ReportOptions(
        policy=_policy(), claims_path=str(ROOT / "sample_repos" / "demo_claims.toml"),
        scope_file=str(ROOT / "sample_repos" / "demo_scopes.toml"), pdf_engine="none"))
    return store, out


def _policy() -> str:
    return subprocess.run([sys.executable, GEN, "--print-change-date"], check=True,
                          capture_output=True, text=True).stdout.strip()


@pytest.fixture(scope="session")
def demo_report(request, tmp_path_factory) -> dict:
    if shutil.which("make") is None:
        store, out = _own_demo(tmp_path_factory.mktemp("demo-consistency"))
    else:
        demo = request.getfixturevalue("make_demo")     # shared with the README demo test
        assert demo.returncode == 0, demo.output
        store, out = demo.out / "procmetrics.sqlite", demo.out
    policy = _policy()
    doc = json.loads((out / "report.json").read_text(encoding="utf-8"))
    return {"store": store, "out": out, "policy": policy, "json": doc,
            "figures": {f["key"]: f for f in doc["figures"]},
            "tables": {t["key"]: t for t in doc["tables"]},
            "claims": {c["id"]: c for c in doc["claims"]}}


def _cli(capsys, *argv: str) -> str:
    capsys.readouterr()
    assert main(list(argv)) == 0
    return capsys.readouterr().out


def _csv(demo: dict, key: str, kind: str = "tables") -> list[dict[str, str]]:
    item = demo[kind][key]
    with open(demo["out"] / item["csv"], encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def test_fix_events_are_one_count_with_one_definition(demo_report, capsys):
    from procmetrics.analyse.growth.analysis import FIX_EVENTS_DEFINITION

    out = _cli(capsys, "growth", "--store", str(demo_report["store"]))
    n_cli = int(re.search(r": (\d+) fix events", out).group(1))
    assert FIX_EVENTS_DEFINITION in out                 # the definition beside the count
    fig = demo_report["figures"]["growth-curve"]
    tests = _csv(demo_report, "growth-trend-tests")
    claim = demo_report["claims"]["growth"]
    counts = {"growth command": n_cli, "report figure": fig["n"],
              "trend-test table": {int(r["n"]) for r in tests},
              "growth claim": claim["evidence"]["n"]}
    assert counts["trend-test table"] == {n_cli}, counts
    assert fig["n"] == n_cli and claim["evidence"]["n"] == n_cli, counts
    assert any(FIX_EVENTS_DEFINITION in r for r in claim["reasons"])
    assert FIX_EVENTS_DEFINITION in fig["values"]["population"]
    # the trend statistics printed by the command are the table's, to the digits shown
    for r in tests:
        stat = re.search(rf"trend {r['test']}\s+statistic=(\S+)", out).group(1)
        assert stat == f"{float(r['statistic']):.3f}", (r["test"], stat, r["statistic"])


_METHODS = {"truncation_aware": "truncation-aware", "naive": "naive",
            "horizon": "common horizon"}


def test_lifetime_medians_print_alike_in_the_command_and_the_table(demo_report, capsys):
    horizon = demo_report["figures"]["lifetime-before-after"]["values"]["horizon_days"]
    out = _cli(capsys, "lifetimes", "--store", str(demo_report["store"]), "--by", "period",
               "--change-date", demo_report["policy"], "--horizon", f"{horizon:g}")
    cli = {}
    for m in re.finditer(r"^\s+median (\S+)\s+(truncation_aware|naive|horizon)\s+(.+?) n=(\d+)",
                         out, flags=re.M):
        group = "all" if m.group(1) == "(all)" else m.group(1)
        cli[(group, _METHODS[m.group(2)])] = (m.group(3), int(m.group(4)))
    table = {(r["group"], r["method"]): (r["q50"], int(r["n"]))
             for r in _csv(demo_report, "lifetime-quantiles")}
    assert len(cli) == 9 and set(cli) == set(table), (sorted(cli), sorted(table))
    assert cli == table
    # the claim on the median quotes the table's point estimate in the same digits
    claim = demo_report["claims"]["median-60d"]
    est = claim["evidence"]["estimate"]
    assert textfmt.number(est["value"], "days") == table[("all", "truncation-aware")][0] \
        .split(" ")[0]


def test_before_after_level_change_prints_alike(demo_report, capsys):
    out = _cli(capsys, "compare", "--store", str(demo_report["store"]), "--at",
               demo_report["policy"], "--metric", "review_coverage")
    level = re.search(r"ITS review_coverage:.*?\n\s+level change (.+?) log-odds;", out).group(1)
    caption = demo_report["figures"]["its-review-coverage"]["caption"]
    assert f"level change at the date {level} log-odds" in caption, (level, caption)
    assert "per quarter" in out


def test_series_prints_the_report_periods_and_values(demo_report, capsys):
    from procmetrics.cli._series_common import fmt

    out = _cli(capsys, "series", "--store", str(demo_report["store"]), "--metric",
               "review_coverage", "--no-trend")
    assert "per quarter" in out.splitlines()[0]
    printed = dict(re.findall(r"^\s+(\d{4}Q\d)\s+(\S+)\s+\[", out, flags=re.M))
    rows = _csv(demo_report, "series-review-coverage", kind="figures")
    shown = {r["period"]: fmt(float(r["value"])) for r in rows if r["subsystem"] == "(all)"}
    assert shown and printed == shown


#: kinds whose evaluators are being rewritten in parallel (issue 11, one-sided lifetime
#: tests): on the demo, ``lifetimes_shorter_after`` still carries a median difference as
#: its estimate while its reason quotes the log-rank p and two medians
REWRITTEN_ELSEWHERE = ("lifetimes_shorter_after",)


def test_claim_reasons_quote_the_values_of_their_evidence(demo_report):
    """Every supported/not supported claim's first reason prints its own estimate."""
    for cid, c in demo_report["claims"].items():
        est = c["evidence"]["estimate"]
        if est is None or c["verdict"] not in ("supported", "not_supported") \
                or c["kind"] in REWRITTEN_ELSEWHERE:
            continue
        reason = c["reasons"][0]
        digits = [textfmt.number(est["value"], est["unit"]), f"{est['value']:.3g}",
                  f"{100 * est['value']:.1f}%"]
        assert any(d in reason for d in digits), (cid, digits, reason)


# --- intervals stable to the digits shown -------------------------------------------


def _by_seed(capsys, demo: dict, *argv: str) -> list[str]:
    return [_cli(capsys, *argv, "--store", str(demo["store"]), "--seed", str(seed))
            for seed in (1, 2)]


def test_change_point_intervals_and_support_print_alike_in_the_command_and_the_table(
        demo_report, capsys):
    """The residual bootstrap of change-point positions draws from a stream keyed by
    the series (procmetrics.resampling.data_keyed_rng). Before, ``changes`` drew from
    one stream for all series and the report from one per series, so the same series
    printed two supports; ``changes`` has no --seed any more."""
    out = _cli(capsys, "changes", "--store", str(demo_report["store"]))
    cli = {}
    metric = None
    for line in out.splitlines():
        m = re.match(r"^(\w+) \[\(all\)\]: ", line)
        if m:
            metric = m.group(1)
        m = re.match(r"^\s+from (\S+): position interval (\S+) \.\. (\S+), support (\S+);",
                     line)
        if m and metric:
            cli[(metric, m.group(1))] = (m.group(2), m.group(3), m.group(4))
    table = {(r["metric"], r["period"]): (r["date_low"], r["date_high"],
                                          textfmt.number(float(r["support"])))
             for r in _csv(demo_report, "change-points") if r["subsystem"] == "(all)"}
    shared = set(cli) & set(table)
    assert shared and len(shared) == len(table), (cli, table)
    for k in shared:
        assert cli[k] == table[k], (k, cli[k], table[k])


def test_lifetime_quantile_intervals_do_not_move_with_the_seed(demo_report, capsys):
    a, b = _by_seed(capsys, demo_report, "lifetimes", "--by", "period", "--change-date",
                    demo_report["policy"], "--horizon", "365")
    med = [re.findall(r"median .*", out) for out in (a, b)]
    assert med[0] and med[0] == med[1]


def test_check_marks_fragile_verdicts_in_text_json_and_exit_code(demo_report, capsys,
                                                                  tmp_path):
    claims = str(ROOT / "sample_repos" / "demo_claims.toml")
    capsys.readouterr()
    js = tmp_path / "verdicts.json"
    code = main(["check", claims, "--store", str(demo_report["store"]), "--policy-date",
                 demo_report["policy"], "--json", str(js), "--scope-file",
                 str(ROOT / "sample_repos" / "demo_scopes.toml")])
    out = capsys.readouterr().out
    full = json.loads(js.read_text(encoding="utf-8"))
    assert full["exit_code"] == code          # the JSON carries provenance and the exit code
    doc = {c["id"]: c for c in full["verdicts"]}
    fragile = {cid for cid, c in doc.items() if c["robustness"]["fragile"]}
    assert fragile == {m.group(1) for m in re.finditer(r"\[FRAGILE\] (\S+):", out)}
    assert bool(code & 16) == bool(fragile) and 9 <= code <= 31
    # the report's claim blocks carry the same panel verdicts as check
    for cid, c in demo_report["claims"].items():
        assert c["robustness"]["fragile"] == doc[cid]["robustness"]["fragile"], cid
        assert [(r["axis"], r["verdict"]) for r in c["robustness"]["variants"]] == \
            [(r["axis"], r["verdict"]) for r in doc[cid]["robustness"]["variants"]], cid
