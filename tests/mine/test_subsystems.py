"""Path -> subsystem mapping: MAINTAINERS sections, TOML rules, path prefixes."""
from __future__ import annotations

import pandas as pd
import pytest

from procmetrics.errors import ConfigError, DataQualityWarning
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.mine.subsystems import (
    compile_glob, maintainers_mapper, prefix_mapper, rules_mapper,
)
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from tests.git_support import when

MAINTAINERS = """List of maintainers
===================

Descriptions of section entries:

\tF: *Files* and directories wildcard patterns.

THE REST
M:\tNobody <nobody@example.org>
F:\t*
F:\t*/

NETWORKING
F:\tnet/
F:\tdrivers/net/
X:\tdrivers/net/wireless/

WIRELESS
F:\tdrivers/net/wireless/

NET CORE FILE
F:\tnet/core/sock.c

HEADERS
F:\tinclude/*.h

TEGRA
N:\ttegra

DUP A
F:\tlib/shared/

DUP B
F:\tlib/shared
"""


@pytest.mark.parametrize("path,expected", [
    ("net/ipv4/tcp.c", ["NETWORKING"]),
    ("net/core/sock.c", ["NET CORE FILE"]),
    ("drivers/net/wireless/ath.c", ["WIRELESS"]),            # X: removes NETWORKING
    ("drivers/net/e1000.c", ["NETWORKING"]),
    ("include/foo.h", ["HEADERS"]),
    ("include/sub/foo.h", ["THE REST"]),                      # '*' stays in one folder
    ("drivers/gpu/tegra/dc.c", ["TEGRA"]),                    # N: match ends at offset 17
    ("lib/shared/x.c", ["DUP A", "DUP B"]),                   # tie keeps both
    ("README", ["THE REST"]),
])
def test_maintainers_most_specific_wins(path, expected):
    assert maintainers_mapper(MAINTAINERS, "M").map(path) == expected


def test_unmatched_path_is_unmapped():
    m = maintainers_mapper("NET\nF:\tnet/\n", "M")
    assert m.map("docs/a.txt") == ["(unmapped)"]


# The three F: examples documented in the kernel's MAINTAINERS preamble (recalled from memory):
# "drivers/net/" = all files in and below; "drivers/net/*" = in, not below;
# "*/net/*" = all files in "any top level directory"/net.
@pytest.mark.parametrize("pattern,path,hit", [
    ("drivers/net/", "drivers/net/a.c", True), ("drivers/net/", "drivers/net/x/a.c", True),
    ("drivers/net/*", "drivers/net/a.c", True), ("drivers/net/*", "drivers/net/x/a.c", False),
    ("*/net/*", "drivers/net/a.c", True), ("*/net/*", "net/a.c", False),
    ("*/net/*", "a/b/net/c.c", False), ("drivers/net", "drivers/net/a.c", True),
    ("drivers/net", "drivers/network.c", False), ("f?o.c", "foo.c", True),
])
def test_glob_semantics(pattern, path, hit):
    assert bool(compile_glob(pattern).regex.match(path)) is hit


def test_rules_file(tmp_path):
    f = tmp_path / "rules.toml"
    f.write_text('[subsystems]\nnetworking = ["net/**", "drivers/net/"]\n'
                 'docs = "**/*.md"\nnet-core = ["net/core/"]\n')
    m = rules_mapper(f)
    assert m.map("net/a/b/c.c") == ["networking"]
    assert m.map("net/core/x.c") == ["net-core"]
    assert m.map("README.md") == ["docs"] and m.map("a/b/README.md") == ["docs"]
    assert m.map("src/x.c") == ["(unmapped)"]
    assert m.kind == "rules" and "sha256:" in m.source


@pytest.mark.parametrize("text,match", [
    ("[subsystems\nx = 1", "line 1"), ("[other]\nx = ['a']", "key 'other'"),
    ("[subsystems]\nx = []", "key 'subsystems.x'"), ("[subsystems]\nx = [1]", "subsystems.x"),
    ("", "non-empty"),
])
def test_rules_file_errors(tmp_path, text, match):
    f = tmp_path / "rules.toml"
    f.write_text(text)
    with pytest.raises(ConfigError, match=match):
        rules_mapper(f)


def test_prefix_mapper():
    assert prefix_mapper(1).map("a/b/c.txt") == ["a"]
    assert prefix_mapper(2).map("a/b/c.txt") == ["a/b"]
    assert prefix_mapper(2).map("a/c.txt") == ["a"]
    assert prefix_mapper(1).map("README") == ["(top-level)"]
    with pytest.raises(ConfigError):
        prefix_mapper(0)


def test_maintainers_file_is_read_from_the_tip(git_history, tmp_path):
    h = git_history()
    h.commit("init\n", files={"MAINTAINERS": MAINTAINERS, "net/core/sock.c": "s\n",
                              "drivers/net/wireless/ath.c": "a\n"}, date=when(0))
    store = tmp_path / "s.sqlite"
    s = mine_repository(h.path, store=store, options=MineOptions(progress=False))
    assert (s.mapping_kind, s.mapping_source) == (
        "maintainers", "MAINTAINERS@" + h.git("rev-parse", "HEAD:MAINTAINERS"))
    cs = read_table(open_store(store), "commit_subsystems")
    assert sorted(cs["subsystem"]) == ["NET CORE FILE", "THE REST", "WIRELESS"]


def test_changing_the_mapping_remaps_every_path(git_history, tmp_path):
    h = git_history()
    h.commit("init\n", files={"net/a.c": "a\n", "docs/x.md": "x\n"}, date=when(0))
    rules = tmp_path / "r.toml"
    rules.write_text('[subsystems]\nnet = "net/"\n')
    store, once = tmp_path / "s.sqlite", tmp_path / "once.sqlite"
    mine_repository(h.path, store=store, options=MineOptions(progress=False))
    h.commit("more\n", files={"net/b.c": "b\n"}, date=when(1))
    opts = MineOptions(progress=False, subsystem_rules=rules)
    # a rules file the store was not mapped with: remapping needs remine (issue 14)
    with pytest.raises(ConfigError, match="rewrite-policy remine"):
        mine_repository(h.path, store=store, options=opts)
    with pytest.warns(DataQualityWarning, match="mapped again"):
        mine_repository(h.path, store=store,
                        options=MineOptions(progress=False, subsystem_rules=rules,
                                            rewrite_policy="remine"))
    mine_repository(h.path, store=once, options=opts)
    a = read_table(open_store(store), "commit_subsystems")
    b = read_table(open_store(once), "commit_subsystems")
    pd.testing.assert_frame_equal(a, b)
    assert set(a["subsystem"]) == {"net", "(unmapped)"}


_PATHS = ["net/ipv4/tcp.c", "net/core/sock.c", "drivers/net/wireless/ath.c", "include/foo.h",
          "include/sub/foo.h", "drivers/gpu/tegra/dc.c", "lib/shared/x.c", "README",
          "tegra", "a/tegra/b", "net", "drivers/net", "lib/shared"]


def test_batch_mapping_equals_one_path_at_a_time():
    """Invariance: mapping all paths in one call (joined-string regex scan, index
    look-ups) gives what mapping each path alone gives, in any order."""
    m = maintainers_mapper(MAINTAINERS + "\nCROSS\nN:\tc\\.c$|^net\n", "M")
    one = [m.map(p) for p in _PATHS]
    assert m.map_many(_PATHS) == one
    assert m.map_many(_PATHS[::-1]) == one[::-1]
    assert m.map("a/tegra/b") == ["TEGRA"] and m.map("net") == ["CROSS"]   # "net/" is a folder
