"""The PDF is a document: "page n of N", a running header and footer on every page, and
the control block from --meta; the same furniture from Chromium and from the fallback.
Read back with pypdf (an independent PDF reader)."""
from __future__ import annotations

import re

import pytest

pypdf = pytest.importorskip("pypdf")

from procmetrics.report.pdf import find_chromium  # noqa: E402


def _squash(text: str) -> str:
    return re.sub(r"\s+", " ", text)


@pytest.fixture(scope="module", params=["chromium", "fallback"])
def pdf_text(request, built):
    """The two PDFs of the shared report (tests/report/conftest.py): both were written
    with its META file (document AUR-QA-0007 rev. C; markup in the organisation)."""
    if request.param == "chromium" and find_chromium() is None:
        pytest.skip("no chromium on this machine")
    files = built.files if request.param == "chromium" else built.files2
    assert files.pdf_engine == ("chromium" if request.param == "chromium" else "matplotlib")
    reader = pypdf.PdfReader(str(files.pdf))
    return [_squash(p.extract_text()) for p in reader.pages]


def test_every_page_has_its_number_and_the_running_header(pdf_text, built):
    pages = pdf_text
    n = len(pages)
    assert n >= 3
    head = None
    for i, text in enumerate(pages, 1):
        assert f"page {i} of {n}" in text, (i, text[:200])
        assert "Development-process evidence for" in text, i
        assert "AUR-QA-0007 rev. C" in text, i                    # document identity
        assert 'Aurora <Avionics> & "Sons"' in text, i            # escaped into the footer
        m = re.search(r"aurora-fw at ([0-9a-f]{12})", text)
        assert m, i
        head = head or m.group(1)
        assert m.group(1) == head


def test_page_one_has_the_control_block_scope_caution_and_verdicts(pdf_text):
    first = pdf_text[0]
    for word in ("Lenka Marrow", "Tarek Oduya", "Imke Vossberg", "Aurora <Avionics> & \"Sons\"",
                 "Store checksum", "never replace", "review-rose", "few-left"):
        assert word in first, word
    assert "not supportable" in first


def test_running_header_text_cannot_break_out_of_its_css_string():
    from procmetrics.report.summary import _css_string

    evil = 'x"; } body { display: none } @page { @top-left { content: "y'
    out = _css_string(evil)
    assert out.startswith('"') and out.endswith('"')
    inner = out[1:-1]
    assert '"' not in inner and "{" not in inner and "}" not in inner and "<" not in inner
    assert inner.startswith("x\\000022 ")        # the quote as a hex escape
