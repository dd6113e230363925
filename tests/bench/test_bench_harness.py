"""Pure functions of the benchmark harness (bench/): growth exponents, same-run ratios,
target verdicts and the regression gate, on hand-computed cases. No benchmark runs here."""
from __future__ import annotations

import math
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "bench"))
import figures  # noqa: E402
import gate  # noqa: E402
import growth_fit  # noqa: E402
import merge_runs  # noqa: E402
import report_md  # noqa: E402


def size(git_raw: float, **analyses: dict) -> dict:
    """One size's results: a git log --raw baseline and analysis commands."""
    an = {k: {"exit_code": 0, "peak_rss_mib": 100.0, "peak_rss_main_mib": 100.0, **v}
          for k, v in analyses.items()}
    return {"history": {"commits": 1000, "non_merge_commits": 1000, "generator_version": 2},
            "git_raw": {"seconds": git_raw, "exit_code": 0}, "analyses": an}


# ---- growth exponent -------------------------------------------------------------------------

def test_two_sizes_give_the_line_through_both_points():
    fit = growth_fit.growth_exponent([1000, 10_000], [2.0, 20.0])
    assert fit["k"] == pytest.approx(1.0)
    assert fit["n"] == 2 and fit["interval"] is None and "two sizes" in fit["note"]


def test_exact_power_law_has_zero_standard_error():
    fit = growth_fit.growth_exponent([100, 1000, 10_000], [1.0, 100.0, 10_000.0])
    assert fit["k"] == pytest.approx(2.0)
    assert fit["se"] == pytest.approx(0.0, abs=1e-9)


def test_three_sizes_with_residuals_hand_computed():
    # x = ln N = (0, 1, 2)·ln 10, y = ln v = (0, 1, 3)·ln 10: Sxx = 2, Sxy = 3 (units (ln 10)^2),
    # k = 3/2; residuals (1/6, -1/3, 1/6), SSR = 1/6; se = sqrt(SSR / 1 / Sxx) = sqrt(1/12).
    # t(0.975, 1 df) = 12.7062 (Student t table, e.g. NIST/SEMATECH e-Handbook 1.3.6.7.2).
    fit = growth_fit.growth_exponent([1, 10, 100], [1.0, 10.0, 1000.0])
    assert fit["k"] == pytest.approx(1.5)
    assert fit["se"] == pytest.approx(math.sqrt(1 / 12), abs=1e-4)
    lo, hi = fit["interval"]
    assert lo == pytest.approx(1.5 - 12.7062 * math.sqrt(1 / 12), abs=1e-3)
    assert hi == pytest.approx(1.5 + 12.7062 * math.sqrt(1 / 12), abs=1e-3)


def test_missing_values_are_dropped_and_one_size_gives_no_exponent():
    fit = growth_fit.growth_exponent([1000, 2000, 4000], [1.0, None, 4.0])
    assert fit["sizes"] == [1000, 4000] and fit["k"] == pytest.approx(1.0)
    assert growth_fit.growth_exponent([1000], [3.0])["k"] is None


def test_growth_table_verdict_and_failed_sizes():
    per = {"1000": size(1.0, series=dict(seconds=2.0), report=dict(seconds=4.0)),
           "4000": size(4.0, series=dict(seconds=8.0),      # k = 1
                        report=dict(seconds=32.0))}          # k = ln 8 / ln 4 = 1.5
    per["4000"]["analyses"]["compare"] = {"seconds": 9.0, "exit_code": -9, "timed_out": True}
    t = growth_fit.growth_table(per)
    assert t["analyses.series"]["time"]["k"] == pytest.approx(1.0)
    assert t["analyses.series"]["verdict"] == "meets"
    assert t["analyses.report"]["time"]["k"] == pytest.approx(1.5)
    assert t["analyses.report"]["verdict"] == "MISSES"
    assert t["analyses.compare"]["failed_at"] == [4000]
    assert t["analyses.compare"]["verdict"] == "not measured"
    assert "verdict" not in t["git_raw"]


# ---- same-run ratios and targets -------------------------------------------------------------

def test_ratios_are_over_the_same_run_baseline():
    f = figures.figures(size(10.0, series=dict(seconds=25.0)))
    assert f["analyses.series"]["ratio"] == pytest.approx(2.5)
    assert f["analyses.series"]["baseline"] == "git_raw"


