"""Odd repository content is data: dates, encodings, paths, sizes, self/cyclic links,
and malformed user files. Oracles: git plumbing (``git log -z``, ``diff-tree``)."""
from __future__ import annotations

import warnings
from pathlib import Path

import pandas as pd
import pytest

from procmetrics.errors import DataQualityWarning
from procmetrics.mine import MineOptions, mine_repository
from procmetrics.mine.git import GitRepo
from procmetrics.mine.relink import resolve_links
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from procmetrics.store.writer import CommitRow, FixRow, StoreWriter
from tests.git_support import ALICE, when
from tests.robustness.robust_support import assert_one_line_error

OPTS = MineOptions(progress=False, repo_name="r")


def _raw_commit(h, *, author_date: str, committer_date: str, message: bytes,
                parent: str | None) -> str:
    tree = h.git("mktree", input=b"")
    obj = (b"tree " + tree.encode() + b"\n"
           + (b"parent " + parent.encode() + b"\n" if parent else b"")
           + b"author Odd Clock <odd@example.org> " + author_date.encode() + b"\n"
           + b"committer Odd Clock <odd@example.org> " + committer_date.encode() + b"\n\n"
           + message)
    return h.git("hash-object", "-t", "commit", "-w", "--literally", "--stdin", input=obj)


def test_dates_out_of_range_are_kept_and_never_crash(git_history, tmp_path, cli):
    """1980, 1970, 2100, year 5138, git's maximum, author after committer, and an
    author date git cannot read at all (only writable with hash-object --literally)."""
    h = git_history()
    dates = [("315532800 +0000", "1600000000 +0000"),        # 1980
             ("0 +0000", "1600000000 +0000"),                # 1970-01-01
             ("4102444800 -1200", "1600000000 +0000"),       # 2100, far-off zone
             ("99999999999 +0000", "1600000000 +0000"),      # year 5138
             ("9223372036854775807 +0000", "1600000000 +0000"),  # git's maximum
             ("1600086400 +0000", "1600000000 +0000"),       # author a day after committer
             ("not-a-date", "1600000000 +0000")]             # unreadable
    parent = None
    for i, (a, c) in enumerate(dates):
        parent = _raw_commit(h, author_date=a, committer_date=c,
                             message=f"odd: clock {i}\n".encode(), parent=parent)
    h.git("update-ref", "refs/heads/main", parent)
    store = tmp_path / "s.sqlite"
    with pytest.warns(DataQualityWarning, match="date git cannot read"):
        r = cli("mine", h.path, "--store", store)
    assert r.code == 0, r.err
    commits = read_table(open_store(store), "commits")
    assert len(commits) == len(dates)
    # oracle: the raw seconds git prints
    raw = dict(line.split(" ", 1) for line in
               h.git("log", "--format=%H %ad", "--date=raw").splitlines())
    stored = pd.read_sql("SELECT hash, author_time FROM git_commit", open_store(store))
    for hsh, t in zip(stored["hash"], stored["author_time"]):
        text = raw[hsh].strip()
        if text:
            assert int(text.split()[0]) == t
        else:       # unreadable: the committer date stands in
            assert t == 1600000000
    by_subject = commits.set_index("subject")["author_date"]
    assert by_subject["odd: clock 0"] == pd.Timestamp("1980-01-01", tz="UTC")
    assert pd.isna(by_subject["odd: clock 3"]) and pd.isna(by_subject["odd: clock 4"])
    r = cli("report", "--store", store, "--out", tmp_path / "rep", "--pdf-engine", "none")
    assert r.code == 0, r.err
    assert (tmp_path / "rep" / "report.json").exists()
    r = cli("export", "--table", "commits", "--store", store)
    assert r.code == 0 and r.out.count("\n") == len(dates) + 1


def _fast_import(h, commands: bytes) -> None:
    h.git_bytes("fast-import", "--quiet", "--force", input=commands)
    h.git("symbolic-ref", "HEAD", "refs/heads/main")


def _quoted(name: bytes) -> bytes:
    return b'"' + name.replace(b"\\", b"\\\\").replace(b'"', b'\\"').replace(b"\n", b"\\n") + b'"'


WEIRD = [b"new\nline.txt", b"tab\there.txt", b"ctl\x01\x1b[31m.txt", b"lat\xe9.txt",
         b'quote"d.txt', b"back\\slash.txt", b" lead and trail .txt ", b"-dash.txt",
         b"\xff\xfe.bin", b"dir with space/\xc3\xa9t\xc3\xa9.txt"]


