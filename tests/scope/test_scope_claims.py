"""Claims that name a scope, the report's scope section and the window in the panel.

Oracles: the commit counts are git's (``rev-list --full-history``), and a claim
judged on a named scope must get exactly the verdict and evidence it gets when the
whole command is cut to that scope with ``--scope`` (one selection, two routes).
"""
from __future__ import annotations

import json

import pytest

from procmetrics.cli import main
from tests.scope.scope_support import git

SCOPES = ('[scope.motor]\ninclude = ["motor/**", "power"]\n'
          '[scope.can]\ninclude = ["drivers/can/**"]\n')
CLAIM = ('[[claim]]\nid = "{id}"\nkind = "at_least"\nmetric = "review_coverage"\n'
         'threshold = 0.5\nafter = "2021-01-01"\n{extra}\n')


@pytest.fixture
def files(tmp_path):
    scopes = tmp_path / "scopes.toml"
    scopes.write_text(SCOPES, encoding="utf-8")
    claims = tmp_path / "claims.toml"
    claims.write_text(CLAIM.format(id="whole", extra="") + CLAIM.format(
        id="in-motor", extra='scope = "motor"'), encoding="utf-8")
    return scopes, claims


def _check(capsys, *argv):
    capsys.readouterr()
    code = main([str(a) for a in argv])
    got = capsys.readouterr()
    return code, got.out, got.err


def _verdicts(path):
    return {v["id"]: v for v in json.loads(path.read_text())["verdicts"]}


def test_a_claim_on_a_named_scope_is_judged_as_under_that_scope(demo, files, capsys,
                                                               tmp_path):
    repo, store = demo
    scopes, claims = files
    code, out, err = _check(capsys, "check", claims, "--store", store, "--scope-file", scopes,
                            "--json", tmp_path / "a.json")
    assert code != 2, err
    a = _verdicts(tmp_path / "a.json")
    only = tmp_path / "only.toml"
    only.write_text(CLAIM.format(id="in-motor", extra=""), encoding="utf-8")
    code, out, err = _check(capsys, "check", only, "--store", store, "--scope",
                            f"{scopes}:motor", "--json", tmp_path / "b.json")
    assert code != 2, err
    b = _verdicts(tmp_path / "b.json")
    assert a["in-motor"]["verdict"] == b["in-motor"]["verdict"]
    assert a["in-motor"]["evidence"] == b["in-motor"]["evidence"]
    assert a["in-motor"]["robustness"] == b["in-motor"]["robustness"]
    lo = "2021-01-01T00:00:00+00:00"
    n_scope = int(git(repo, "rev-list", "--count", "--no-merges", "--full-history",
                      f"--since={lo}", "HEAD", "--", ":(glob)motor/**", "power"))
    n_whole = int(git(repo, "rev-list", "--count", "--no-merges", f"--since={lo}", "HEAD"))
    print(f"at_least review_coverage after 2021-01-01: n = {a['in-motor']['evidence']['n']} in scope "
          f"(git {n_scope}), {a['whole']['evidence']['n']} whole tree (git {n_whole})")
    assert a["in-motor"]["evidence"]["n"] == n_scope
    assert a["whole"]["evidence"]["n"] == n_whole
    assert any("judged on the scope 'motor'" in r for r in a["in-motor"]["reasons"])
    assert not any("judged on the scope" in r for r in a["whole"]["reasons"])
    prov = json.loads((tmp_path / "a.json").read_text())["provenance"]
    assert prov["claim_scopes"]["motor"]["n_paths"] > 0


def test_a_scope_a_claim_names_must_exist(demo, files, capsys, tmp_path):
    _, store = demo
    scopes, claims = files
    code, out, err = _check(capsys, "check", claims, "--store", store)
    assert code == 2 and "--scope-file" in err and len(err.strip().splitlines()) == 1
    bad = tmp_path / "bad.toml"
    bad.write_text(CLAIM.format(id="x", extra='scope = "gone"'), encoding="utf-8")
    code, out, err = _check(capsys, "check", bad, "--store", store, "--scope-file", scopes)
    assert code == 2 and "has no scope 'gone'" in err, err


def test_the_panel_varies_the_window_only_when_one_is_given(demo, files, capsys, tmp_path):
    _, store = demo
    scopes, claims = files
    _check(capsys, "check", claims, "--store", store, "--scope-file", scopes, "--json",
           tmp_path / "a.json")
    assert not [r for v in _verdicts(tmp_path / "a.json").values()
                for r in v["robustness"]["variants"] if r["axis"] == "window"]
    _check(capsys, "check", claims, "--store", store, "--scope-file", scopes, "--since",
           "v1.1", "--until", "v7.0", "--json", tmp_path / "w.json")
    for v in _verdicts(tmp_path / "w.json").values():
        labels = [r["choice"] for r in v["robustness"]["variants"] if r["axis"] == "window"]
        assert len(labels) == 2 and "days later" in labels[0] and "days earlier" in labels[1]


@pytest.mark.slow
def test_the_report_states_its_scopes_side_by_side_and_reruns(demo, files, tmp_path, capsys):
    repo, store = demo
    scopes, claims = files
    out = tmp_path / "rep"
    code, _, err = _check(capsys, "report", "--store", store, "--out", out, "--claims", claims,
                          "--scope-file", scopes, "--scope", f"{scopes}:can", "--until",
                          "v6.0", "--pdf-engine", "none")
    assert code == 0, err
    doc = json.loads((out / "report.json").read_text())
    tables = {t["key"]: t for t in doc["tables"]}
    assert {"scope-selection", "scope-vs-whole", "scope-motor-selection",
            "scope-motor-vs-whole"} <= set(tables)
    hi = git(repo, "log", "-1", "--format=%cI", "v6.0").strip()
    n_can = int(git(repo, "rev-list", "--count", "--no-merges", "--full-history",
                    f"--until={hi}", "HEAD", "--", ":(glob)drivers/can/**"))
    n_all = int(git(repo, "rev-list", "--count", "--no-merges", f"--until={hi}", "HEAD"))
    rows = {r["quantity"]: r for r in tables["scope-vs-whole"]["rows"]}
    assert rows["review coverage"]["scope_n"] == n_can
    assert rows["review coverage"]["whole_n"] == n_all
    assert doc["scope"]["selection"]["n_commits"] == n_can
    assert (out / "inputs" / "scope.toml").is_file()
    assert (out / "inputs" / "claim-scopes.toml").is_file()
    code, rerun_out, err = _check(capsys, "rerun", out, "--out", tmp_path / "again")
    assert code == 0, rerun_out + err
    assert "figures match" in rerun_out