def test_target_verdicts():
    res = size(10.0, compare=dict(seconds=10.0), compare_all=dict(seconds=25.0),
               report=dict(seconds=59.0, peak_rss_mib=2100.0), series=dict(seconds=21.0))
    rows = {(r["figure"], r["measure"]): r for r in figures.target_rows(res)}
    assert rows[("analyses.compare_all", "time over compare")]["value"] == pytest.approx(2.5)
    assert rows[("analyses.compare_all", "time over compare")]["verdict"] == "MISSES"
    assert rows[("analyses.report", "seconds")]["verdict"] == "meets"            # 59 <= 60
    assert rows[("analyses.report", "peak RSS with children")]["verdict"] == "MISSES"  # > 2048
    assert rows[("analyses.series", "seconds")]["verdict"] == "MISSES"           # 21 > 20
    assert rows[("analyses.compare", "peak RSS with children")]["verdict"] == "meets"


# ---- regression gate -------------------------------------------------------------------------

def status(rows, fig, measure="time ratio"):
    return next(r for r in rows if r["figure"] == fig and r["measure"] == measure)


def test_exactly_25_percent_passes_and_more_fails():
    base = size(10.0, series=dict(seconds=20.0), changes=dict(seconds=20.0))   # ratios 2.0
    now = size(10.0, series=dict(seconds=25.0), changes=dict(seconds=25.2))    # 2.5, 2.52
    rows = gate.compare(now, base)
    assert status(rows, "analyses.series")["status"] == "ok"
    assert status(rows, "analyses.series")["change"] == pytest.approx(0.25)
    assert status(rows, "analyses.changes")["status"] == "REGRESSED"
    assert status(rows, "analyses.changes")["change"] == pytest.approx(0.26)


def test_a_slower_machine_is_not_a_regression():
    base = size(10.0, series=dict(seconds=20.0))
    now = size(20.0, series=dict(seconds=50.0))      # seconds +150%, ratio 2.0 -> 2.5 (+25%)
    assert status(gate.compare(now, base), "analyses.series")["status"] == "ok"


def test_memory_regression_of_the_procmetrics_process():
    base = size(10.0, series=dict(seconds=20.0, peak_rss_main_mib=100.0))
    now = size(10.0, series=dict(seconds=20.0, peak_rss_main_mib=130.0))
    row = status(gate.compare(now, base), "analyses.series", "peak RSS, procmetrics alone")
    assert row["status"] == "REGRESSED" and row["change"] == pytest.approx(0.30)


def test_memory_moved_to_a_second_process_is_still_gated():
    """An analysis that moves work into a child keeps its memory in the summed figure;
    mining's children are git, whose memory the gate leaves out."""
    base = size(10.0, report=dict(seconds=20.0, peak_rss_main_mib=100.0, peak_rss_mib=100.0))
    now = size(10.0, report=dict(seconds=20.0, peak_rss_main_mib=80.0, peak_rss_mib=140.0))
    rows = gate.compare(now, base)
    assert status(rows, "analyses.report", "peak RSS, procmetrics alone")["status"] == "ok"
    row = status(rows, "analyses.report", "peak RSS, with its children")
    assert row["status"] == "REGRESSED" and row["change"] == pytest.approx(0.40)
    mining = {"history": {"commits": 1000, "non_merge_commits": 1000},
              "git_raw": {"seconds": 10.0, "exit_code": 0},
              "mine_paths": {"seconds": 20.0, "exit_code": 0, "peak_rss_mib": 900.0,
                             "peak_rss_main_mib": 100.0}}
    grown = {**mining, "mine_paths": {**mining["mine_paths"], "peak_rss_mib": 2000.0}}
    measures = {r["measure"] for r in gate.compare(grown, mining) if r["figure"] == "mine_paths"}
    assert measures == {"time ratio", "peak RSS, procmetrics alone"}


def test_new_failed_and_baseline_failed_figures():
    base = size(10.0, series=dict(seconds=20.0), report=dict(seconds=600.0, exit_code=-9),
                check=dict(seconds=1.0))
    now = size(10.0, series=dict(seconds=20.0, exit_code=-9, timed_out=True),
               report=dict(seconds=50.0), compare_all=dict(seconds=30.0))
    rows = gate.compare(now, base)
    assert status(rows, "analyses.series", "run")["status"] == "FAILED"
    assert status(rows, "analyses.report")["status"] == "new"          # failed in the baseline
    assert status(rows, "analyses.compare_all")["status"] == "new"     # not in the baseline
    assert status(rows, "analyses.check", "run")["status"] == "not measured"
    result = gate.gate({"1000": now}, {"1000": (base, "base.json")})
    assert not result["passed"]
    assert result["failures"] == ["1,000 commits: analyses.series run FAILED: timed out"]


