"""Exact recovery of matches and of the missing list on a generated upstream/vendor
pair (tests/carryover/pair.py holds the truth), mined through the real git."""
from __future__ import annotations

import subprocess

import pandas as pd
import pytest

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.mine.upstream import mine_upstream
from procmetrics.session import load_carryover
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from tests.carryover.pair import (AMBIGUOUS, MISSING_GAP_DAYS, NOT_DUE, NOT_RELEVANT, SHARED,
                                  TRUTH, EXCLUDED_REASON, build_pair)


@pytest.fixture(scope="module")
def mined(tmp_path_factory):
    root = tmp_path_factory.mktemp("pair")
    pair = build_pair(root)
    store = str(root / "s.sqlite")
    opts = MineOptions(progress=False)
    mine_repository(pair.tree, store=store, options=opts)
    summary = mine_upstream("orbitkit-vendor", pair.tree, pair.upstream, store=store,
                            options=opts)
    excl = pair.exclusions_toml(root / "exclusions.toml")
    return pair, store, summary, load_carryover(store, None, None, str(excl))


def test_patch_ids_match_plain_git(mined):
    pair, store, summary, _ = mined
    # oracle: plain `git log -p | git patch-id --stable` over the whole upstream history
    log = subprocess.run(["git", "-C", str(pair.upstream), "log", "-p", "--no-merges"],
                         capture_output=True, check=True).stdout
    out = subprocess.run(["git", "-C", str(pair.upstream), "patch-id", "--stable"],
                         input=log, capture_output=True, check=True).stdout.decode()
    expected = {c: p for p, c in (line.split() for line in out.splitlines())}
    engine = open_store(store, create=False)
    got = read_table(engine, "patch_ids", summary.upstream)
    engine.dispose()
    assert dict(zip(got["hash"], got["patch_id"])) == expected
    assert summary.new_patch_ids_upstream == len(expected)


def test_second_run_computes_no_patch_id_again(mined):
    pair, store, summary, _ = mined
    again = mine_upstream("orbitkit-vendor", pair.tree, pair.upstream, store=store,
                          options=MineOptions(progress=False))
    # nothing is computed twice, not even for the tree's empty commit (stored as no diff)
    assert (again.new_patch_ids_tree, again.new_patch_ids_upstream) == (0, 0)
    engine = open_store(store, create=False)
    tree_ids = read_table(engine, "patch_ids", "orbitkit-vendor")
    engine.dispose()
    assert pair.down["empty"] not in set(tree_ids["hash"])
    assert summary.new_patch_ids_tree == 17        # 16 commits with a diff + the empty one
    assert again.backport_lines == summary.backport_lines == 3


def test_statuses_methods_and_latencies_recovered_exactly(mined):
    pair, _, _, res = mined
    table = res["table"].set_index("fix_hash")
    name = {h: n for n, h in pair.up.items()}
    got = {name[h]: r for h, r in table.iterrows()}
    for n, (status, method, latency, target_method) in TRUTH.items():
        r = got[n]
        assert r["status"] == status, n
        assert (r["method"] if isinstance(r["method"], str) else None) == method, n
        assert r["target_method"] == target_method, n
        if latency is not None:
            assert r["latency_days"] == pytest.approx(latency), n
        assert bool(r["ambiguous"]) == (n in AMBIGUOUS), n
    for n in SHARED:
        assert got[n]["status"] == "shared" and got[n]["method"] == "same-id"
    for n in NOT_RELEVANT:
        assert got[n]["status"] == "not-relevant"
    for n in NOT_DUE:
        assert got[n]["status"] == "not-due"
    assert set(got) == set(TRUTH) | set(SHARED) | set(NOT_RELEVANT) | set(NOT_DUE)


def test_missing_list_exact(mined):
    from procmetrics.analyse.carryover import missing_fixes
    pair, _, _, res = mined
    lst = missing_fixes(res["table"])
    name = {h: n for n, h in pair.up.items()}
    missing = lst[lst["status"] == "missing"]
    assert {name[h]: g for h, g in zip(missing["fix_hash"], missing["gap_days"])} == \
        pytest.approx(MISSING_GAP_DAYS)
    assert list(missing["fix_hash"].map(name)) == ["F5", "F6", "F8"]   # oldest gap first
    excl = lst[lst["status"] == "excluded"]
    assert list(excl["fix_hash"].map(name)) == ["F9"]
    assert list(excl["exclusion_reason"]) == [EXCLUDED_REASON]
    assert list(missing["subsystem"]) == ["core", "net", "net"]


def test_tree_fix_reference_resolved_upstream(mined):
    pair, _, _, res = mined
    r = res["tree_refs_upstream"]
    row = r[r["fix_hash"] == pair.down["own_fix"]]
    assert list(row["status"]) == ["resolved"]
    assert list(row["upstream_hash"]) == [pair.up["P2"]]
    assert list(row["resolved_in"]) == ["orbitkit"]
