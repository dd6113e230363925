"""One real report, built once per session from a small generated history.

Built once per test session even under xdist (:mod:`tests.shared_builds`: the first
worker builds, the other reuses the folder), so tests must not change it. The demo
generator writes a 600-commit history; one more commit is added whose
subject and Fixes: line carry markup and script, so the report must show them
as text. The history is mined with the real miner and the report written
twice from the same store (PDF by Chromium when present, then by the
matplotlib fallback), both with the same ``--meta`` file, to check that the
JSON and CSV outputs are byte-identical and that both PDFs carry the document furniture.
"""
from __future__ import annotations

import os
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

from tests.shared_builds import shared_build

ROOT = Path(__file__).resolve().parents[2]
EVIL_SUBJECT = 'net: handle <script>alert("pm-xss")</script> & <b>bold</b> frames'
EVIL_FIXES = 'Fixes: 0123456789ab ("<img src=x onerror=alert(\'pm-img\')>")'
CLAIMS = """\
[[claim]]
id = "review-rose"
text = "Review rose <b>after</b> the policy."
kind = "review_coverage_rose"
date = "policy"

[[claim]]
id = "few-left"
kind = "residual_defects_below"
threshold = 3
"""
#: the report metadata of both reports (tests/report/test_pdf_document.py reads it back
#: from the two PDFs): the organisation carries markup that must be escaped
META = """\
document_id = "AUR-QA-0007"
revision = "C"
author = "Imke Vossberg"
reviewer = "Tarek Oduya"
approver = "Lenka Marrow"
organisation = "Aurora <Avionics> & \\"Sons\\""
"""


@dataclass(frozen=True)
class Built:
    repo: Path
    store: Path
    out: Path
    out2: Path
    claims: Path
    policy: str
    files: object          # make_report's ReportFiles of out (PDF by Chromium when present)
    files2: object         # ... of out2 (PDF by the matplotlib fallback)
    meta: Path             # the --meta file of both


def _git(repo: Path, home: Path, *args: str) -> str:
    env = {"PATH": os.environ.get("PATH", ""), "HOME": str(home), "GIT_CONFIG_NOSYSTEM": "1",
           "GIT_AUTHOR_NAME": "Mallory Markup", "GIT_AUTHOR_EMAIL": "mallory@example.invalid",
           "GIT_COMMITTER_NAME": "Mallory Markup",
           "GIT_COMMITTER_EMAIL": "mallory@example.invalid",
           "GIT_AUTHOR_DATE": "2025-07-01T12:00:00+0000",
           "GIT_COMMITTER_DATE": "2025-07-01T12:00:00+0000"}
    return subprocess.run(["git", "-C", str(repo), *args], env=env, check=True,
                          capture_output=True, text=True).stdout


def build_history(base: Path) -> tuple[Path, str]:
    repo = base / "aurora-fw"
    subprocess.run([sys.executable, str(ROOT / "sample_repos" / "generate.py"), "--out",
                    str(repo), "--commits", "600"], check=True, capture_output=True)
    policy = subprocess.run([sys.executable, str(ROOT / "sample_repos" / "generate.py"),
                             "--print-change-date"], check=True, capture_output=True,
                            text=True).stdout.strip()
    home = base / "home"
    home.mkdir()
    _git(repo, home, "commit", "--allow-empty", "-q", "-m", EVIL_SUBJECT, "-m", EVIL_FIXES)
    return repo, policy


@pytest.fixture(scope="session")
def built(tmp_path_factory) -> Built:
    """Built once per session across the xdist workers (tests.shared_builds); read-only."""
    def build(base: Path) -> dict:
        from procmetrics.mine import MineOptions, mine_repository
        from procmetrics.report.build import make_report
        from procmetrics.report.model import ReportOptions

        repo, policy = build_history(base)
        store = base / "pm.sqlite"
        mine_repository(repo, store=store, options=MineOptions(progress=False))
        claims = base / "claims.toml"
        claims.write_text(CLAIMS, encoding="utf-8")
        meta = base / "meta.toml"
        meta.write_text(META, encoding="utf-8")
        opts = ReportOptions(policy=policy, claims_path=str(claims), meta_path=str(meta))
        files = make_report(str(store), base / "out", opts)
        files2 = make_report(str(store), base / "out2", ReportOptions(
            policy=policy, claims_path=str(claims), meta_path=str(meta),
            pdf_engine="fallback"))
        return {"repo": repo, "store": store, "out": base / "out", "out2": base / "out2",
                "claims": claims, "policy": policy, "files": files, "files2": files2,
                "meta": meta}

    return Built(**shared_build(tmp_path_factory, "report-built", build))