def test_sizes_without_baseline_or_with_another_history_are_new():
    base = size(10.0, series=dict(seconds=20.0))
    now = size(10.0, series=dict(seconds=90.0))
    other = {**base, "history": {**base["history"], "seed": 7}}
    assert gate.gate({"1000": now}, {})["passed"]
    g = gate.gate({"1000": now}, {"1000": (other, "other.json")})
    assert g["passed"] and "seed" in g["sizes"]["1000"]["baseline_note"]
    assert not gate.gate({"1000": now}, {"1000": (base, "base.json")})["passed"]


def test_single_size_files_of_earlier_runs_and_lookup_order():
    legacy = size(10.0, series=dict(seconds=20.0))
    multi = {"sizes": {"2000": size(5.0)}}
    assert list(gate.per_size(legacy)) == ["1000"]
    found = gate.find_baselines(["1000", "2000", "3000"], [(multi, "a"), (legacy, "b")])
    assert found["1000"][1] == "b" and found["2000"][1] == "a" and "3000" not in found


def test_report_renders_growth_targets_and_gate():
    per = {"1000": size(1.0, series=dict(seconds=2.0)), "4000": size(4.0, series=dict(seconds=8.0))}
    res = {"sizes": per, "growth": growth_fit.growth_table(per),
           "gate": gate.gate(per, {"1000": (size(1.0, series=dict(seconds=1.0)), "b.json")})}
    md = report_md.render(res)
    assert "| `series` | 2.00 | 8.00 | 1.00 |" in md
    assert "REGRESSED" in md and "Two sizes" in md


def test_quick_sizes_never_write_the_default_results_file():
    import run
    assert run.output_name([100_000, 300_000, 1_000_000], None) == "latest"
    assert run.output_name([20_000, 50_000], None) == "latest-20000-50000"
    assert run.output_name([20_000], "trial") == "trial"
    assert run.parse_args(["--sizes", "50000,20000,20000"]).sizes == [20_000, 50_000]
    assert run.parse_args(["--commits", "20000"]).sizes == [20_000]
    with pytest.raises(SystemExit):
        run.parse_args(["--sizes", "20k"])


def test_baseline_runs_before_and_after_are_pooled():
    res = size(10.0, series=dict(seconds=20.0))
    res["git_raw"].update(runs=[9.0, 10.0, 11.0], seconds=10.0)
    res["git_raw_after"] = {"seconds": 14.0, "runs": [13.0, 14.0, 15.0], "exit_code": 0}
    assert figures.baseline(res)["seconds"] == pytest.approx(12.0)    # median of 6 runs
    assert figures.baseline_spread(res) == pytest.approx(15 / 9 - 1, abs=1e-4)
    assert figures.figures(res)["analyses.series"]["ratio"] == pytest.approx(20 / 12, abs=1e-4)
    g = gate.gate({"1000": res}, {"1000": (res, "self.json")})
    assert g["passed"] and "may be load" in g["sizes"]["1000"]["noise_note"]   # 67% > 25%


# ---- merging runs ----------------------------------------------------------------------------

def test_merged_runs_fit_the_exponent_across_files_and_the_later_file_wins_a_size():
    small = {"started": "a", "machine": {"procmetrics": "x"},
             "sizes": {"1000": size(1.0, series=dict(seconds=2.0)),
                       "4000": size(4.0, series=dict(seconds=99.0))}}
    big = {"started": "b", "finished": "c", "machine": {"procmetrics": "y"},
           "sizes": {"4000": size(4.0, series=dict(seconds=8.0)),
                     "16000": size(16.0, series=dict(seconds=32.0))}}
    res = merge_runs.merge([(small, "small.json"), (big, "big.json")])
    assert sorted(res["sizes"], key=int) == ["1000", "4000", "16000"]
    assert res["sizes"]["4000"]["analyses"]["series"]["seconds"] == 8.0
    # 2, 8, 32 s at 1k, 4k, 16k commits: exactly N^1 (hand-computed), so k = 1, se = 0
    fit = res["growth"]["analyses.series"]["time"]
    assert fit["k"] == pytest.approx(1.0) and fit["se"] == pytest.approx(0.0, abs=1e-12)
    assert any("4,000 commits: taken from big.json, not small.json" in n for n in res["notes"])
    assert (res["started"], res["finished"]) == ("a", "c")
    with pytest.raises(ValueError):
        merge_runs.merge([])
