"""Every command's options, walked with bad values: each run ends with an exit code from
the README's table (parsed from README.md, "What happens when…"), never 1 or 70, never
a traceback. Plus the cases of the issue one by one (output paths, schema version,
nested TOML/JSON, date options taking tags, ``export -o -``)."""
from __future__ import annotations

import argparse
import json
import re
import sqlite3

import pandas as pd
import pytest

from procmetrics.cli import build_parser, main
from tests.git_support import ALICE, BOB, GitHistory, when
from tests.robustness.robust_support import ROOT


def documented_codes() -> set[int]:
    text = (ROOT / "README.md").read_text("utf-8")
    table = text[text.index("| Exit code | Meaning |"):].split("\n\n", 1)[0]
    codes: set[int] = set()
    for cell in re.findall(r"^\| ([0-9][^|]*?) \|", table, re.M):
        m = re.match(r"(\d+)(?:–(\d+)| and above)?", cell)
        lo = int(m.group(1))
        hi = int(m.group(2)) if m.group(2) else (31 if "above" in cell else lo)
        codes.update(range(lo, hi + 1))
    return codes


DOCUMENTED = documented_codes()


def test_the_table_lists_the_codes_the_tool_defines():
    from procmetrics import errors
    own = {c.exit_code for c in vars(errors).values()
           if isinstance(c, type) and issubclass(c, errors.ProcmetricsError)}
    assert own | {0, 7, 9, 15, errors.EXIT_FIGURES_DIFFER, 70, 130} <= DOCUMENTED


def _code(argv, capsys) -> tuple[int, str]:
    capsys.readouterr()
    try:
        code = main([str(a) for a in argv])
    except SystemExit as ex:          # argparse: bad option syntax
        code = int(ex.code)
    return code, capsys.readouterr().err


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    base = tmp_path_factory.mktemp("walk")
    h = GitHistory.create(base / "repo")
    for i in range(30):
        h.commit(f"net: change {i}\n\nReviewed-by: Carol <c@example.com>\n" if i % 2
                 else f"core: change {i}\n", files={f"{'net' if i % 2 else 'core'}/f.c": f"{i}\n"},
                 author=ALICE if i % 3 else BOB, date=when(7 * i))
        if i == 20:
            h.tag("v1.0")
    store = base / "s.sqlite"
    assert main(["mine", str(h.path), "--store", str(store), "--no-progress"]) == 0
    claims = base / "c.toml"
    claims.write_text('[[claim]]\nid = "a"\nkind = "at_least"\nmetric = "review_coverage"\n'
                      'threshold = 0.1\n')
    return base, h, store, claims


BAD_NUMBERS = ["nan", "-1", "abc", ""]
BAD_DATES = ["2016-13-01", "v9.9.9", "", "-1"]
BAD_PATHS = ["", "/dev/null", "/proc/procmetrics-nope/x", "{file}", "{folder}"]


def _values(action: argparse.Action) -> list[str]:
    opt = action.option_strings[-1]
    if action.choices:
        return ["bogus"]
    if action.type is not None and action.type not in (str,):
        return BAD_NUMBERS
    if any(k in opt for k in ("date", "--at", "--since", "--until", "--links-from")):
        return BAD_DATES
    if opt in ("--out", "-o", "--output", "--json", "--claims", "--subsystem-rules", "--list",
               "--szz-commits", "--store", "--scope", "--junit"):
        return BAD_PATHS
    if opt in ("--repo", "--ref"):
        return ["no-such-repo", "-x"]
    return ["", "\x1b[2J"]


def _base(cmd: str, small, tmp_path) -> list[str]:
    base, h, store, claims = small
    return {"mine": [h.path, "--store", tmp_path / "m.sqlite", "--no-progress"],
            "export": ["--store", store, "--table", "commits"],
            "report": ["--store", store, "--out", tmp_path / "rep", "--pdf-engine", "none"],
            "check": [claims, "--store", store],
            "rerun": [tmp_path / "none" / "manifest.json"],
            "series": ["--store", store, "--no-trend"],
            "changes": ["--store", store, "--boot", "0"],
            "compare": ["--store", store, "--at", "v1.0", "--resamples", "9", "--boot", "9"],
            "lifetimes": ["--store", store, "--boot", "9"],
            "growth": ["--store", store, "--boot", "9"],
            "diff": [tmp_path / "none-a", tmp_path / "none-b"],
            "carryover": ["--store", store]}[cmd]


def _walk():
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    for cmd, p in sub.choices.items():
        for action in p._actions:
            if not action.option_strings or action.nargs == 0 or action.dest == "help":
                continue
            if action.dest in ("scheduler",):      # would wait for a Dask cluster
                continue
            yield cmd, action


WALK = list(_walk())


@pytest.mark.slow
@pytest.mark.parametrize("cmd, action", WALK, ids=[f"{c}{a.option_strings[-1]}" for c, a in WALK])
def test_every_option_with_bad_values_gives_a_documented_code(cmd, action, small, tmp_path,
                                                               capsys):
    (tmp_path / "a-file").write_text("x")
    (tmp_path / "a-folder").mkdir()
    (tmp_path / "a-folder" / "x").write_text("x")
    opt = action.option_strings[-1]
    for value in _values(action):
        value = value.format(file=tmp_path / "a-file", folder=tmp_path / "a-folder")
        argv = [*_base(cmd, small, tmp_path), f"{opt}={value}" if opt.startswith("--")
                else opt, *([] if opt.startswith("--") else [value])]
        code, err = _code([cmd, *argv], capsys)
        assert code in DOCUMENTED and code not in (1, 70), (argv, code, err)
        assert "Traceback" not in err and "internal error" not in err, (argv, err)


