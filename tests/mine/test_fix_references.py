"""Fix/revert reference parsing: worked forms seen in real histories, plus properties."""
from __future__ import annotations

import pytest
from hypothesis import given, settings, strategies as st

from procmetrics.mine.references import parse_fixes_value, scan_message
from procmetrics.mine.trailers import parse_trailers

H40 = "0123456789abcdef0123456789abcdef01234567"


@pytest.mark.parametrize("value,expected", [
    ('1234567890ab ("net: fix a leak")', [("1234567890ab", "net: fix a leak")]),
    ("commit 1234567890ab (\"x: y\")", [("1234567890ab", "x: y")]),
    ("Commit 1234567", [("1234567", None)]),
    ("1234567890ab net: subject without parentheses", [("1234567890ab",
                                                        "net: subject without parentheses")]),
    ('12345678 ("a"), 9abcdef0 ("b")', [("12345678", "a"), ("9abcdef0", "b")]),
    ('12345678 ("a") and 9abcdef0 ("b")', [("12345678", "a"), ("9abcdef0", "b")]),
    ("1234567, 89abcdef", [("1234567", None), ("89abcdef", None)]),
    ("1234567 89abcdef0", [("1234567", None), ("89abcdef0", None)]),
    (f"{H40.upper()}", [(H40, None)]),
    ('1234567890ab ("Revert "x: y"")', [("1234567890ab", 'Revert "x: y"')]),
    ('1234567890ab ("fix foo() in bar()")', [("1234567890ab", "fix foo() in bar()")]),
    ("1234567890ab (\"unclosed subject", [("1234567890ab", "unclosed subject")]),
    ("1234567890ab (subject in parens without quotes)",
     [("1234567890ab", "subject in parens without quotes")]),
    ("1234567890ab # v5.10+", [("1234567890ab", None)]),
    ("#123", None),
    ("https://example.org/commit/1234567890ab", None),
    ("123456 (six digits)", None),
    ("1234567g", None),
    ("", None),
    ("the bug in the parser", None),
])
def test_parse_fixes_value(value, expected):
    assert parse_fixes_value(value) == expected


def test_scan_whole_message_and_block_flag():
    msg = ("net: fix\n\nFixes: 1111111 (\"in the body\")\nmore body\n\n"
           "fixes : 2222222222 (\"wrapped\n  over two lines\")\nFixes: #77\n"
           "Cc: <Stable@vger.example.org>\nSigned-off-by: A <a@x.org>\n")
    refs = scan_message(msg, parse_trailers(msg))
    assert [(f.ref_hash, f.cited_subject, f.in_trailer_block) for f in refs.fixes] == [
        ("1111111", "in the body", False), ("2222222222", "wrapped over two lines", True)]
    assert refs.unparsed == [("fixes", "Fixes: #77")]
    assert refs.stable_request is True


@pytest.mark.parametrize("line,stable", [
    ("Cc: stable@vger.example.org # 5.4+", True), ("CC: <STABLE@kernel.example>", True),
    ("Cc: linux-stable@example.org", False), ("Cc: unstable@example.org", False),
    ("Stable: stable@example.org", False),
])
def test_stable_request(line, stable):
    msg = f"s\n\n{line}\n"
    assert scan_message(msg, parse_trailers(msg)).stable_request is stable


def test_reverts():
    msg = f"Revert \"x\"\n\nThis reverts commit {H40}.\nthis reverts commit 1234567.\n" \
          "This reverts commit \"some subject\".\n"
    refs = scan_message(msg, parse_trailers(msg))
    assert refs.reverts == [H40, "1234567"]
    assert refs.unparsed == [("revert", 'This reverts commit "some subject".')]


_HASHES = st.text(alphabet="0123456789abcdef", min_size=7, max_size=40)
_SUBJECTS = st.one_of(st.none(), st.text(
    alphabet=st.characters(blacklist_characters='"\n\r()', blacklist_categories=("Cs", "Cc")),
    min_size=1, max_size=30).map(str.strip).filter(bool))


@settings(max_examples=200, derandomize=True, deadline=None)
@given(refs=st.lists(st.tuples(_HASHES, _SUBJECTS), min_size=1, max_size=4),
       sep=st.sampled_from([", ", " and ", " ", "; "]),
       key=st.sampled_from(["Fixes", "fixes", "FIXES", "Fixes "]),
       prefix=st.sampled_from(["", "commit "]))
def test_fixes_round_trip(refs, sep, key, prefix):
    """Formatting references the canonical way and parsing them gives them back."""
    value = sep.join(f"{prefix}{h}" + (f' ("{s}")' if s is not None else "") for h, s in refs)
    msg = f"subject\n\nbody\n\n{key}: {value}\n"
    found = scan_message(msg, parse_trailers(msg))
    assert [(f.ref_hash, f.cited_subject) for f in found.fixes] == refs
    assert found.unparsed == []


@settings(max_examples=200, derandomize=True, deadline=None)
@given(text=st.text(max_size=200))
def test_scan_never_fails_and_hashes_are_hex(text):
    refs = scan_message(text, parse_trailers(text))
    for f in refs.fixes:
        assert 7 <= len(f.ref_hash) <= 64 and set(f.ref_hash) <= set("0123456789abcdef")
        assert f.raw_text.lower().lstrip().startswith("fixes")
    for h in refs.reverts:
        assert set(h) <= set("0123456789abcdef")
