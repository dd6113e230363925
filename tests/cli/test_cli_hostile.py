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
    err = capsys.readouterr().err
    text = (out / "manifest.json").read_text() + err
    assert "t0ken-m" not in text and "pw-m" not in text
    # library numerical warnings are recorded in the manifest, not printed
    assert "Warning:" not in err and "warnings.warn" not in err
    assert isinstance(man["library_warnings"], list)
    assert all(set(w) == {"category", "message", "count"} for w in man["library_warnings"])


def _report(store, out, policy, *extra):
    return main(["report", "--store", str(store), "--out", str(out), "--pdf-engine", "none",
                 "--policy-date", policy, *map(str, extra)])


def test_report_out_refuses_foreign_folders_and_never_follows_links(mined, tmp_path, capsys):
    _, _, store, policy = mined
    # a non-empty folder that is not a report: refused, untouched
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("mine\n")
    assert _report(store, other, policy) == 2
    assert "is not empty and is not a procmetrics report folder" in capsys.readouterr().err
    assert sorted(p.name for p in other.iterdir()) == ["notes.txt"]
    # a file, a device, '' : refused with exit 2
    for bad in (tmp_path / "a-file", "/dev/null", ""):
        if bad != "" and bad != "/dev/null":
            bad.write_text("x")
        assert _report(store, bad, policy) == 2, bad
    # an earlier report with a planted link to an outside file and a stale file
    out = tmp_path / "rep"
    assert _report(store, out, policy) == 0
    outside = tmp_path / "outside.txt"
    outside.write_text("precious\n")
    (out / "report.json").unlink()
    (out / "report.json").symlink_to(outside)
    (out / "tables" / "stale.csv").write_text("old\n")
    assert _report(store, out, policy) == 2                      # needs --overwrite
    assert "--overwrite" in capsys.readouterr().err
    assert _report(store, out, policy, "--overwrite") == 0
    assert outside.read_text() == "precious\n"                   # the link was not followed
    assert not (out / "report.json").is_symlink()
    assert not (out / "tables" / "stale.csv").exists()
    man = json.loads((out / "manifest.json").read_text())
    on_disk = {str(p.relative_to(out)) for p in out.rglob("*") if p.is_file()}
    assert on_disk == set(man["outputs"]) | {"manifest.json"}
    assert not [p for p in tmp_path.iterdir() if ".procmetrics-" in p.name or ".old-" in p.name]
    # the folder itself a link: refused
    link = tmp_path / "link"
    link.symlink_to(out)
    assert _report(store, link, policy, "--overwrite") == 2