# -- the cases named in the issue ---------------------------------------------------------

@pytest.mark.parametrize("out", ["", "/dev/null", "/proc/procmetrics-nope", "/sys/x/y", "FILE",
                                 "UNWRITABLE"])
def test_report_out_bad_paths_exit_2(out, small, tmp_path, capsys):
    _, _, store, _ = small
    if out == "FILE":
        out = tmp_path / "f"
        out.write_text("x")
    if out == "UNWRITABLE":
        out = "/proc/self/procmetrics-report"
    code, err = _code(["report", "--store", store, "--out", out, "--pdf-engine", "none"], capsys)
    assert code == 2, err


def test_output_file_errors_exit_2(small, tmp_path, capsys):
    _, _, store, claims = small
    for argv in (["export", "--store", store, "--table", "commits", "-o", tmp_path],
                 ["export", "--store", store, "--table", "commits", "--format", "parquet"],
                 ["check", claims, "--store", store, "--json", tmp_path],
                 ["compare", "--store", store, "--at", "v1.0", "--resamples", "9", "--boot",
                  "9", "--out", "/dev/null"],
                 ["lifetimes", "--store", store, "--boot", "9", "--out", "/dev/null"],
                 ["series", "--store", store, "--no-trend", "--out", ""],
                 ["export", "--store", store, "--table", "commits", "--repo", "nope"],
                 ["lifetimes", "--store", store, "--repo", "nope"]):
        code, err = _code(argv, capsys)
        assert code == 2, (argv, err)


def test_export_dash_writes_standard_output(small, tmp_path, capsys, monkeypatch):
    _, _, store, _ = small
    monkeypatch.chdir(tmp_path)
    code = main(["export", "--store", str(store), "--table", "tags", "-o", "-"])
    assert code == 0
    assert capsys.readouterr().out.startswith("repo,name,")
    assert not (tmp_path / "-").exists()


def test_date_options_take_dates_tags_and_commits_alike(small, capsys):
    _, h, store, _ = small
    tip = h.rev("v1.0")
    for value in ("v1.0", tip[:10], "2020-12-01"):
        code, err = _code(["lifetimes", "--store", store, "--boot", "9", "--change-date",
                           value], capsys)
        assert code in (0, 7), (value, err)
    for value in ("2016-13-01", "v9.9.9"):
        code, err = _code(["lifetimes", "--store", store, "--change-date", value], capsys)
        assert code == 2 and "--change-date" in err, err
        code, err = _code(["compare", "--store", store, "--at", value], capsys)
        assert code == 2 and "--at" in err, err
    from procmetrics.analyse.change.policy import resolve_date
    from procmetrics.store import open_store
    from procmetrics.store.tables import read_table
    eng = open_store(store, create=False, readonly=True)
    commits, tags = read_table(eng, "commits"), read_table(eng, "tags")
    eng.dispose()
    at_tag = resolve_date("v1.0", commits, tags)
    at_commit = resolve_date(tip, commits, tags)
    assert at_tag == at_commit == pd.Timestamp(int(h.git("log", "-1", "--format=%ct", tip)),
                                               unit="s", tz="UTC")


def test_non_integer_schema_version_exits_5(small, tmp_path, capsys):
    _, _, store, _ = small
    copy = tmp_path / "s.sqlite"
    # the backup API copies what is still in the write-ahead log too (the file's bytes
    # alone were empty when this test ran first, before anything checkpointed the store)
    src, dst = sqlite3.connect(store), sqlite3.connect(copy)
    try:
        src.backup(dst)
    finally:
        src.close()
        dst.close()
    with sqlite3.connect(copy) as c:
        c.execute("UPDATE pm_meta SET value = 'one' WHERE key = 'schema_version'")
    code, err = _code(["export", "--store", copy, "--table", "commits"], capsys)
    assert code == 5 and "not a number" in err, err


def test_deeply_nested_files_exit_2(small, tmp_path, capsys):
    base, h, store, _ = small
    deep = tmp_path / "deep.toml"
    deep.write_text("x = " + "[" * 5000 + "]" * 5000 + "\n")
    code, err = _code(["check", deep, "--store", store], capsys)
    assert code == 2 and "nested too deeply" in err, err
    code, err = _code(["mine", h.path, "--store", tmp_path / "m.sqlite", "--subsystem-rules",
                       deep], capsys)
    assert code == 2 and "nested too deeply" in err, err
    man = tmp_path / "manifest.json"
    man.write_text("[" * 100000 + "]" * 100000)
    code, err = _code(["rerun", man], capsys)
    assert code == 2, err
    man.write_text(json.dumps({"format": "procmetrics-manifest/1", "mining_runs": "x"}))
    assert _code(["rerun", man], capsys)[0] == 2


def test_nothing_to_measure_is_exit_7_for_report_as_for_series(small, tmp_path, capsys):
    """A store whose run kept no commit (--since after the history): every reading
    command that measures exits 7 with one line; report writes nothing (no NaT text)."""
    _, h, _, _ = small
    store = tmp_path / "empty.sqlite"
    assert main(["mine", str(h.path), "--store", str(store), "--since", "2099-01-01",
                 "--no-progress"]) == 0
    out = tmp_path / "rep"
    for argv in (["series", "--store", store], ["changes", "--store", store],
                 ["compare", "--store", store, "--at", "2020-10-01"],
                 ["report", "--store", store, "--out", out, "--pdf-engine", "none"]):
        code, err = _code(argv, capsys)
        assert code == 7, (argv, err)
        assert "NaT" not in err and err.count("\n") == 1, err
    assert not out.exists()
