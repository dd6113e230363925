"""HTML links of a written report: hrefs per claim block and the order of top-level ids."""
from __future__ import annotations

from html.parser import HTMLParser


class Links(HTMLParser):
    """hrefs per claim block (div.claim id=claim-N), and the order of top-level ids."""

    def __init__(self) -> None:
        super().__init__()
        self.claim: str | None = None
        self.depth = 0
        self.by_claim: dict[str, list[str]] = {}
        self.ids: list[str] = []
        self.all_hrefs: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if a.get("id"):
            self.ids.append(a["id"])
        if tag == "div" and a.get("class") == "claim":
            self.claim, self.depth = a["id"], 0
        if tag == "div" and self.claim:
            self.depth += 1
        if tag == "a" and a.get("href"):
            self.all_hrefs.append(a["href"])
            if self.claim:
                self.by_claim.setdefault(self.claim, []).append(a["href"])

    def handle_endtag(self, tag):
        if tag == "div" and self.claim:
            self.depth -= 1
            if self.depth == 0:
                self.claim = None
