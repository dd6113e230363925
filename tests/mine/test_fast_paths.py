"""The miner's fast paths give the same answers as its general code and as git.

* trailers: the one-line ``Token: value`` fast path of ``parse_trailers`` against the
  general walk (same block span, same trailers) and against
  ``git interpret-trailers --parse --no-divider``;
* log stream: one large commit fed in tiny chunks (the parser retries an unfinished
  commit only after its tokens doubled) against ``git diff-tree`` plumbing;
* subsystems: the per-folder candidate cache of ``map_many`` against a brute-force
  reading of the documented rules (every pattern tried on every path);
* git runner: a consumer that stops early ends git and the reader thread.
"""
from __future__ import annotations

import re
import threading

import pytest
from hypothesis import given, settings, strategies as st

from procmetrics.errors import DataQualityWarning
from procmetrics.mine import trailers as tr
from procmetrics.mine.git import GitRepo
from procmetrics.mine.logstream import log_args, parse_log
from procmetrics.mine.subsystems import UNMAPPED, compile_glob, maintainers_mapper
from tests.git_support import GitHistory
from tests.mine.test_trailers import git_trailers


def _general(message: str) -> tr.TrailerBlock:
    """parse_trailers with the fast path switched off (a regex that never matches)."""
    saved = tr._SIMPLE_BLOCK
    tr._SIMPLE_BLOCK = re.compile(r"(?!)")
    try:
        return tr.parse_trailers(message)
    finally:
        tr._SIMPLE_BLOCK = saved


def _takes_fast_path(message: str) -> bool:
    end = tr._end_of_log_message(message)
    return tr._SIMPLE_BLOCK.search(message, 0, end) is not None


# messages at the edge of the fast path: (message, takes the fast path?)
EDGES = [
    ("s\n\nKey: v\n", True),
    ("s\n\nKey: v", True),                               # no final newline
    ("s\n\nKey: v\n\n\n", True),                         # trailing empty lines
    ("s\r\n\r\nKey: v\r\nOther:  w \r\n", True),         # CRLF; blank line "\r"
    ("s\n \t\nKey : v\nK2\t:x:y:z\n", True),             # blank line of blanks; ':' in value
    ("s\n\nKey:\n", True),                               # empty value
    ("s\n\nbody\n\nA-1: x\nb: y\n", True),
    ("\n\nKey: v\n", True),                              # empty title line, then a blank one
    ("Key: v\n", False),                                 # title only
    ("s\n\nKey: v\n  continued\n", False),               # continuation line
    ("s\n\nKey: v\n# comment\n", True),               # trailing comments are cut first
    ("s\n\nKey: v\n   \n", False),                       # trailing blank-with-spaces line
    ("s\n\nprose\nKey: v\n", False),
    ("s\n\n(cherry picked from commit 0123456)\nKey: v\n", False),
    ("s\n\nKey: v\n\nConflicts:\n\tf.c\n", True),     # so is a final Conflicts block
    ("s\n\nKey: v\n# comment\nK2: w\n", False),
    ("s\n\n: v\nKey: v\n", False),
    ("s\n\nKéy: v\n", False),                            # non-ASCII token
    ("s\n\nKey: v\u00a0\n", True),                       # no-break space is not git whitespace
]


@pytest.mark.parametrize("message,fast", EDGES)
def test_trailer_fast_path_edges(message, fast, tmp_path):
    assert _takes_fast_path(message) is fast
    got = tr.parse_trailers(message)
    assert got == _general(message)
    assert [(t.raw_key, t.value) for t in got.trailers] == git_trailers(message, tmp_path)


_LINE = st.one_of(
    st.builds(lambda k, sp, v: f"{k}{sp}:{v}",
              st.sampled_from(["Signed-off-by", "Fixes", "a", "9-x", "Cc", "Bad key", ""]),
              st.sampled_from(["", " ", "\t", " \t"]),
              st.text(alphabet="ab :<>@\t\r#", max_size=8)),
    st.sampled_from(["", " ", "\t", "\r", "prose", " cont", "# c", "Conflicts:",
                     "(cherry picked from commit 1)", "Signed-off-by: A"]),
)


@settings(max_examples=400, deadline=None, derandomize=True)
@given(title=st.sampled_from(["", "s", "Key: v", "s\nt"]), body=st.lists(_LINE, max_size=8),
       end=st.sampled_from(["", "\n", "\n\n", "\r\n"]))
def test_trailer_fast_path_equals_general_walk(title, body, end):
    message = title + "\n" + "\n".join(body) + end
    assert tr.parse_trailers(message) == _general(message)


def test_large_commit_in_tiny_chunks_matches_git_plumbing(tmp_path):
    h = GitHistory.create(tmp_path / "r")
    h.commit("one", files={"a.txt": "a\n"})
    for i in range(400):        # written directly and staged at once (one git call)
        p = h.path / f"d{i % 7}" / f"f{i}.txt"
        p.parent.mkdir(exist_ok=True)
        p.write_text(f"{i}\n")
    (h.path / "a.txt").unlink()
    h.git("add", "-A")
    tip = h.commit("big\n\nKey: v\n")
    git = GitRepo.open(h.path)
    data = b"".join(git.stream(log_args(tip, None, line_counts=True, merge_files="none",
                                        since=None, until=None)))
    whole = list(parse_log([data]))
    tiny = list(parse_log(data[i:i + 7] for i in range(0, len(data), 7)))
    assert tiny == whole and len(whole) == 2
    plumbing = h.git("diff-tree", "-r", "--root", "--no-commit-id", "--name-status", "-M",
                     tip).splitlines()
    expected = sorted((line.split("\t")[1], line.split("\t")[0]) for line in plumbing)
    assert sorted((f.path, f.change_type) for f in whole[0].files) == expected
    assert len(expected) == 401


