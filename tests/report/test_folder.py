"""The report folder stands on its own: inputs copied, paths relative to the manifest,
``rerun`` from any working directory on a moved copy, nothing left behind on failure;
commit hashes become links when asked (the folder's report is written with --commit-url)."""
from __future__ import annotations

import json
import shutil

import pytest

from procmetrics.cli import main
from procmetrics.errors import ConfigError
from procmetrics.report.manifest import sha256_file
from procmetrics.report.meta import check_commit_url, commit_link, load_meta
from tests.report.html_links import Links

META = """\
document_id = "AUR-QA-0007"
revision = "B"
author = "Imke Vossberg"
reviewer = "Tarek Oduya"
approver = "Lenka Marrow"
organisation = "Aurora Avionics (invented)"
"""
URL = "https://git.example.org/aurora/commit/{hash}"


@pytest.fixture(scope="module")
def folder(built, tmp_path_factory):
    base = tmp_path_factory.mktemp("folder")
    meta = base / "meta.toml"
    meta.write_text(META, encoding="utf-8")
    out = base / "rep"
    assert main(["report", "--store", str(built.store), "--out", str(out), "--policy-date",
                 built.policy, "--claims", str(built.claims), "--meta", str(meta),
                 "--pdf-engine", "none", "--commit-url", URL]) == 0
    return base, out, meta


def test_inputs_are_copied_and_the_manifest_points_at_the_copies(folder, built):
    _, out, meta = folder
    man = json.loads((out / "manifest.json").read_text("utf-8"))
    assert man["claims_file"]["path"] == "inputs/claims.toml"
    assert (out / "inputs" / "claims.toml").read_bytes() == built.claims.read_bytes()
    assert man["claims_file"]["sha256"] == sha256_file(built.claims)
    assert man["claims_file"]["original_path"] == str(built.claims.resolve())
    assert man["inputs"]["report_meta"]["path"] == "inputs/report-meta.toml"
    assert (out / "inputs" / "report-meta.toml").read_bytes() == meta.read_bytes()
    # the store and repository by paths relative to the manifest, the absolute ones kept
    assert (out / man["store"]["path"]).resolve() == built.store.resolve()
    assert man["store"]["url"].endswith(str(built.store.resolve()))
    assert (out / man["repository"]["path_relative"]).resolve() == built.repo.resolve()
    # the copies are outputs: checksummed like the rest
    assert man["outputs"]["inputs/claims.toml"] == sha256_file(out / "inputs" / "claims.toml")


def test_rerun_of_a_moved_copy_from_another_directory(folder, tmp_path, monkeypatch, capsys):
    base, out, _ = folder
    moved = tmp_path / "elsewhere" / "copy-of-report"
    shutil.copytree(out, moved)
    elsewhere = tmp_path / "cwd"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    capsys.readouterr()
    assert main(["rerun", str(moved)]) == 0          # the folder itself is accepted too
    text = capsys.readouterr().out
    assert "figures match" in text, text
    assert (tmp_path / "elsewhere" / "copy-of-report-rerun" / "inputs" / "claims.toml").exists()


def test_a_failed_rerun_leaves_no_folder(folder, tmp_path, capsys):
    _, out, _ = folder
    broken = tmp_path / "broken"
    shutil.copytree(out, broken)
    (broken / "inputs" / "claims.toml").unlink()
    man = json.loads((broken / "manifest.json").read_text("utf-8"))
    man["claims_file"]["original_path"] = str(tmp_path / "gone.toml")
    (broken / "manifest.json").write_text(json.dumps(man), encoding="utf-8")
    target = tmp_path / "never"
    assert main(["rerun", str(broken / "manifest.json"), "--out", str(target)]) == 2
    assert "claims file" in capsys.readouterr().err
    assert not target.exists()
    # a failure after the folder was created (no store, no repository) removes it again
    man["claims_file"]["original_path"] = str(out / "inputs" / "claims.toml")
    man["store"] = {**man["store"], "path": None, "url": "sqlite:////nonexistent/x.sqlite"}
    man["repository"] = {**man["repository"], "path": str(tmp_path / "no-repo"),
                         "path_relative": None}
    (broken / "manifest.json").write_text(json.dumps(man), encoding="utf-8")
    assert main(["rerun", str(broken / "manifest.json"), "--out", str(target)]) != 0
    assert not target.exists()


def test_commit_hashes_become_links(folder):
    _, out, _ = folder
    doc = json.loads((out / "report.json").read_text("utf-8"))
    parser = Links()
    parser.feed((out / "report.html").read_text("utf-8"))
    head = doc["scope"]["head_hash"]
    assert URL.format(hash=head) in parser.all_hrefs
    links = [h for h in parser.all_hrefs if h.startswith("https://git.example.org/")]
    assert all(h[len(URL) - len("{hash}"):].isalnum() for h in links)


def test_metadata_file_is_checked(tmp_path):
    good = tmp_path / "m.toml"
    good.write_text(META, encoding="utf-8")
    m = load_meta(good)
    assert m.identity() == "AUR-QA-0007 rev. B" and m.approver == "Lenka Marrow"
    bad = tmp_path / "bad.toml"
    bad.write_text('documentid = "x"\n', encoding="utf-8")
    with pytest.raises(ConfigError, match="unknown key"):
        load_meta(bad)
    bad.write_text('author = "a\\nb"\n', encoding="utf-8")
    with pytest.raises(ConfigError, match="one line"):
        load_meta(bad)


@pytest.mark.parametrize("template", ["javascript:alert(1)//{hash}", "https://x/{hash}/{hash}",
                                      "https://x/{hash}\"onmouseover=x", "https://x/{h}",
                                      "https://x/{hash}{0}"])
def test_commit_url_templates_are_refused(template):
    with pytest.raises(ConfigError):
        check_commit_url(template)


def test_commit_links_substitute_only_hex():
    t = check_commit_url("https://git.example.org/fw/commit/{hash}")
    assert commit_link(t, "ABCdef0123") == "https://git.example.org/fw/commit/abcdef0123"
    assert commit_link(t, "<b>") is None and commit_link(None, "abc") is None
