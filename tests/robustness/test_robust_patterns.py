"""Repository-supplied path patterns (MAINTAINERS ``N:`` regexes and ``F:`` globs) run in
bounded time: a pattern that makes a backtracking engine run for ever is matched in
linear time, and a pattern the linear engine cannot run is refused naming its entry."""
from __future__ import annotations

import subprocess
import sys
import textwrap

import pytest

from procmetrics.errors import ConfigError
from procmetrics.mine.pathregex import MAX_PATTERN_CHARS
from procmetrics.mine.subsystems import maintainers_mapper
from tests.git_support import ALICE, when
from tests.robustness.robust_support import ROOT, subprocess_env

# Python's re needs about 2**n steps for (a+)+$ on n a's and a '!' (measured: 25 a's
# take 1.7 s, doubling per character): 40 a's never finish. Likewise a*a*…b (9 stars)
# on 60 a's backtracks polynomially, about 60**9 steps.
_HOSTILE = textwrap.dedent("""\
    CATASTROPHIC
    N:\t(a+)+$

    STARS
    F:\tx/a*a*a*a*a*a*a*a*a*b
    """)
_PATHS = ["d/" + "a" * 40 + "!", "x/" + "a" * 60, "d/ok.c"]


def test_hostile_patterns_finish_in_bounded_time():
    """The mapping runs in a child process given 10 s (it takes milliseconds; the
    backtracking engine would not finish in years): a timeout fails the test."""
    code = (f"from procmetrics.mine.subsystems import maintainers_mapper\n"
            f"m = maintainers_mapper({_HOSTILE!r}, 'MAINTAINERS')\n"
            f"print(m.map_many({_PATHS!r}))\n")
    try:
        proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                              timeout=10, cwd=ROOT, env=subprocess_env(PYTHONPATH=str(ROOT)))
    except subprocess.TimeoutExpired:
        pytest.fail("mapping paths with a hostile MAINTAINERS pattern did not finish in 10 s")
    assert proc.returncode == 0, proc.stderr
    # (a+)+$ does not match "aaa…!"; it does match the end of "x/aaa…" (ends in a's)
    assert proc.stdout.strip() == str([["(unmapped)"], ["CATASTROPHIC"], ["(unmapped)"]])


def test_results_equal_pythons_re_on_benign_patterns():
    """Oracle: on patterns both engines support and that finish, the leftmost match end
    (the specificity) equals Python's re.search."""
    import re
    pats = [r"tegra", r"c\.c$|^net", r"^drivers/(gpu|net)/", r"[0-9]+\.h\Z", r"(?i)README"]
    paths = ["drivers/gpu/tegra/dc.c", "net/core/sock.c", "include/x86.h", "readme",
             "lib/a.c", "drivers/net/e1000.c"]
    for pat in pats:
        m = maintainers_mapper(f"ONLY\nN:\t{pat}\n", "M")
        for path in paths:
            want = re.search(pat, path)
            got = m.map(path)
            assert got == (["ONLY"] if want else ["(unmapped)"]), (pat, path)


@pytest.mark.parametrize("pattern, why", [
    (r"(a)\1", "backreferences"), (r"foo(?=bar)", "look-around"),
    ("a" * (MAX_PATTERN_CHARS + 1), "characters long"),
])
def test_unsupported_pattern_is_refused_naming_entry_and_line(pattern, why):
    text = f"FIRST\nF:\tsrc/\n\nBAD ENTRY\nF:\tlib/\nN:\t{pattern}\n"
    with pytest.raises(ConfigError) as err:
        maintainers_mapper(text, "MAINTAINERS@abc123")
    msg = str(err.value)
    assert "MAINTAINERS@abc123:6" in msg and "'BAD ENTRY'" in msg and why in msg
    assert "--no-maintainers" in msg
    assert err.value.exit_code == 2


@pytest.mark.timeout(120)
def test_mining_a_repository_with_a_hostile_maintainers_file(git_history, tmp_path, cli):
    """Through the real entry point: the run completes and maps the paths."""
    h = git_history()
    h.commit("add", files={"MAINTAINERS": _HOSTILE, _PATHS[0]: "x\n", _PATHS[1]: "y\n"},
             author=ALICE, date=when(0))
    ran = cli("mine", h.path, "--store", tmp_path / "s.sqlite", "--no-progress")
    assert ran.code == 0, ran.err


@pytest.mark.parametrize("pattern, fast", [
    ("tegra", True), ("[^a-z]tegra", True), ("(?:[^a-z]|^)bcm283", True),
    (r"\bsun[0-9]i", True), ("[*+?]x", True), (r"\*", True), ("(?i)readme", True),
    ("(a+)+$", False), ("a*", False), ("ab?", False), ("x{2,}", False),
])
def test_only_patterns_without_repetition_run_on_the_backtracking_engine(pattern, fast):
    """Patterns that repeat nothing are bounded for any engine and run on Python's re
    (about four times faster through its binding: 58k paths x 316 N: patterns took
    2.3 s against 8.8 s all-RE2 on the bench's synthetic MAINTAINERS); everything that
    repeats runs on RE2."""
    import re

    from procmetrics.mine.pathregex import LinearRegex, without_repetition
    assert without_repetition(pattern) is fast
    rx = LinearRegex(pattern)
    assert isinstance(rx.regex, re.Pattern) is fast