def test_non_utf8_and_control_character_paths_round_trip(git_history, tmp_path):
    h = git_history()
    cmds = b"commit refs/heads/main\ncommitter Ren\xe9 <r@example.org> 1600000000 +0000\n"
    msg = b"odd: names caf\xe9\n\nbody \xff\n"
    cmds += b"data %d\n%s\n" % (len(msg), msg)
    for name in WEIRD:
        cmds += b"M 100644 inline " + _quoted(name) + b"\ndata 3\nab\n"
    cmds += (b"\ncommit refs/heads/main\ncommitter A <a@example.org> 1600000100 +0000\n"
             b"data 7\nrename\nR " + _quoted(WEIRD[0]) + b" " + _quoted(b"re\nnamed.txt")
             + b"\n\n")
    _fast_import(h, cmds)
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=OPTS)
    fc = read_table(open_store(store), "file_changes")
    # oracle: git's own NUL-separated name list, bytes decoded the way the miner documents
    out = h.git_bytes("log", "-z", "--format=", "--name-only", "--no-renames")
    names = {n for n in out.split(b"\0") if n.strip(b"\n")}

    def dec(b: bytes) -> str:
        try:
            return b.decode("utf-8")
        except UnicodeDecodeError:
            return b.decode("latin-1")
    assert {dec(n.lstrip(b"\n")) for n in names} == set(fc["path"]) | set(fc["old_path"].dropna())
    renamed = fc[fc["change_type"] == "R"]
    assert renamed[["old_path", "path"]].values.tolist() == [["new\nline.txt", "re\nnamed.txt"]]
    commits = read_table(open_store(store), "commits")
    assert "odd: names café" in set(commits["subject"])
    assert "René" in set(commits["committer_name"])


