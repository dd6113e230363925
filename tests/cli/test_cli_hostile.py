"""Hostile and unlucky inputs to report/export/check through the real entry point
(procmetrics.cli.main) on one small mined history."""
from __future__ import annotations

import json
import warnings

import pytest

from procmetrics.cli import main
from tests.report.conftest import build_history


@pytest.fixture(scope="module")
def mined(tmp_path_factory):
    base = tmp_path_factory.mktemp("cli-hostile")
    repo, policy = build_history(base)
    store = base / "pm.sqlite"
    assert main(["mine", str(repo), "--store", str(store), "--no-progress"]) == 0
    return base, repo, store, policy


def test_manifest_store_url_hides_query_credentials(mined, tmp_path, capsys):
    _, _, store, policy = mined
    out = tmp_path / "rep"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")      # SQLAlchemy: pysqlite ignores the parameter
        code = main(["report", "--store", f"sqlite:///{store}?token=t0ken-m&password=pw-m",
                     "--out", str(out), "--pdf-engine", "none", "--policy-date", policy])
    assert code == 0, capsys.readouterr().err
    man = json.loads((out / "manifest.json").read_text())
    assert man["store"]["url"] == f"sqlite:///{store}?token=***&password=***"
    text = (out / "manifest.json").read_text() + capsys.readouterr().err
    assert "t0ken-m" not in text and "pw-m" not in text
