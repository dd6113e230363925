"""Mining the sample history, checked against git plumbing run by the test itself."""
from __future__ import annotations

import json
import subprocess

import pytest
from sqlalchemy import select

from procmetrics.mine import MineOptions, mine_repository
from procmetrics.store import open_store
from procmetrics.store import schema as s
from procmetrics.store.tables import read_table
from tests.git_support import EPOCH0


@pytest.fixture(scope="module")
def mined(sample_history, tmp_path_factory):
    store = tmp_path_factory.mktemp("store") / "s.sqlite"
    summary = mine_repository(sample_history.path, store=store,
                              options=MineOptions(progress=False))
    return sample_history, open_store(store), summary


def _text(b: bytes) -> str:
    try:
        return b.decode("utf-8")
    except UnicodeDecodeError:
        return b.decode("latin-1")


def _log_z(h, *args: str) -> list[bytes]:
    return h.git_bytes("log", "-z", *args).split(b"\0")


def test_commit_and_merge_counts_match_rev_list(mined):
    h, engine, summary = mined
    commits = read_table(engine, "commits")
    assert len(commits) == int(h.git("rev-list", "--count", "HEAD")) == summary.commits
    assert int(commits["is_merge"].sum()) == int(h.git("rev-list", "--count", "--merges", "HEAD"))
    octo = commits.set_index("hash").loc[h.ids["octopus"]]
    assert octo["n_parents"] == 3 and bool(octo["is_merge"])
    roots = h.git("rev-list", "--max-parents=0", "HEAD").split()
    assert sorted(commits.loc[commits["n_parents"] == 0, "hash"]) == sorted(roots)


def test_identities_and_dates_match_git_log(mined):
    h, engine, _ = mined
    fmt = "%H%x00%aN%x00%aE%x00%at%x00%ai%x00%cN%x00%cE%x00%ct%x00%ci%x00%s"
    raw = h.git_bytes("log", "--encoding=UTF-8", f"--format={fmt}")
    # the documented rule for bytes that are not UTF-8: read them as Latin-1
    rows = [[_text(f) for f in line.split(b"\0")] for line in raw.splitlines()]
    commits = read_table(engine, "commits").set_index("hash")

    def offset(iso: str) -> int:
        tz = iso.split()[-1]
        return (-1 if tz[0] == "-" else 1) * (int(tz[1:3]) * 60 + int(tz[3:5]))
    for hsh, an, ae, at, ai, cn, ce, ct, ci, subj in rows:
        c = commits.loc[hsh]
        assert (c.author_name, c.author_email, c.committer_name, c.committer_email) == \
            (an, ae, cn, ce)
        assert int(c.author_date.timestamp()) == int(at)
        assert int(c.committer_date.timestamp()) == int(ct)
        assert (c.author_offset_min, c.committer_offset_min) == (offset(ai), offset(ci))
        assert c.subject == subj
    # .mailmap applied (the root commit was made as "Alice Old")
    assert commits.loc[h.ids["root"], "author_email"] == "alice@example.org"
    assert commits.loc[h.ids["bug"], "committer_date"].timestamp() == EPOCH0 + 40 * 86400


def _numstat(h) -> dict[tuple[str, str], tuple[int | None, int | None]]:
    out: dict[tuple[str, str], tuple[int | None, int | None]] = {}
    toks = _log_z(h, "--numstat", "-M", "--root", "--format=%x01%H")
    commit, i = None, 0
    while i < len(toks):
        t = toks[i].lstrip(b"\n")
        i += 1
        if t.startswith(b"\x01"):
            commit = t[1:].decode()
            continue
        if not t:
            continue
        added, deleted, path = t.split(b"\t", 2)
        if not path:                                   # rename: old and new path follow
            path = toks[i + 1]
            i += 2
        val = (None, None) if added == b"-" else (int(added), int(deleted))
        out[(commit, path.decode("utf-8"))] = val
    return out


def test_line_counts_match_numstat(mined):
    h, engine, _ = mined
    fc = read_table(engine, "file_changes")
    ours = {(r.hash, r.path): (None if r.lines_added is None or r.lines_added != r.lines_added
                               else int(r.lines_added),
                               None if r.lines_deleted is None or r.lines_deleted != r.lines_deleted
                               else int(r.lines_deleted))
            for r in fc.astype(object).where(fc.notna(), None).itertuples()}
    assert ours == _numstat(h)
    png = fc[fc["path"] == "logo.png"].iloc[0]
    assert bool(png["is_binary"]) and png["lines_added"] is __import__("pandas").NA


def test_change_types_and_renames_match_name_status(mined):
    h, engine, _ = mined
    toks = _log_z(h, "--name-status", "-M", "--root", "--format=%x01%H")
    expected, commit, i = set(), None, 0
    while i < len(toks):
        t = toks[i].lstrip(b"\n").decode()
        i += 1
        if t.startswith("\x01"):
            commit = t[1:]
        elif t:
            if t[0] in "RC":
                expected.add((commit, toks[i + 1].decode(), toks[i].decode(), t[0]))
                i += 2
            else:
                expected.add((commit, toks[i].decode(), None, t[0]))
                i += 1
    fc = read_table(engine, "file_changes")
    got = {(r.hash, r.path, r.old_path if isinstance(r.old_path, str) else None, r.change_type)
           for r in fc.itertuples()}
    assert got == expected
    assert (h.ids["rename"], "net/core.c", "net/link.c", "R") in got


