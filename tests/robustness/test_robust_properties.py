"""Property and fuzz tests for the parsers, the resolver, the path mapping and the store.

tests/mine already checks trailers against ``git interpret-trailers`` and the
``Fixes:`` round trip; these add what they do not cover: totality on arbitrary or
mutated input (only our own exception type may escape), chunking invariance of the
log stream, brute-force oracles for prefix resolution, specificity and exclusion
laws of the subsystem mapping, and store round trips of arbitrary text.
"""
from __future__ import annotations

import random

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from procmetrics.errors import GitFailed
from procmetrics.mine.git import GitRepo
from procmetrics.mine.logstream import log_args, parse_log
from procmetrics.mine.resolve import AMBIGUOUS, RESOLVED, SELF, UNRESOLVED, classify, \
    prefix_matches
from procmetrics.mine.subsystems import UNMAPPED, maintainers_mapper, rules_mapper
from procmetrics.mine.trailers import find_separator, normalise_key, parse_trailers
from procmetrics.store import open_store
from procmetrics.store.tables import read_table
from procmetrics.store.writer import CommitRow, FileRow, StoreWriter, TrailerRow

FAST = settings(max_examples=150, derandomize=True, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])

# -- trailers ------------------------------------------------------------------------
_MSG_TEXT = st.lists(st.sampled_from(list("ab:-# \t\n") + ["Signed-off-by: ", "Fixes: ",
                                                               "\u00e9", "\n\n"]),
                     max_size=60).map("".join)


@FAST
@given(msg=st.one_of(st.text(max_size=300), _MSG_TEXT))
def test_trailer_parser_is_total_and_consistent(msg):
    block = parse_trailers(msg)
    assert 0 <= block.start <= block.end <= len(msg)
    for t in block.trailers:
        assert t.raw_key and t.raw_key == t.raw_key.strip(" \t\n\r")
        assert normalise_key(t.key) == t.key == normalise_key(t.raw_key)
        assert "\n" not in t.value
    # trailing blank lines and comment lines never change the block's trailers
    assert parse_trailers(msg + "\n\n# comment\n").trailers == block.trailers


def _separator_spec(line: str) -> int:
    """git's find_separator written out plainly (trailer.c): token chars, then blanks
    (not at the start), then ':'."""
    i, n = 0, len(line)
    while i < n and (line[i] == "-" or (line[i].isascii() and line[i].isalnum())):
        i += 1
    if i > 0:
        while i < n and line[i] in " \t":
            i += 1
    return i if i < n and line[i] == ":" else -1


@settings(max_examples=400, derandomize=True, deadline=None)
@given(line=st.text(alphabet=st.sampled_from(list("aZ9-: \t#\u00e9x")), max_size=30))
def test_find_separator_matches_its_specification(line):
    assert find_separator(line) == _separator_spec(line)


# -- resolver ------------------------------------------------------------------------
_HEX = st.text(alphabet="0123456789abcdef", min_size=40, max_size=40)


@FAST
@given(hashes=st.lists(_HEX, max_size=40, unique=True), data=st.data())
def test_prefix_matches_equals_brute_force(hashes, data):
    hashes = sorted(hashes)
    if hashes and data.draw(st.booleans()):
        prefix = data.draw(st.sampled_from(hashes))[:data.draw(st.integers(1, 40))]
    else:
        prefix = data.draw(st.text(alphabet="0123456789abcdef", min_size=1, max_size=8))
    brute = [h for h in hashes if h.startswith(prefix)]
    assert prefix_matches(hashes, prefix, limit=2) == brute[:2]
    assert prefix_matches(hashes, prefix, limit=len(hashes) + 1) == brute


@FAST
@given(matches=st.lists(_HEX, max_size=4), citing=_HEX, cite_self=st.booleans())
def test_classify_laws(matches, citing, cite_self):
    if cite_self:
        matches = matches + [citing]
    status, target = classify(matches, citing)
    distinct = set(matches)
    if not distinct:
        assert (status, target) == (UNRESOLVED, None)
    elif len(distinct) > 1:
        assert (status, target) == (AMBIGUOUS, None)
    else:
        assert target in distinct
        assert status == (SELF if target == citing else RESOLVED)
    assert classify(list(reversed(matches)) * 2, citing) == (status, target)


