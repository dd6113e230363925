"""Numeric options go through one validator (procmetrics.validate) in every command and
when rerun reads them back from a manifest: bad values end in exit 2 naming the option."""
from __future__ import annotations

import json

import pytest

from procmetrics.cli import main
from procmetrics.report.manifest import MANIFEST_FORMAT

def exit_code(argv: list[str]) -> int:
    """The exit status of ``procmetrics ARGV`` (argparse errors raise SystemExit)."""
    try:
        return main(argv)
    except SystemExit as ex:
        return int(ex.code)


BAD_LEVELS = ["5", "1", "0", "nan", "-0.5", "inf", "abc"]


@pytest.mark.parametrize("level", BAD_LEVELS)
def test_report_level_must_lie_in_the_open_unit_interval(level, tmp_path, capsys):
    code = exit_code(["report", "--store", str(tmp_path / "none.sqlite"), "--out",
                 str(tmp_path / "o"), f"--level={level}"])
    assert code == 2
    assert "--level" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("argv", [
    ["lifetimes", "--seed", "-1"], ["lifetimes", "--seed", "1.5"], ["report", "--out", "x", "--seed", "abc"],
    ["compare", "--at", "2020-01-01", "--resamples", "0"], ["compare", "--at", "2020-01-01",
                                                            "--boot", "-3"],
    ["changes", "--penalty", "nan"], ["changes", "--boot", "-1"],
    ["lifetimes", "--horizon", "-5"], ["lifetimes", "--boot", "0"], ["lifetimes", "--jobs", "0"],
    ["growth", "--ahead", "inf"], ["growth", "--batch-hours", "-1"], ["growth", "--seed", "-2"],
    ["mine", ".", "--jobs", "0"], ["mine", ".", "--prefix-depth", "0"],
])
def test_bad_numbers_in_any_command_exit_2(argv, capsys):
    assert exit_code(argv) == 2                # argparse: usage line and exit 2
    assert "must be" in capsys.readouterr().err


@pytest.mark.parametrize("key, value", [("level", 5), ("level", "nan"), ("seed", "abc"),
                                        ("seed", -1), ("min_n", 0)])
def test_rerun_validates_numbers_read_back_from_the_manifest(key, value, tmp_path, capsys):
    man = tmp_path / "rep" / "manifest.json"
    man.parent.mkdir()
    man.write_text(json.dumps({"format": MANIFEST_FORMAT, "mining_runs": [{"status": "complete"}],
                               "report_options": {key: value}, "store": {}}))
    code = main(["rerun", str(man), "--out", str(tmp_path / "again")])
    assert code == 2, capsys.readouterr()
    assert f"report_options.{key}" in capsys.readouterr().err
