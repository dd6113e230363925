"""Backport-line parser: each style and its common spellings, and property tests."""
from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from procmetrics.mine.backports import backport_lines

H = "6b7a21140fca461c6d8d5c65a3746e7da50a409e"


def test_each_style_and_variants():
    # spellings as written by `git cherry-pick -x` (git documentation) and as found in the
    # libbpf mirror ("[ upstream commit <40 hex> ]", "Upstream commit <12 hex> (...)")
    assert backport_lines(f"x\n\n(cherry picked from commit {H})\n") == [("cherry-picked", H)]
    assert backport_lines(f"x\n\ncommit {H} upstream.\n") == [("commit-upstream", H)]
    assert backport_lines(f"x\n\n[ upstream commit {H} ]\n") == [("upstream-commit", H)]
    assert backport_lines(f"x\n\nUpstream commit {H[:12]} (\"libbpf: y\")\n") == \
        [("upstream-commit", H[:12])]
    assert backport_lines(f"x\n\nBackported from commit {H[:10]}\n") == \
        [("backported-from", H[:10])]
    assert backport_lines(f"x\n\n(cherry picked from commit {H.upper()})") == \
        [("cherry-picked", H)]


def test_not_backport_lines():
    assert backport_lines(f"x\n\nThis reverts commit {H}.\n") == []
    assert backport_lines(f"x\n\nFixes: {H[:12]} (\"y\")\n") == []
    assert backport_lines("see the upstream commit for details\n") == []
    assert backport_lines(f"commit {H[:6]} upstream.\n") == []          # too short a prefix
    assert backport_lines(f"in commit {H} upstream we did\n") == []    # not at line start


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.text(max_size=400))
def test_any_text_parses_and_hashes_are_hex(text):
    for style, cited in backport_lines(text):
        assert 7 <= len(cited) <= 40 and all(c in "0123456789abcdef" for c in cited)


@settings(max_examples=100, deadline=None, derandomize=True)
@given(st.text(alphabet="abc \n", max_size=200), st.sampled_from(
    ["(cherry picked from commit {})", "commit {} upstream.", "[ Upstream commit {} ]"]))
def test_a_line_anywhere_in_a_message_is_found(noise, template):
    msg = noise + "\n" + template.format(H) + "\n" + noise
    assert H in [c for _, c in backport_lines(msg)]
