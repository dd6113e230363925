"""A JSON compilation database selects exactly the compiled files.

A small C project is committed in a temporary repository; the database is
written the way a compiler driver writes it (absolute ``directory``, ``file``
relative to it or absolute, ``arguments`` or ``command``), with one generated
source in the build folder (never committed: listed as matching nothing) and one
system file outside the repository (dropped, with a note). The oracle for the
commits is ``git rev-list --count --no-merges --full-history HEAD -- <files>``.
"""
from __future__ import annotations

import json

import pytest

from procmetrics.errors import ConfigError
from procmetrics.scope.apply import ScopeRequest
from procmetrics.store import open_store
from procmetrics.store.repodata import load_store_data
from tests.scope.scope_support import git

COMPILED = ["src/main.c", "src/uart.c", "lib/crc/crc16.c"]
NOT_COMPILED = ["src/uart.h", "include/board.h", "lib/crc/crc32.c", "tests/test_crc.c",
                "README"]


@pytest.fixture(scope="module")
def project(tmp_path_factory):
    from procmetrics.mine import MineOptions, mine_repository

    base = tmp_path_factory.mktemp("cproj")
    repo = base / "fw"
    repo.mkdir()
    git(repo, "init", "-q", "-b", "main")

    def commit(files, msg, day):
        for f, text in files.items():
            (repo / f).parent.mkdir(parents=True, exist_ok=True)
            (repo / f).write_text(text)
        git(repo, "add", "-A")
        git(repo, "-c", "user.name=Ada Test", "-c", "user.email=ada@example.invalid",
            "commit", "-q", "-m", msg, "--date", f"2024-01-{day:02d}T10:00:00+0000")

    commit({f: f"/* {f} */\n" for f in COMPILED + NOT_COMPILED}, "initial import", 1)
    commit({"src/main.c": "int main(void) { return 0; }\n"}, "main: return 0", 2)
    commit({"lib/crc/crc32.c": "/* crc32 v2 */\n"}, "crc32: unused variant", 3)
    commit({"src/uart.h": "#define UART 1\n", "src/uart.c": "/* uart v2 */\n"},
           "uart: define the port", 4)
    commit({"tests/test_crc.c": "/* more */\n", "README": "docs\n"}, "tests, docs", 5)
    commit({"lib/crc/crc16.c": "/* crc16 v2 */\n", "include/board.h": "/* b */\n"},
           "crc16: table", 6)
    git(repo, "mv", "src/uart.c", "src/serial.c")
    git(repo, "-c", "user.name=Ada Test", "-c", "user.email=ada@example.invalid",
        "commit", "-q", "-m", "uart: rename to serial", "--date", "2024-01-07T10:00:00+0000")
    store = base / "pm.sqlite"
    mine_repository(repo, store=store, options=MineOptions(progress=False))
    build = repo / "build"
    build.mkdir()
    db = [
        {"directory": str(build), "file": "../src/main.c",
         "arguments": ["cc", "-Os", "-I../include", "-c", "-o", "main.o", "../src/main.c"],
         "output": "main.o"},
        # the serial driver as compiled before the rename (the path the history knows)
        {"directory": str(build), "file": str(repo / "src" / "uart.c"),
         "command": f"cc -Os -I../include -c -o uart.o {repo / 'src' / 'uart.c'}"},
        {"directory": str(repo / "lib" / "crc"), "file": "crc16.c",
         "arguments": ["cc", "-c", "crc16.c"]},
        {"directory": str(build), "file": "gen/version.c",
         "arguments": ["cc", "-c", "gen/version.c"]},
        {"directory": "/usr/share/startup", "file": "crt0.c",
         "arguments": ["cc", "-c", "crt0.c"]},
    ]
    cc = base / "compile_commands.json"
    cc.write_text(json.dumps(db, indent=1))
    return repo, store, cc


def _load(store, spec):
    engine = open_store(str(store), create=False, readonly=True)
    try:
        return load_store_data(engine, "fw", within=ScopeRequest(spec))
    finally:
        engine.dispose()


def test_the_compiled_files_are_the_scope(project):
    repo, store, cc = project
    data = _load(store, str(cc))
    s = data.scope
    assert s.scope["kind"] == "compile_commands"
    assert s.n_paths == 3                              # src/main.c, src/uart.c, lib/crc/crc16.c
    assert s.unmatched_include == ("build/gen/version.c",)
    assert any("1 of 5 entries compile a file outside" in n for n in s.notes)
    want = set(git(repo, "rev-list", "--no-merges", "--full-history", "HEAD", "--",
                   *COMPILED).split())
    got = set(data["commits"]["hash"])
    print(f"compiled-files scope: {len(got)} commits (git: {len(want)}) of "
          f"{s.n_commits_history}")
    assert got == want
    # the rename moved uart.c out of the compiled set: it counts (renamed from)
    subjects = set(data["commits"]["subject"])
    assert "uart: rename to serial" in subjects
    assert "crc32: unused variant" not in subjects and "tests, docs" not in subjects


def test_a_path_list_selects_the_same(project, tmp_path):
    repo, store, _ = project
    lst = tmp_path / "shipped.txt"
    lst.write_text("# the files we build\n" + "\n".join(COMPILED) + "\nsrc/absent.c\n")
    s = _load(store, str(lst)).scope
    assert s.scope["kind"] == "path_list" and s.n_paths == 3
    assert s.unmatched_include == ("src/absent.c",)
    assert s.n_commits == int(git(repo, "rev-list", "--count", "--no-merges",
                                  "--full-history", "HEAD", "--", *COMPILED))


@pytest.mark.parametrize("text,msg", [
    ("{}", "JSON array"), ("[{\"file\": \"a.c\"}]", "needs 'directory'"),
    ("[{\"directory\": \"/x\", \"file\": \"a.c\"}]", "'arguments'"), ("[", "not a JSON"),
    ("[{\"directory\": \"/elsewhere\", \"file\": \"a.c\", \"command\": \"cc a.c\"}]",
     "no entry compiles a file inside")])
def test_a_bad_compilation_database_is_one_clear_error(project, tmp_path, text, msg):
    _, store, _ = project
    f = tmp_path / "compile_commands.json"
    f.write_text(text)
    with pytest.raises(ConfigError, match=msg):
        _load(store, str(f))
