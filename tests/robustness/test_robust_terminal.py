"""Text from repositories and user files never drives the terminal: subsystem names,
the repository's folder name and claim text carrying an OSC window-title sequence and a
clear-screen sequence are printed with their control characters escaped."""
from __future__ import annotations

import pytest

from procmetrics.textsafe import printable
from tests.git_support import ALICE, BOB, GitHistory, when

OSC_TITLE = "\x1b]0;owned\x07"      # sets the terminal window's title (xterm OSC 0)
CLEAR = "\x1b[2J\x1b[H"            # clears the screen (ECMA-48 ED and CUP)


def test_printable_escapes_controls_and_keeps_text():
    assert printable("a\tb\nc") == "a\tb\nc"
    assert printable(OSC_TITLE) == "\\x1b]0;owned\\x07"
    assert printable("x\ry\x9b\u202ez") == "x\\x0dy\\x9b\\u202ez"
    assert printable("Zoë 日本") == "Zoë 日本"


@pytest.fixture
def hostile_store(tmp_path):
    h = GitHistory.create(tmp_path / f"fw{OSC_TITLE}{CLEAR}")
    maint = f"NET{CLEAR}STACK\nF:\tnet/\n\nDRV{OSC_TITLE}\nF:\tdrivers/\n"
    h.commit("add maintainers", files={"MAINTAINERS": maint}, date=when(0))
    for i in range(40):
        who = ALICE if i % 2 else BOB
        msg = f"net: change {i}\n\nReviewed-by: Carol{OSC_TITLE} <c@example.com>\n" if i % 3 \
            else f"drivers: change {i}\n"
        folder = "net" if i % 3 else "drivers"
        h.commit(msg, files={f"{folder}/f{i % 5}.c": f"{i}\n"}, author=who, date=when(10 * i))
    store = tmp_path / "s.sqlite"
    return h, store


def _assert_clean(ran):
    for stream in (ran.out, ran.err):
        assert "\x1b" not in stream and "\x07" not in stream, stream
    assert "\\x1b" in ran.out + ran.err


def test_names_and_claim_text_reach_the_terminal_escaped(hostile_store, tmp_path, cli):
    h, store = hostile_store
    ran = cli("mine", h.path, "--store", store, "--no-progress")
    assert ran.code == 0, ran.err
    _assert_clean(ran)                          # the repository's folder name
    ran = cli("series", "--store", store, "--all-subsystems", "--metric", "commits",
              "--no-trend")
    assert ran.code == 0, ran.err
    _assert_clean(ran)
    assert "NET\\x1b[2J\\x1b[HSTACK" in ran.out
    claims = tmp_path / "claims.toml"
    claims.write_text('format = 1\n[[claim]]\nid = "c1"\n'
                      'text = "Reviewed \\u001b]0;owned\\u0007 always \\u001b[2J"\n'
                      'kind = "at_least"\nmetric = "review_coverage"\nthreshold = 0.5\n')
    ran = cli("check", claims, "--store", store)
    assert ran.code not in (0, 70), ran.err
    _assert_clean(ran)
    assert "Reviewed \\x1b]0;owned\\x07 always" in ran.out
