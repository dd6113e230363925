"""The audit folder: determinism, schema, manifest, CSVs, HTML safety, PDF sections."""
from __future__ import annotations

import base64
import hashlib
import json
import re
from html.parser import HTMLParser

import jsonschema
import pytest
from pypdf import PdfReader

from procmetrics.analyse.result import CAVEAT_CODES
from procmetrics.report.jsonout import schema

from tests.report.conftest import EVIL_SUBJECT

SECTIONS = ["Scope and provenance", "Data quality", "Process series and change points",
            "Before and after the process change", "Defect lifetimes",
            "Reliability growth and its limits", "Claims and verdicts", "Limitations",
            "Use of this evidence"]


def test_json_and_csv_are_byte_identical_for_the_same_store(built):
    assert (built.out / "report.json").read_bytes() == (built.out2 / "report.json").read_bytes()
    a = sorted(p.name for p in (built.out / "tables").glob("*.csv"))
    assert a == sorted(p.name for p in (built.out2 / "tables").glob("*.csv")) and a
    for name in a:
        assert (built.out / "tables" / name).read_bytes() == \
            (built.out2 / "tables" / name).read_bytes(), name


def test_json_validates_against_the_shipped_schema(built):
    doc = json.loads((built.out / "report.json").read_text("utf-8"))
    jsonschema.validate(doc, schema())
    assert [s["title"] for s in doc["sections"]] == SECTIONS
    # every figure states n (or says why not), method and interval; every one has a CSV
    for f in doc["figures"]:
        assert f["method"] and f["interval"] and f["csv"]
        assert (built.out / f["csv"]).exists()
        assert re.search(r"\(n = [\d,]+;|n not applicable", f["caption"])
    assert {c["verdict"] for c in doc["claims"]} >= {"not_supportable"}
    assert all(f["code"] in CAVEAT_CODES for f in doc["flags"])
    # no run date and no local output path in the JSON
    text = (built.out / "report.json").read_text("utf-8")
    assert str(built.out) not in text


def test_manifest_records_provenance_and_checksums(built):
    man = json.loads((built.out / "manifest.json").read_text("utf-8"))
    assert man["repository"]["tip_hash"] and man["repository"]["path"] == str(built.repo)
    assert man["store"]["checksum_sha256"] == json.loads(
        (built.out / "report.json").read_text())["store_checksum"]
    assert man["versions"]["procmetrics"] and man["versions"]["numpy"]
    assert man["pdf"]["engine"] in ("chromium", "matplotlib")
    for name, digest in man["outputs"].items():
        assert hashlib.sha256((built.out / name).read_bytes()).hexdigest() == digest
    assert "report.html" in man["outputs"] and "procmetrics.sqlite" not in man["outputs"]
    assert man["claims_file"]["sha256"] == hashlib.sha256(built.claims.read_bytes()).hexdigest()


class _Tags(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


def test_html_is_self_contained_and_escapes_repository_text(built):
    html = (built.out / "report.html").read_text("utf-8")
    p = _Tags()
    p.feed(html)
    tags = [t for t, _ in p.tags]
    assert "script" not in tags, "no script element may reach the page"
    imgs = [a for t, a in p.tags if t == "img"]
    assert imgs
    for a in imgs:
        assert a["src"].startswith("data:image/png;base64,")
        assert base64.b64decode(a["src"].split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"
    for t, a in p.tags:
        for k in ("src", "href"):
            v = a.get(k) or ""
            assert not re.match(r"^(https?:)?//", v), (t, v)
    csp = [a["content"] for t, a in p.tags if t == "meta"
           and a.get("http-equiv") == "Content-Security-Policy"]
    assert csp and csp[0].startswith("default-src 'none'; img-src data:")
    assert "&lt;script&gt;alert(&#34;pm-xss&#34;)&lt;/script&gt;" in html
    assert "onerror=alert" not in html.replace("&lt;img src=x onerror=alert", "")
    assert "&lt;b&gt;after&lt;/b&gt;" in html  # claim text from the claims file


def test_pdf_has_the_sections(built):
    reader = PdfReader(str(built.files.pdf))
    text = "\n".join(page.extract_text() or "" for page in reader.pages)
    assert len(reader.pages) >= 5
    flat = re.sub(r"\s+", " ", text)
    for i, title in enumerate(SECTIONS, 1):
        assert f"{i}. {title}" in flat, title


def test_fallback_pdf_without_a_browser_has_the_same_sections(built):
    man = json.loads((built.out2 / "manifest.json").read_text("utf-8"))
    assert man["pdf"]["engine"] == "matplotlib"
    reader = PdfReader(str(built.out2 / "report.pdf"))
    flat = re.sub(r"\s+", " ", "\n".join(pg.extract_text() or "" for pg in reader.pages))
    for i, title in enumerate(SECTIONS, 1):
        assert f"{i}. {title}" in flat, title
    assert "Figure 1." in flat and "n = " in flat


def test_repository_text_never_becomes_a_path(built):
    names = [p.name for p in (built.out / "tables").iterdir()]
    assert all(re.fullmatch(r"(fig|tab)\d\d-[a-z0-9-]+\.csv", n) for n in names), names
    assert EVIL_SUBJECT not in "".join(names)