@pytest.fixture(scope="module")
def huge(tmp_path_factory):
    """One commit touching 100,000 files (one shared blob), one with a 10 MiB message,
    one with 50,000 trailers; built with a single fast-import run."""
    from tests.git_support import GitHistory

    h = GitHistory.create(tmp_path_factory.mktemp("huge") / "repo")
    parts = [b"blob\nmark :1\ndata 2\nx\n",
             b"commit refs/heads/main\ncommitter A <a@example.org> 1600000000 +0000\n"
             b"data 15\nbig: 100k files\n"]
    parts += [b"M 100644 :1 d%02d/f%06d.txt\n" % (i % 100, i) for i in range(100_000)]
    parts.append(b"\n")
    msg = b"huge: message\n\n" + (b"y" * 79 + b"\n") * (10 * 1024 * 1024 // 80) + b"\n"
    parts.append(b"commit refs/heads/main\ncommitter A <a@example.org> 1600000100 +0000\n"
                 b"data %d\n%s\n" % (len(msg), msg))
    tr = b"many: trailers\n\n" + b"".join(
        b"Reviewed-by: Person %d <p%d@example.org>\n" % (i % 700, i % 700)
        for i in range(50_000))
    parts.append(b"commit refs/heads/main\ncommitter A <a@example.org> 1600000200 +0000\n"
                 b"data %d\n%s\nM 100644 :1 last.txt\n\n" % (len(tr), tr))
    _fast_import(h, b"".join(parts))
    store = tmp_path_factory.mktemp("huge-store") / "s.sqlite"
    mine_repository(h.path, store=store, options=MineOptions(progress=False,
                                                             line_counts=False))
    return h, open_store(store)


@pytest.mark.timeout(240)
def test_a_commit_touching_100000_files(huge):
    h, engine = huge
    n = len(h.git_bytes("diff-tree", "--root", "-r", "-z", "--name-only", "--no-commit-id",
                        "HEAD~2").split(b"\0")) - 1
    assert n == 100_000
    fc = read_table(engine, "file_changes")
    assert (fc["change_type"] == "A").sum() == n + 1
    subs = read_table(engine, "commit_subsystems")
    assert len(subs[subs["hash"] == h.rev("HEAD~2")]) == 100          # d00 .. d99


@pytest.mark.timeout(240)
def test_a_10_mib_message_and_50000_trailers(huge):
    h, engine = huge
    commits = read_table(engine, "commits").set_index("subject")
    assert len(commits) == 3
    size = len(h.git_bytes("log", "-1", "--format=%B", "HEAD~1"))
    stored = pd.read_sql("SELECT length(message) AS n FROM git_commit WHERE subject="
                         "'huge: message'", engine)["n"].iloc[0]
    assert size - 1 <= stored <= size                 # %B adds one newline
    tr = read_table(engine, "trailers")
    assert (tr["key"] == "Reviewed-by").sum() == 50_000
    assert tr["person_email"].nunique() == 700


def test_self_and_cyclic_fix_references(git_history, tmp_path):
    """Rows written straight to the store (full hashes cannot cite each other in real
    git): X fixes Y, Y fixes X, Z fixes itself. Resolution asks git only for the
    repository's tips (an empty repository here): every reference is a full stored
    hash."""
    engine = open_store(tmp_path / "s.sqlite")
    w = StoreWriter(engine)
    repo_id = w.ensure_repository("cyc", str(tmp_path))
    run_id = w.start_run(repo_id, ref="HEAD", head_hash="c" * 40, base_hash=None,
                         is_shallow=False, options_json="{}", versions_json="{}")
    x, y, z = "a" * 40, "b" * 40, "c" * 40

    def row(hsh: str, parent: tuple[str, ...], fixes: list[str], day: int) -> CommitRow:
        return CommitRow(hsh, parent, ALICE, ALICE, 1600000000 + day * 86400, 0,
                         1600000000 + day * 86400, 0, f"c {hsh[:3]}", f"c {hsh[:3]}\n",
                         False, True, [], [],
                         [FixRow(f, None, True, f"Fixes: {f}") for f in fixes], [], [])
    w.write_batch(repo_id, run_id, [row(x, (), [y], 0), row(y, (x,), [x], 1),
                                    row(z, (y,), [z], 2)])
    resolve_links(GitRepo.open(git_history("empty").path), w, repo_id, run_id, z)
    w.complete_run(run_id, repo_id, tip_hash=z, tip_ref="HEAD", path=str(tmp_path),
                   remote_url=None, is_shallow=False, mapping_kind="path-prefix",
                   mapping_source="1", counts={}, message=None)   # tidy tables: complete runs
    fl = read_table(engine, "fix_links").set_index("fix_hash")
    assert fl.loc[x, "status"] == "resolved" and fl.loc[x, "introducer_hash"] == y
    assert fl.loc[y, "status"] == "resolved" and fl.loc[y, "introducer_hash"] == x
    assert fl.loc[z, "status"] == "self"
    # the defect table built from these links terminates and keeps every link visible
    from procmetrics.analyse.lifetimes.defects import build_defects
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = build_defects(read_table(engine, "fix_links"),
                              commits=read_table(engine, "commits"))
    assert len(table.defects) >= 1


# -- malformed user files -------------------------------------------------------------
@pytest.mark.parametrize("text, needles", [
    ('[subsystems]\nnet = ["net/"\ndocs = "d"\n', ["rules.toml:3", "not valid toml"]),
    ('[subsystems]\nnet = "a"\nnet = "b"\n', ["rules.toml:3", "overwrite"]),
    ('[subsystems]\nnet = 3\n', ["rules.toml", "subsystems.net"]),
    ('[other]\nx = 1\n', ["rules.toml", "key 'other'"]),
    (b'[subsystems]\nnet = "caf\xe9"\n', ["rules.toml", "not valid toml"]),
])
def test_malformed_subsystem_rules_name_file_line_and_key(git_history, tmp_path, cli, text,
                                                          needles):
    h = git_history()
    h.commit("a\n", files={"a/x": "1\n"}, date=when(0))
    rules = tmp_path / "rules.toml"
    rules.write_bytes(text if isinstance(text, bytes) else text.encode())
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite", "--subsystem-rules", rules)
    assert r.code == 2
    assert_one_line_error(r.err, *needles)
    assert not (tmp_path / "s.sqlite").exists() or \
        read_table(open_store(tmp_path / "s.sqlite"), "commits").empty


@pytest.mark.parametrize("text, needles", [
    ('[[claim]]\nid = "a"\ntext = "x"\nkind = "no_such_kind"\n', ["claims.toml:4", "kind"]),
    ('[[claim]]\nid = "a"\ntext = "x"\nkind = \n', ["claims.toml:4"]),
    ('colour = 1\n', ["claims.toml:1", "colour"]),
])
def test_malformed_claims_file_names_file_line_and_key(git_history, tmp_path, cli, text,
                                                       needles):
    h = git_history()
    h.commit("a\n", files={"a/x": "1\n"}, date=when(0))
    store = tmp_path / "s.sqlite"
    assert cli("mine", h.path, "--store", store).code == 0
    claims = tmp_path / "claims.toml"
    claims.write_text(text)
    r = cli("check", claims, "--store", store)
    assert r.code == 2
    assert_one_line_error(r.err, *needles)


def test_missing_rules_file(git_history, tmp_path, cli):
    h = git_history()
    h.commit("a\n", files={"a/x": "1\n"}, date=when(0))
    r = cli("mine", h.path, "--store", tmp_path / "s.sqlite", "--subsystem-rules",
            Path(tmp_path / "nope.toml"))
    assert r.code == 2
    assert_one_line_error(r.err, "nope.toml", "cannot read")
