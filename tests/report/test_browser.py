"""The HTML report rendered by headless Chromium: no script runs, nothing is refused,
repository markup shows as text, and a screenshot is taken."""
from __future__ import annotations

import io
import re
import shutil
import subprocess

import pytest

pytestmark = pytest.mark.browser

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run",
         "--enable-logging=stderr", "--v=0"]


def chromium(tmp_path, *args: str) -> subprocess.CompletedProcess:
    if CHROMIUM is None:
        pytest.skip("Debian's chromium is not installed (make setup-test installs it)")
    profile = tmp_path / "profile"
    return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args],
                          capture_output=True, text=True, timeout=180,
                          stdin=subprocess.DEVNULL)


@pytest.fixture(scope="module")
def dom(built, tmp_path_factory):
    tmp = tmp_path_factory.mktemp("chromium")
    proc = chromium(tmp, "--dump-dom", (built.out / "report.html").as_uri())
    assert proc.returncode == 0, proc.stderr[-2000:]
    return proc


def test_no_script_element_and_markup_shown_as_text(dom):
    html = dom.stdout
    assert "<h1>Development-process evidence for aurora-fw</h1>" in html
    assert not re.search(r"<script\b", html, re.I)
    assert "&lt;script&gt;alert(\"pm-xss\")&lt;/script&gt;" in html
    assert not re.search(r"<img[^>]*onerror", html, re.I)
    assert "<b>bold</b>" not in html and "&lt;b&gt;bold&lt;/b&gt;" in html


def test_nothing_refused_and_no_console_error(dom):
    log = dom.stderr
    assert "Content Security Policy" not in log, log[-2000:]
    assert "Refused to" not in log
    assert not re.search(r"CONSOLE.*(error|Uncaught)", log, re.I), log[-2000:]
    assert "pm-xss" not in log and "pm-img" not in log


def test_screenshot_shows_a_rendered_page(built, tmp_path):
    from PIL import Image

    shot = tmp_path / "page.png"
    proc = chromium(tmp_path, "--hide-scrollbars", "--window-size=900,3000",
                    f"--screenshot={shot}", (built.out / "report.html").as_uri())
    assert proc.returncode == 0 and shot.exists(), proc.stderr[-2000:]
    im = Image.open(io.BytesIO(shot.read_bytes())).convert("L")
    assert im.size == (900, 3000)
    lo, hi = im.getextrema()
    assert hi - lo > 100          # text and figures, not a blank page
    # a good share of the page is drawn on (not just the background colour)
    hist = im.histogram()
    assert sum(hist[:200]) > 0.01 * im.size[0] * im.size[1]