# -- subsystem mapping ---------------------------------------------------------------
_PART = st.text(alphabet="abcxyz019_-.", min_size=1, max_size=5).filter(
    lambda s: s not in (".", ".."))


@FAST
@given(base=st.lists(_PART, min_size=1, max_size=3), extra=st.lists(_PART, min_size=1,
                                                                      max_size=3),
       tail=st.lists(_PART, min_size=1, max_size=3), inside=st.booleans())
def test_more_specific_rule_always_wins(tmp_path_factory, base, extra, tail, inside):
    outer = "/".join(base) + "/"
    inner = outer + "/".join(extra) + "/"
    f = tmp_path_factory.mktemp("rules") / "rules.toml"
    # the order of the rules in the file must not matter
    f.write_text(f'[subsystems]\ninner = ["{inner}"]\nouter = ["{outer}"]\n'
                 if inside else f'[subsystems]\nouter = ["{outer}"]\ninner = ["{inner}"]\n')
    m = rules_mapper(f)
    assert m.map(inner + "/".join(tail)) == ["inner"]
    sibling = outer + "zz" + "/".join(extra) + "/" + "/".join(tail)
    assert m.map(sibling) == ["outer"]
    assert m.map("other-top/" + "/".join(tail)) == [UNMAPPED]


@FAST
@given(base=st.lists(_PART, min_size=1, max_size=3), excl=st.lists(_PART, min_size=1,
                                                                     max_size=2),
       tail=st.lists(_PART, min_size=1, max_size=3))
def test_exclusions_always_exclude(base, excl, tail):
    top = "/".join(base) + "/"
    text = (f"BROAD\nF:\t{top}\nX:\t{top}{'/'.join(excl)}/\n\n"
            f"EVERYTHING\nF:\t*\nF:\t*/\n")
    m = maintainers_mapper(text, "M")
    excluded = top + "/".join(excl) + "/" + "/".join(tail)
    assert "BROAD" not in m.map(excluded)
    assert m.map(top + "q" + "/".join(excl) + "/" + "/".join(tail)) == ["BROAD"]


# -- store round trip ----------------------------------------------------------------
_TEXT = st.text(alphabet=st.characters(blacklist_categories=("Cs",), blacklist_characters="\0"),
                max_size=40)
_NAME = st.tuples(_TEXT, _TEXT)


@settings(max_examples=40, derandomize=True, deadline=None)
@given(rows=st.lists(st.tuples(_HEX, _NAME, st.integers(0, 2**40), st.integers(-720, 840),
                               _TEXT, st.lists(st.tuples(_TEXT.filter(bool),
                                                         st.integers(0, 10**6)), max_size=3),
                               st.lists(st.tuples(_TEXT.filter(bool), _TEXT), max_size=3)),
                     min_size=1, max_size=5, unique_by=lambda r: r[0]))
def test_store_round_trip_of_arbitrary_text(rows):
    engine = open_store("sqlite://")
    w = StoreWriter(engine)
    rid = w.ensure_repository("r", "/nowhere")
    run = w.start_run(rid, ref="HEAD", head_hash=rows[0][0], base_hash=None, is_shallow=False,
                      options_json="{}", versions_json="{}")
    batch = []
    for h, who, t, off, msg, files, trailers in rows:
        subject = msg.split("\n", 1)[0]
        batch.append(CommitRow(
            h, (), who, who, t, off, t, off, subject, msg, False, True,
            [FileRow(p, None, "A", n, 0, False) for p, n in dict(files).items()],
            [TrailerRow(k, k, v, None) for k, v in trailers], [], [], []))
    w.write_batch(rid, run, batch)
    w.complete_run(run, rid, tip_hash=rows[0][0], tip_ref="HEAD", path="/nowhere",
                   remote_url=None, is_shallow=False, mapping_kind="path-prefix",
                   mapping_source="1", counts={}, message=None)   # tidy tables: complete runs
    commits = read_table(engine, "commits").set_index("hash")
    fc = read_table(engine, "file_changes")
    tr = read_table(engine, "trailers")
    for h, who, t, off, msg, files, trailers in rows:
        c = commits.loc[h]
        assert (c["author_name"], c["author_email"]) == who
        assert c["author_offset_min"] == off and c["subject"] == msg.split("\n", 1)[0]
        got = fc[fc["hash"] == h]
        assert dict(zip(got["path"], got["lines_added"])) == dict(files)
        got = tr[tr["hash"] == h].sort_values("position")
        assert list(zip(got["key"], got["value"])) == list(trailers)
    engine.dispose()