def _brute_force(sections: list[tuple[str, list[str], list[str]]], path: str) -> list[str]:
    """The documented rules read literally: every F: pattern of every section tried."""
    best, names = -1, set()
    for title, pats, excl in sections:
        if any(compile_glob(x).regex.match(path) for x in excl):
            continue
        for p in pats:
            pat = compile_glob(p)
            if pat.regex.match(path):
                if pat.specificity > best:
                    best, names = pat.specificity, {title}
                elif pat.specificity == best:
                    names.add(title)
    return sorted(names) or [UNMAPPED]


def test_subsystem_folder_cache_matches_brute_force():
    import random
    rng = random.Random(11)
    comps = ["a", "b", "ab", "a.c", "x.h"]
    glob_parts = comps + ["*", "?", "*.c", "a*", "[ab]"]
    for _ in range(60):
        sections = []
        for k in range(rng.randint(1, 8)):
            pats = ["/".join(rng.choice(glob_parts) for _ in range(rng.randint(1, 3)))
                    + rng.choice(["", "/"]) for _ in range(rng.randint(1, 3))]
            excl = ["/".join(rng.choice(glob_parts) for _ in range(rng.randint(1, 3)))
                    for _ in range(rng.randint(0, 1))]
            sections.append((f"S{k}", pats, excl))
        text = "\n\n".join(f"{t}\n" + "\n".join(f"F:\t{p}" for p in pats)
                           + "".join(f"\nX:\t{x}" for x in excl) for t, pats, excl in sections)
        mapper = maintainers_mapper(text, "test")
        paths = sorted({"/".join(rng.choice(comps) for _ in range(rng.randint(1, 4)))
                        for _ in range(80)})
        assert mapper.map_many(paths) == [_brute_force(sections, p) for p in paths]


def test_stream_stopped_early_ends_git_and_reader(tmp_path):
    h = GitHistory.create(tmp_path / "r")
    h.commit("big", files={f"f{i}.txt": f"{i}\n" * 20000 for i in range(8)})
    git = GitRepo.open(h.path)
    chunks = git.stream(["log", "-p", "--format=%H", "HEAD"])
    assert next(chunks)
    chunks.close()      # the consumer stops: git is killed, the thread ends
    assert not [t for t in threading.enumerate() if t.name == "git-reader"]


def test_changed_mapping_rewrites_only_what_moved(tmp_path):
    """A new rules file between runs: the step-wise store equals a store mined once, and
    subsystems nothing maps to any more are gone from the store."""
    from sqlalchemy import text

    from procmetrics.mine import MineOptions, mine_repository
    from procmetrics.store import open_store
    from procmetrics.store.tables import read_table
    h = GitHistory.create(tmp_path / "r")
    h.commit("init\n", files={"net/a.c": "a\n", "fs/b.c": "b\n", "fs/c.c": "c\n"})
    first, second = tmp_path / "one.toml", tmp_path / "two.toml"
    first.write_text('[subsystems]\nnet = "net/"\nfiles = "fs/"\n')
    second.write_text('[subsystems]\nnet = "net/"\nfs-b = "fs/b.c"\n')
    step, once = open_store(tmp_path / "s.sqlite"), open_store(tmp_path / "o.sqlite")
    mine_repository(h.path, store=step, options=MineOptions(progress=False,
                                                             subsystem_rules=first))
    h.commit("more\n", files={"net/d.c": "d\n"})
    opts = MineOptions(progress=False, subsystem_rules=second)
    # another rules file remaps the store: only on request (issue 14)
    with pytest.warns(DataQualityWarning, match="mapped again"):
        mine_repository(h.path, store=step, options=MineOptions(
            progress=False, subsystem_rules=second, rewrite_policy="remine"))
    mine_repository(h.path, store=once, options=opts)
    a, b = read_table(step, "commit_subsystems"), read_table(once, "commit_subsystems")
    assert a.equals(b) and set(a["subsystem"]) == {"net", "fs-b", "(unmapped)"}
    with step.connect() as conn:
        names = set(conn.execute(text("SELECT name FROM subsystem")).scalars())
    assert names == {"net", "fs-b", "(unmapped)"}


def test_every_git_call_bounds_how_much_of_the_pack_git_maps(tmp_path):
    """git runs with the pack-mapping bounds, streamed or not (git itself reports the
    settings it runs with)."""
    h = GitHistory.create(tmp_path / "r")
    h.commit("one", files={"a.txt": "a\n"})
    git = GitRepo.open(h.path)
    for key, value in (("core.packedGitLimit", "384m"), ("core.packedGitWindowSize", "128m")):
        assert b"".join(git.stream(["config", "--get", key])).decode().strip() == value
        assert git.text("config", "--get", key).strip() == value


def test_mining_does_not_import_pandas():
    """Mining builds no DataFrame: importing pandas cost about half a second of every
    incremental run through the library (the store's SQL helpers live in
    ``store.readsql``). The command line loads only the command it runs
    (tests/cli/test_cli_startup.py checks ``procmetrics mine``)."""
    import subprocess
    import sys
    code = ("import sys, procmetrics.cli.cmd_mine, procmetrics.mine.miner; "
            "print('pandas' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"
