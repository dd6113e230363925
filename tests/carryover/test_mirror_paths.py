"""A mirrored subtree: the path map, given or inferred, recovers the truth of
tests/carryover/mirror.py exactly (statuses, match methods, latencies, gaps); without
it the upstream fixes outside the mirror would be counted and nothing is matched."""
from __future__ import annotations

import subprocess
import sys

import pytest

from procmetrics.errors import ConfigError
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.mine.paths import infer_path_map, parse_path_map
from procmetrics.mine.upstream import mine_upstream
from procmetrics.session import load_carryover
from tests.carryover.mirror import (MIRROR_GAP_DAYS, MIRROR_TRUTH, PATH_MAP, TARGETS,
                                    build_mirror_pair)


@pytest.fixture(scope="module")
def pair(tmp_path_factory):
    return build_mirror_pair(tmp_path_factory.mktemp("mirror"))


def _mine(pair, tmp_path, path_map):
    store = str(tmp_path / "s.sqlite")
    opts = MineOptions(progress=False)
    mine_repository(pair.tree, store=store, options=opts)
    s = mine_upstream("orbitlib", pair.tree, pair.upstream, store=store, options=opts,
                      path_map=path_map)
    return store, s


@pytest.mark.parametrize("given", [["lib/orbit=src"], ["infer"]])
def test_exact_recovery_with_the_path_map(pair, tmp_path, given):
    store, s = _mine(pair, tmp_path, given)
    assert s.path_map.pairs == (PATH_MAP,)
    assert s.path_map.how == ("inferred" if given == ["infer"] else "given")
    res = load_carryover(store, "orbitlib")
    assert res["path_map"]["how"] == s.path_map.how
    t = res["table"].set_index("fix_hash")
    for name, (status, latency) in MIRROR_TRUTH.items():
        row = t.loc[pair.up[name]]
        assert row["status"] == status, name
        if status == "carried":
            assert row["method"] == "patch-id" and row["latency_days"] == latency, name
            assert row["tree_hash"] == pair.down[name]
        if status == "missing":
            assert row["gap_days"] == MIRROR_GAP_DAYS[name]
    m = res["matches"].set_index("upstream_hash")
    for name in TARGETS:          # every library commit, found by its mapped patch id
        assert m.loc[pair.up[name], "method"] == "patch-id"
        assert m.loc[pair.up[name], "tree_hash"] == pair.down[name]
    assert set(t.index) == {pair.up[k] for k in MIRROR_TRUTH}


def test_without_the_map_nothing_matches(pair, tmp_path):
    store, s = _mine(pair, tmp_path, None)
    assert s.path_map is None
    t = load_carryover(store, "orbitlib")["table"]
    # the paths differ, so no patch id matches and no target is carried
    assert set(t["status"]) == {"not-relevant"}


def test_changing_the_map_recomputes_the_upstream_patch_ids(pair, tmp_path):
    store, _ = _mine(pair, tmp_path, None)
    again = mine_upstream("orbitlib", pair.tree, pair.upstream, store=store,
                          options=MineOptions(progress=False), path_map=["lib/orbit/=src/"])
    assert again.new_patch_ids_upstream == len(pair.up)     # all 13, under the new map
    t = load_carryover(store, "orbitlib")["table"]
    assert (t["status"] == "missing").sum() == 2


def test_carryover_command_states_how_the_map_was_obtained(pair, tmp_path):
    store = str(tmp_path / "c.sqlite")
    r = subprocess.run([sys.executable, "-m", "procmetrics", "mine", str(pair.tree),
                        "--upstream", str(pair.upstream), "--upstream-path-map", "infer",
                        "--store", store, "--no-progress"], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "path map: lib/orbit/ -> src/ (inferred; from the file names at both tips: 4 " \
           "of 5 tree files explained)" in r.stdout
    r = subprocess.run([sys.executable, "-m", "procmetrics", "carryover", "--store", store,
                        "--repo", "orbitlib"], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "missing 2, excluded 0, carried 4, shared 0, not-relevant 0, not-due 0, " \
           "not-mirrored 2" in r.stdout
    assert "paths: only upstream changes to mirrored paths count: lib/orbit/ -> src/ " \
           "(inferred when the upstream was mined" in r.stdout


def test_path_map_parsing_and_inference_rules():
    assert parse_path_map(["a/b=c", "x/=y/"]).pairs == (("a/b/", "c/"), ("x/", "y/"))
    for bad in (["a"], ["="], ["a=b", "a/c=d"], ["../a=b"]):
        with pytest.raises(ConfigError):
            parse_path_map(bad)
    # a tree that ships two upstream folders at the same paths: both, nothing else
    up = [f"{d}/f{i}.c" for d in ("net", "fs", "mm") for i in range(10)]
    tree = [f"{d}/f{i}.c" for d in ("net", "fs") for i in range(10)] + ["board/x.c"]
    assert set(infer_path_map(tree, up).pairs) == {("net/", "net/"), ("fs/", "fs/")}
    with pytest.raises(ConfigError, match="no folder"):
        infer_path_map(["a.c", "b.c"], ["x/y.c"])
