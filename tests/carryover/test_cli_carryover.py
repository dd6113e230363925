"""`mine --upstream` and `carryover` through the real entry point on the generated pair."""
from __future__ import annotations

import csv

import pytest

from tests.carryover.pair import MISSING_GAP_DAYS, mine_pair, run_cli


@pytest.fixture(scope="module")
def cli_store(tmp_path_factory):
    root = tmp_path_factory.mktemp("clipair")
    pair, store, r = mine_pair(root)
    assert "3 backport line(s)" in r.stdout
    return pair, store, root


def test_carryover_prints_missing_list_and_latency(cli_store):
    pair, store, root = cli_store
    ex = pair.exclusions_toml(root / "ex.toml")
    out = root / "t.csv"
    r = run_cli("carryover", "--store", store, "--exclusions", str(ex), "--csv", str(out),
             "--split-date", "2020-10-01")
    assert r.returncode == 0, r.stderr
    assert "missing 3, excluded 1, carried 6, shared 1, not-relevant 1, not-due 1" in r.stdout
    for name, gap in MISSING_GAP_DAYS.items():
        assert f"{pair.up[name][:12]} " in r.stdout and f"gap {gap} d" in r.stdout
    assert "EXCLUDED " + pair.up["F9"][:12] in r.stdout
    assert "n=9: 6 carried, 3 censored" in r.stdout
    assert "before/after 2020-10-01: not compared" in r.stdout     # 10 fixes: too few
    with out.open(encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 13 and {r["status"] for r in rows} >= {"missing", "carried"}


def test_usage_errors_exit_2(cli_store):
    pair, store, root = cli_store
    bad = root / "bad.toml"
    bad.write_text('[[exclude]]\nupstream = "xyz"\nreason = "r"\n')
    r = run_cli("carryover", "--store", store, "--exclusions", str(bad))
    assert r.returncode == 2 and "upstream" in r.stderr
    r = run_cli("mine", str(pair.tree), str(pair.upstream), "--upstream", str(pair.upstream),
             "--store", store, "--no-progress")
    assert r.returncode == 2 and "--upstream goes with one tree" in r.stderr


def test_as_of_moves_the_cutoff(cli_store):
    pair, store, root = cli_store
    r = run_cli("carryover", "--store", store, "--as-of", "2020-11-30")
    assert r.returncode == 0, r.stderr
    # F11 (day 50) is due by then; F9 is not excluded here; gaps run to day 78
    assert "missing 5, excluded 0, carried 6, shared 1, not-relevant 1, not-due 0" in r.stdout
    r = run_cli("carryover", "--store", store, "--as-of", "2020-10-01")
    assert r.returncode == 2 and "before the tree's tip" in r.stderr