def test_trailers_match_interpret_trailers(mined, tmp_path):
    h, engine, summary = mined
    tr = read_table(engine, "trailers")
    total = 0
    for hsh in h.git("rev-list", "HEAD").split():
        body = h.git_bytes("log", "-1", "--encoding=UTF-8", "--format=%B", hsh)[:-1]
        git_out = subprocess.run(["git", "interpret-trailers", "--parse", "--no-divider"],
                                 input=body, capture_output=True, check=True, cwd=tmp_path,
                                 env=h.env).stdout.decode("utf-8", "replace").splitlines()
        mine = tr[tr["hash"] == hsh].sort_values("position")
        assert [f"{k}: {v}" for k, v in zip(mine["raw_key"], mine["value"])] == git_out, hsh
        total += len(git_out)
    assert total == len(tr) == summary.trailers
    person = tr[(tr["hash"] == h.ids["bug"]) & (tr["key"] == "Reviewed-by")].iloc[0]
    assert (person.person_name, person.person_email) == ("Carol Test", "carol@example.com")


def test_fix_links_resolve_like_rev_parse(mined):
    h, engine, summary = mined
    fl = read_table(engine, "fix_links")
    assert len(fl) == 6 == summary.fix_refs
    for r in fl.itertuples():
        proc = subprocess.run(["git", "-C", str(h.path), "rev-parse", "--verify", "-q",
                               f"{r.ref_hash}^{{commit}}"], capture_output=True, env=h.env)
        if proc.returncode == 0:
            assert (r.status, r.introducer_hash) == ("resolved", proc.stdout.decode().strip())
        else:
            assert r.status == "unresolved" and r.introducer_hash is None
    by_len = {len(r.ref_hash): r for r in fl.itertuples()}
    assert set(by_len) == {7, 8, 12, 16, 40}
    multi = fl[fl["fix_hash"] == h.ids["multi"]]
    assert list(multi["in_trailer_block"]) == [False, True, True, True, True]
    first = fl[fl["fix_hash"] == h.ids["fix"]].iloc[0]
    assert bool(first.subject_match) and first.intro_author_date.timestamp() == EPOCH0 + 86400
    un = read_table(engine, "unparsed_references")
    assert list(un["raw_text"]) == ["Fixes: #123"]
    commits = read_table(engine, "commits").set_index("hash")
    assert bool(commits.loc[h.ids["fix"], "stable_request"])
    assert int(commits["stable_request"].sum()) == 1


def test_reverts_and_tags(mined):
    h, engine, _ = mined
    rv = read_table(engine, "reverts")
    assert list(rv["reverted_hash"]) == [h.ids["b1"]] and list(rv["status"]) == ["resolved"]
    tags = read_table(engine, "tags").set_index("name")
    for name in ("v0.1", "v1.0"):
        assert tags.loc[name, "commit_hash"] == h.git("rev-parse", f"{name}^{{commit}}")
    assert not tags.loc["v0.1", "is_annotated"] and tags.loc["v1.0", "is_annotated"]
    assert tags.loc["v1.0", "tag_date"].timestamp() == EPOCH0 + 16 * 86400
    assert tags.loc["v1.0", "tag_offset_min"] == 180
    assert tags.loc["v0.1", "tag_date"].timestamp() == EPOCH0    # root's committer date
    assert tags.loc["v0.1", "tag_offset_min"] == 120


def test_text_encodings_and_empty_message(mined):
    h, engine, _ = mined
    with engine.connect() as conn:
        rows = dict(conn.execute(select(s.commit.c.hash, s.commit.c.message_was_utf8)).all())
        msgs = dict(conn.execute(select(s.commit.c.hash, s.commit.c.message)).all())
    commits = read_table(engine, "commits").set_index("hash")
    assert commits.loc[h.ids["latin1"], "subject"] == "latin: caf\u00e9 cr\u00e8me"
    assert commits.loc[h.ids["latin1"], "author_name"] == "Ren\u00e9 Latin"
    assert rows[h.ids["latin1"]] is True                 # re-encoded by git from ISO-8859-1
    assert rows[h.ids["rawbytes"]] is False              # undeclared Latin-1 bytes
    assert msgs[h.ids["rawbytes"]].startswith("raw: na\u00efve")
    assert commits.loc[h.ids["rawbytes"], "author_name"] == "Ra\u00efl Raw"
    assert msgs[h.ids["empty"]] == "" and commits.loc[h.ids["empty"], "subject"] == ""


def test_subsystems_default_to_first_folder(mined):
    h, engine, summary = mined
    cs = read_table(engine, "commit_subsystems")
    got = cs.groupby("hash")["subsystem"].apply(sorted).to_dict()
    assert got[h.ids["root"]] == ["(top-level)", "net", "src"]
    assert got[h.ids["bug"]] == ["src"]
    assert h.ids["merge"] not in got                       # merges carry no file rows
    assert (summary.mapping_kind, summary.mapping_source) == ("path-prefix", "depth=1")


def test_provenance(mined):
    h, engine, summary = mined
    runs = read_table(engine, "mining_runs")
    run = runs.iloc[-1]
    assert run.status == "complete" and run.head_hash == h.rev("HEAD") and run.base_hash is None
    assert run.n_commits == summary.commits
    assert set(json.loads(run.versions_json)) >= {"procmetrics", "git", "python",
                                                  "sqlalchemy", "pandas"}
    assert json.loads(run.options_json)["ref"] == "HEAD"
    repo = read_table(engine, "repositories").iloc[0]
    assert repo.tip_hash == h.rev("HEAD") and repo.repo == "sample"
