"""Trailer parsing checked against git itself (``git interpret-trailers --parse``).

``--no-divider`` is what git uses for commit messages (``%(trailers)``): a line
starting with ``---`` is not a patch separator there.
"""
from __future__ import annotations

import subprocess

import pytest
from hypothesis import given, settings, strategies as st

from procmetrics.mine.trailers import normalise_key, parse_trailers, split_person
from tests.git_support import isolated_env


def git_trailers(message: str, cwd) -> list[tuple[str, str]]:
    """(key, value) pairs as git prints them (its output is ``key: value`` per line)."""
    out = subprocess.run(["git", "interpret-trailers", "--parse", "--no-divider"],
                         input=message.encode("utf-8"), capture_output=True, check=True,
                         cwd=cwd, env=isolated_env(cwd)).stdout.decode("utf-8")
    pairs = []
    for line in out.splitlines():
        key, _, value = line.partition(":")
        pairs.append((key, value[1:] if value.startswith(" ") else value))
    return pairs


def ours(message: str) -> list[tuple[str, str]]:
    return [(t.raw_key, t.value) for t in parse_trailers(message).trailers]


VARIANTS = [
    "subject only",
    "subject\n\nSigned-off-by: A <a@x.org>\n",
    "subject\n\nbody\n\nSigned-off-by: A <a@x.org>\nReviewed-by: B <b@x.org>",
    "subject\nSigned-off-by: A <a@x.org>\n",                       # title is never trailers
    "subject\n\nsigned-off-by :   A <a@x.org>  \nACKED-BY: C\n",        # odd case and spacing
    "subject\n\nKey\t: tab before colon\nOther-Key: x\n",
    "subject\n\nFixes: 1234567890ab (\"a very long\n  subject wrapped\")\nSigned-off-by: A\n",
    "subject\n\nFixes: abc\n\tcontinued with a tab\n\n",
    # a non-trailer line: all-trailers rule fails, no git-generated prefix
    "subject\n\nbody line\nFixes: 123\nReviewed-by: B\n",
    # 25 % rule with a git-generated prefix (exact "Signed-off-by: ")
    "subject\n\nsome prose here\nmore prose\nand more\nSigned-off-by: A <a@x.org>\n",
    "subject\n\np1\np2\np3\np4\np5\np6\np7\nSigned-off-by: A <a@x.org>\n",   # < 25 %
    "subject\n\nprose\n(cherry picked from commit 0123456789abcdef)\nAcked-by: Z\n",
    # trailer-like lines in the body, not in the final block
    "subject\n\nFixes: 1111111 (\"in body\")\nReviewed-by: nobody\n\nthe end.\n",
    "subject\n\nbody\n\nSigned-off-by: A\n# a comment line\n\n# trailing comment\n",
    "subject\n\nbody\n\nSigned-off-by: A\n\nConflicts:\n\tfile.c\n",
    "subject\n\n  indented: not a trailer\nKey: v\n",
    "subject\n\nno-colon line\n",
    "subject\n\nURL: https://x.example/a:b\nkey-with-dash-9: v\n",
    "subject\n\nBad key: v\nGood: w\n",
    "subject\n\n: empty key\nK: v\n",
    "subject\n\nCc: stable@vger.example.org # 5.4+\nCc: <stable@vger.example.org>\n",
    "subject\n\nKey: v\n   \n",                                          # blank with spaces
    "subject\n\n---\nKey: v\n",
    "subject\n\nKéy: non-ascii key\nKey: ascii\n",
    "subject\n\nKey: v\r\nOther: w\r\n",
    "# comment title\nsubject\n\nKey: v\n",
    "",
    "\n\nKey: v\n",
]


@pytest.mark.parametrize("message", VARIANTS)
def test_trailers_match_git(message, tmp_path):
    assert ours(message) == git_trailers(message, tmp_path)


_KEYS = st.sampled_from(["Signed-off-by", "signed-off-by", "Reviewed-by", "Fixes", "Cc",
                         "X-Thing", "Key", "Bad key", "a", "9-x", "Link"])
_VALUES = st.text(alphabet="abc <>@.:()\"#-", max_size=12)
_LINE = st.one_of(
    st.builds(lambda k, sp, v: f"{k}{sp}:{v}", _KEYS, st.sampled_from(["", " ", "\t"]), _VALUES),
    st.builds(lambda v: "Signed-off-by: " + v, _VALUES),
    st.builds(lambda ws, v: ws + v, st.sampled_from([" ", "\t", "  "]), _VALUES),   # continuation
    st.sampled_from(["", "   ", "# comment", "prose line", "(cherry picked from commit 1234567)",
                     "Conflicts:", "\tpath.c", "---"]),
    st.text(alphabet="ab :\t#-", max_size=8),
)


@settings(max_examples=150, deadline=None, derandomize=True)
@given(title=st.text(alphabet="ab: #", max_size=6), lines=st.lists(_LINE, max_size=9),
       end=st.sampled_from(["", "\n", "\n\n"]))
def test_trailers_match_git_property(title, lines, end, tmp_path_factory):
    message = title + "\n" + "\n".join(lines) + end
    assert ours(message) == git_trailers(message, tmp_path_factory.getbasetemp())


def test_block_span_and_normalised_keys():
    msg = "s\n\nbody\n\nreviewed-BY: C <c@x.org>\nX-CUSTOM-thing: 1\n"
    block = parse_trailers(msg)
    assert msg[block.start:].startswith("reviewed-BY")
    assert [t.key for t in block.trailers] == ["Reviewed-by", "X-custom-thing"]
    assert [t.raw_key for t in block.trailers] == ["reviewed-BY", "X-CUSTOM-thing"]


@pytest.mark.parametrize("raw,expected", [
    ("SIGNED-OFF-BY", "Signed-off-by"), ("co-developed-by", "Co-developed-by"),
    ("reported-and-tested-by", "Reported-and-tested-by"), ("cc", "Cc"), ("FIXES", "Fixes"),
    ("x-Weird-KEY", "X-weird-key"), ("link", "Link"), ("closes", "Closes"),
])
def test_normalise_key(raw, expected):
    assert normalise_key(raw) == expected


@pytest.mark.parametrize("value,expected", [
    ("Jo Doe <jo@x.org>", ("Jo Doe", "jo@x.org")),
    ("\"Doe, Jo\" <jo@x.org> # v5.10+", ("Doe, Jo", "jo@x.org")),
    ("<stable@vger.example.org>", ("", "stable@vger.example.org")),
    ("stable@vger.example.org # 5.4+", ("", "stable@vger.example.org")),
    ("Jo Doe", None),
    ("https://example.org/x", None),
])
def test_split_person(value, expected):
    assert split_person(value) == expected
