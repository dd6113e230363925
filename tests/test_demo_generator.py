"""The demo-history generator (sample_repos/generate.py), checked against plain git.

Every count, date and link the ground-truth JSON claims is re-read here with git
plumbing (rev-list, for-each-ref, log formats, interpret-trailers, merge-base,
check-mailmap), so the truth later analyses are tested against is itself tested
against git rather than against the generator's own bookkeeping.
"""
from __future__ import annotations

import datetime as dt
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
GENERATOR = ROOT / "sample_repos" / "generate.py"
SMALL = 600          # commits for most tests; the default size is checked once below
SEED = 11

GIT_ENV = {"PATH": os.environ.get("PATH", "/usr/bin:/bin"), "GIT_CONFIG_NOSYSTEM": "1",
           "GIT_CONFIG_GLOBAL": os.devnull, "LC_ALL": "C", "TZ": "UTC"}


def generate(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, str(GENERATOR), *args], capture_output=True,
                          text=True, encoding="utf-8")


def git(repo: Path, *args: str, stdin: str | None = None, check: bool = True) -> str:
    return subprocess.run(["git", "-C", str(repo), *args], env=GIT_ENV, check=check,
                          capture_output=True, text=True, encoding="utf-8", input=stdin).stdout


def build(out: Path, *extra: str) -> dict:
    r = generate("--out", str(out), *extra)
    assert r.returncode == 0, r.stderr
    truth_path = out.parent / (out.name + ".truth.json")
    assert str(truth_path) in r.stdout
    return json.loads(truth_path.read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def demo(tmp_path_factory) -> tuple[Path, dict]:
    out = tmp_path_factory.mktemp("demo") / "aurora-fw"
    return out, build(out, "--seed", str(SEED), "--commits", str(SMALL))


def committer_times(repo: Path) -> dict[str, int]:
    rows = git(repo, "log", "--format=%H %ct", "HEAD").split("\n")
    return {h: int(t) for h, t in (r.split() for r in rows if r)}


def test_same_seed_gives_same_hashes_and_rebuilds_in_place(demo, tmp_path):
    repo, truth = demo
    again = tmp_path / "again"
    build(again, "--seed", str(SEED), "--commits", str(SMALL))
    second = build(again, "--seed", str(SEED), "--commits", str(SMALL))   # over its own output
    refs = "--format=%(objectname) %(refname)"
    assert git(again, "for-each-ref", refs) == git(repo, "for-each-ref", refs)
    assert git(again, "rev-parse", "HEAD").strip() == truth["head"] == second["head"]
    assert (again.parent / "again.truth.json").read_bytes() == \
        (repo.parent / "aurora-fw.truth.json").read_bytes()
    other = build(tmp_path / "other", "--seed", str(SEED + 1), "--commits", str(SMALL))
    assert other["head"] != truth["head"]


def test_refuses_to_delete_a_directory_it_did_not_make(tmp_path):
    foreign = tmp_path / "precious"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("keep me", encoding="utf-8")
    r = generate("--out", str(foreign), "--commits", "300")
    assert r.returncode == 3 and "refusing" in r.stderr
    assert (foreign / "notes.txt").read_text(encoding="utf-8") == "keep me"
    other_repo = tmp_path / "someone-elses-repo"          # a git repository without our marker
    subprocess.run(["git", "init", "-q", str(other_repo)], env=GIT_ENV, check=True)
    r = generate("--out", str(other_repo), "--commits", "300")
    assert r.returncode == 3
    assert (other_repo / ".git" / "HEAD").is_file()
    assert not (tmp_path / "someone-elses-repo.truth.json").exists()


def test_print_change_date(demo):
    r = generate("--print-change-date")
    assert r.returncode == 0
    assert re.fullmatch(r"\d{4}-\d{2}-\d{2}\n", r.stdout)
    assert r.stdout.strip() == demo[1]["change"]["date"]
    dt.date.fromisoformat(r.stdout.strip())


def test_counts_match_git_rev_list(demo):
    repo, truth = demo
    h = truth["history"]
    assert int(git(repo, "rev-list", "--count", "HEAD")) == h["commits"] == SMALL
    assert int(git(repo, "rev-list", "--count", "--merges", "HEAD")) == h["merges"] > 0
    assert int(git(repo, "rev-list", "--count", "--no-merges", "HEAD")) == h["non_merge_commits"]
    assert git(repo, "for-each-ref", "--format=%(refname)", "refs/heads").split() == \
        ["refs/heads/main"]
    assert git(repo, "status", "--porcelain") == ""          # work tree checked out, clean
    maintainers = (repo / "MAINTAINERS").read_text(encoding="utf-8")
    for entry in ("\nM:\t", "\nF:\t", "\nX:\t", "\nN:\t"):
        assert entry in maintainers


def test_tags_are_annotated_and_reachable(demo):
    repo, truth = demo
    assert sorted(git(repo, "tag", "-l").split()) == sorted(t["name"] for t in truth["tags"])
    assert len(truth["tags"]) >= 20
    for tag in truth["tags"]:
        assert git(repo, "cat-file", "-t", f"refs/tags/{tag['name']}").strip() == "tag"
        assert git(repo, "rev-parse", f"{tag['name']}^{{commit}}").strip() == tag["commit"]
        git(repo, "merge-base", "--is-ancestor", tag["commit"], "HEAD")


def test_planted_fixes_lines_parse_as_git_trailers(demo):
    repo, truth = demo
    planted = [m for m in truth["messy"] if "lines" in m]
    kinds = {m["kind"] for m in planted}
    assert {"short_hash_7", "short_hash_8", "full_hash_40", "fixes_commit_word",
            "subject_without_parentheses", "fixes_in_body", "two_introducers",
            "two_hashes_one_line", "fixes_key_lowercase", "unknown_target"} <= kinds
    for m in planted:
        message = git(repo, "log", "-1", "--format=%B", m["commit"])
        parsed = git(repo, "interpret-trailers", "--parse", stdin=message).splitlines()
        for line in m["lines"]:
            assert line in message.splitlines()
            assert (line in parsed) == m["in_trailer_block"], (m["kind"], line, parsed)


def test_odd_key_spellings_still_parse_as_trailers(demo):
    repo, truth = demo
    odd = [m for m in truth["messy"] if m["kind"] == "odd_key_spelling"]
    assert {m["key"] for m in odd} == {"Signed-Off-By:", "Reviewed-By:", "Reviewed-by :",
                                       "Acked-By:"}
    for m in odd:
        message = git(repo, "log", "-1", "--format=%B", m["commit"])
        parsed = git(repo, "interpret-trailers", "--parse", stdin=message)
        key = m["key"].replace(" ", "")                       # git drops the space before ':'
        assert any(line.startswith(m["key"]) for line in message.splitlines())
        assert any(line.startswith(key) for line in parsed.splitlines())


def test_fix_links_point_to_ancestors_with_the_recorded_lifetime(demo):
    repo, truth = demo
    times = committer_times(repo)
    fixed = [d for d in truth["defects"]["list"] if d["fix"]]
    assert fixed and truth["defects"]["fixed"] == len(fixed)
    assert truth["defects"]["introduced"] == len(truth["defects"]["list"])
    for d in fixed:
        git(repo, "merge-base", "--is-ancestor", d["introducer"], d["fix"])
        observed = (times[d["fix"]] - times[d["introducer"]]) / 86400
        assert observed == pytest.approx(d["observed_lifetime_days"], abs=1e-5)
        assert d["observed_lifetime_days"] == pytest.approx(d["lifetime_days"], abs=1e-3)
        message = git(repo, "log", "-1", "--format=%B", d["fix"])
        named = re.findall(r"\b[0-9a-f]{7,40}\b", message)
        assert any(d["introducer"].startswith(h) for h in named) == (d["fixes_line"] != "none")
    for m in truth["messy"]:
        if m["kind"] == "unknown_target":
            assert git(repo, "rev-parse", "--verify", "--quiet", m["missing_hash"] + "^{commit}",
                       check=False) == ""
        if m["kind"] == "revert":
            git(repo, "merge-base", "--is-ancestor", m["reverted"], m["commit"])
            assert f"This reverts commit {m['reverted']}." in \
                git(repo, "log", "-1", "--format=%B", m["commit"])


def test_review_shares_match_git_trailers(demo):
    repo, truth = demo
    change = int(dt.datetime.fromisoformat(truth["change"]["date"] + "T00:00:00+00:00")
                 .timestamp())
    fmt = "%ct%x00%(trailers:key=Reviewed-by,key=Acked-by,valueonly,separator=%x01)%x02"
    counts = {"before": [0, 0], "after": [0, 0]}
    for rec in git(repo, "log", "--no-merges", f"--format={fmt}", "HEAD").split("\x02"):
        rec = rec.strip("\n")
        if not rec:
            continue
        ct, trailers = rec.split("\x00")
        c = counts["before" if int(ct) < change else "after"]
        c[0] += 1
        c[1] += bool(trailers.strip())
    for period, (n, reviewed) in counts.items():
        real = truth["review"]["realised"][period]
        assert (real["commits"], real["reviewed"]) == (n, reviewed)


def test_identities_mailmap_and_markup(demo):
    repo, truth = demo
    raw = set(git(repo, "log", "--format=%ae", "HEAD").split())
    mapped = set(git(repo, "log", "--format=%aE", "HEAD").split())
    assert len(raw) == truth["history"]["author_emails"]
    assert len(mapped) == truth["history"]["author_emails_after_mailmap"] == len(raw) - 1
    mm = truth["mailmap"]
    assert git(repo, "check-mailmap", f"{mm['name']} <{mm['emails'][0]}>").strip() == \
        f"{mm['name']} <{mm['canonical_email']}>"
    for m in truth["messy"]:
        if m["kind"] == "non_ascii_author":
            assert git(repo, "log", "-1", "--format=%an", m["commit"]).strip() == m["name"]
            assert not m["name"].isascii()
        if m["kind"] == "html_in_subject":
            assert "<script>alert(1)</script>" in git(repo, "log", "-1", "--format=%s",
                                                      m["commit"])
        if m["kind"] in ("late_applied", "author_after_committer"):
            at, ct = git(repo, "log", "-1", "--format=%at %ct", m["commit"]).split()
            assert (int(ct) - int(at) > 30 * 86400) if m["kind"] == "late_applied" \
                else (int(at) > int(ct))


def test_default_size_carries_the_planted_change(tmp_path):
    truth = build(tmp_path / "aurora-fw")                  # default seed and size
    repo = tmp_path / "aurora-fw"
    assert int(git(repo, "rev-list", "--count", "HEAD")) == truth["history"]["commits"] == 4000
    real = truth["review"]["realised"]
    # Realised shares near the generating probabilities (binomial sd < 0.012 at n > 1,500).
    assert abs(real["before"]["share"] - truth["review"]["p_before"]) < 0.05
    assert abs(real["after"]["share"] - truth["review"]["p_after"]) < 0.05
    life = truth["lifetime"]["realised"]
    assert life["after"]["median_complete_days"] < 0.75 * life["before"]["median_complete_days"]
    assert life["after"]["unfixed"] > 0 and truth["defects"]["unfixed"] == \
        life["before"]["unfixed"] + life["after"]["unfixed"]
    # Fixes: adoption starts half a year in: git finds no Fixes line before the first era.
    first_era = truth["fixes_trailer_adoption"][1]["from"]
    early = git(repo, "log", "--no-merges", "--format=%H", f"--before={first_era}T00:00:00Z",
                "--grep=^Fixes:", "--regexp-ignore-case", "HEAD")
    assert early == ""
    assert len(truth["stable_requests"]["commits"]) > 0
