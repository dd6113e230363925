"""Scope globs against git's own ``:(glob)`` pathspec matching (the oracle).

A small repository holds awkward paths (nested directories, names with dots,
brackets and spaces, a directory and a file sharing a prefix); for each pattern
the set of paths we match must equal ``git ls-files -- ':(glob)PATTERN'``.
"""
from __future__ import annotations

import pytest

from procmetrics.errors import ConfigError
from procmetrics.scope.definition import read_path_list, read_scope
from procmetrics.scope.matcher import PatternSet
from tests.scope.scope_support import git

FILES = ["README.md", "Makefile", "src/main.c", "src/main.h", "src/net/tcp.c",
         "src/net/udp.c", "src/net/deep/er/x.c", "src/netlink.c", "src-old/main.c",
         "include/a.h", "include/sub/b.h", "docs/a b.md", "docs/x[1].txt",
         "tools/gen.py", "tools/.hidden.c", "a.c/inner.txt"]

PATTERNS = ["src", "src/**", "src/*", "src/*.c", "**/*.c", "**/*.h", "src/**/x.c",
            "src/net", "src/net*", "src/n?t/*.c", "src/[mn]*.c", "src/[!m]*.c", "*.md",
            "**", "docs/*", "**/er", "**/er/**", "*.c", "a.c", "include/**/*.h",
            "src/**/*.c", "tools/*.c", "nothing/**", "src/main.c"]


@pytest.fixture(scope="module")
def repo(tmp_path_factory):
    r = tmp_path_factory.mktemp("globs") / "r"
    r.mkdir()
    git(r, "init", "-q")
    for f in FILES:
        (r / f).parent.mkdir(parents=True, exist_ok=True)
        (r / f).write_text(f + "\n")
    git(r, "add", "-A")
    git(r, "-c", "user.name=Ada Test", "-c", "user.email=ada@example.invalid", "commit",
        "-q", "-m", "files")
    return r


@pytest.mark.parametrize("pattern", PATTERNS)
def test_a_glob_matches_what_git_glob_magic_matches(repo, pattern):
    want = set(git(repo, "ls-files", "-z", "--", f":(glob){pattern}").split("\0")) - {""}
    mask, hits = PatternSet.build([pattern]).match(FILES)
    got = {p for p, m in zip(FILES, mask) if m}
    assert got == want, pattern
    assert hits == [len(want)]


def test_literal_entries_mean_their_characters(repo):
    ps = PatternSet.build(["docs/x[1].txt", "src/*.c"], literal=True)
    mask, hits = ps.match(FILES)
    assert {p for p, m in zip(FILES, mask) if m} == {"docs/x[1].txt"}
    assert hits == [1, 0]          # "src/*.c" as a literal path names no file


def test_scope_file_names_and_errors(tmp_path):
    f = tmp_path / "s.toml"
    f.write_text('[scope.one]\ninclude = ["src/**"]\nexclude = ["**/test/**"]\n'
                 '[scope.two]\ninclude = ["lib"]\n', encoding="utf-8")
    one = read_scope(f"{f}:one")
    assert one.include.patterns == ("src/**",) and one.exclude.patterns == ("**/test/**",)
    assert len(one.sha256) == 64 and one.kind == "toml"
    with pytest.raises(ConfigError, match="several scopes"):
        read_scope(str(f))
    with pytest.raises(ConfigError, match="no scope 'three'"):
        read_scope(f"{f}:three")
    with pytest.raises(ConfigError, match="cannot read"):
        read_scope(str(tmp_path / "missing.toml"))
    bad = tmp_path / "bad.toml"
    for text, msg in [('[scope.x]\ninclude = []\n', "non-empty"),
                      ('[scope.x]\ninclude = ["a"]\nextra = 1\n', "unknown keys"),
                      ('[scope.x]\ninclude = ["/abs"]\n', "repository-relative"),
                      ('[scope.x]\ninclude = ["a[b"]\n', "unclosed"),
                      ('[other]\n', "expected"), ('x = [', "not valid TOML")]:
        bad.write_text(text, encoding="utf-8")
        with pytest.raises(ConfigError, match=msg):
            read_scope(str(bad))


def test_a_path_list_skips_comments_and_blank_lines():
    raw = b"# shipped files\nsrc/main.c\n\n  ./src/net/tcp.c  # the stack\nsrc/main.c\n"
    assert read_path_list(raw, "l.txt") == ["src/main.c", "./src/net/tcp.c"]
    with pytest.raises(ConfigError, match="names no path"):
        read_path_list(b"# nothing\n", "l.txt")