# -- log-stream fuzzing --------------------------------------------------------------
@pytest.fixture(scope="module")
def real_log(sample_history) -> list[bytes]:
    """``git log`` output of the sample history (renames, merges, binary, Latin-1),
    with and without line counts, exactly as the miner reads it."""
    git = GitRepo.open(sample_history.path)
    tip = git.resolve_commit("HEAD")
    return [b"".join(git.stream(log_args(tip, None, line_counts=lc, merge_files=mf,
                                         since=None, until=None)))
            for lc, mf in ((True, "none"), (False, "none"), (True, "first-parent"))]


def _parse_all(data: bytes, cut: list[int] | None = None):
    if cut is None:
        return list(parse_log([data]))
    edges = [0, *sorted(cut), len(data)]
    return list(parse_log(data[a:b] for a, b in zip(edges, edges[1:])))


def test_chunk_boundaries_never_change_the_parse(real_log):
    rng = random.Random(6)
    for data in real_log:
        whole = _parse_all(data)
        assert len(whole) > 10
        for _ in range(60):
            cut = [rng.randrange(len(data) + 1) for _ in range(rng.randrange(1, 30))]
            assert _parse_all(data, cut) == whole


def _mutate(rng: random.Random, data: bytes) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randrange(1, 6)):
        op = rng.randrange(6)
        i = rng.randrange(len(b) + 1)
        if op == 0 and b:                       # flip a byte
            b[min(i, len(b) - 1)] = rng.randrange(256)
        elif op == 1:                           # insert separators or markers
            b[i:i] = rng.choice([b"\0", b"\x01", b"\0\x01", b"\t", b"\n:", b"-\t-\t"])
        elif op == 2:                           # delete a run
            del b[i:i + rng.randrange(1, 80)]
        elif op == 3:                           # truncate
            del b[i:]
        elif op == 4 and b:                     # duplicate a run
            j = rng.randrange(len(b))
            b[i:i] = b[j:j + rng.randrange(1, 200)]
        else:                                   # random garbage
            b[i:i] = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 20)))
    return bytes(b)


@pytest.mark.timeout(120)
@pytest.mark.filterwarnings("ignore::procmetrics.errors.DataQualityWarning")
def test_mutated_log_output_fails_only_with_our_error(real_log):
    """2,000 seeded mutations of real output: either a parse or GitFailed, nothing else."""
    rng = random.Random(20261201)
    outcomes = {"parsed": 0, "GitFailed": 0}
    for n in range(2000):
        data = _mutate(rng, real_log[n % len(real_log)])
        try:
            commits = _parse_all(data)
        except GitFailed as exc:
            assert str(exc)
            outcomes["GitFailed"] += 1
            continue
        for c in commits:
            assert len(c.hash) in (40, 64) and all(len(p) in (40, 64) for p in c.parents)
        outcomes["parsed"] += 1
    assert outcomes["parsed"] > 100 and outcomes["GitFailed"] > 100, outcomes


@settings(max_examples=300, derandomize=True, deadline=None)
@given(data=st.binary(max_size=400))
def test_random_bytes_fail_only_with_our_error(data):
    try:
        _parse_all(data)
    except GitFailed:
        pass
