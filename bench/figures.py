"""The figures of one benchmark size: same-run ratios and per-command target verdicts.

Pure functions over the result dictionary ``bench/run.py`` writes for one history
size (also the single-size files of earlier harness versions). Every time is
given as a ratio to a baseline timed in the same run on the same history, so
runs on machines of different speed or load can be compared:

* mining, paths only: over ``git log --raw --no-merges main``;
* mining with line counts: over ``git log --numstat --no-merges main``;
* incremental mining and every analysis command: over ``git log --raw --no-merges main``.

The ``git log --raw`` baseline is timed before mining and again after the analyses;
its runs are pooled (``baseline``) and their spread is reported (``baseline_spread``).
"""
from __future__ import annotations

import statistics

MIB_PER_GIB = 1024

# Targets of issue 15 (set for the 1,000,000-commit history).
ANALYSIS_S, ANALYSIS_MIB = 20.0, 1.5 * MIB_PER_GIB
REPORT_S, REPORT_MIB = 60.0, 2.0 * MIB_PER_GIB
COMPARE_ALL_OVER_COMPARE = 2.0
INCREMENTAL_S = 5.0
MINING_RATIO, MINING_MIB = 1.3, 1.0 * MIB_PER_GIB
GROWTH_K = 1.1


def _entry(m: dict, baseline: dict | None, baseline_name: str) -> dict[str, object]:
    ok = m.get("exit_code") == 0
    base = (baseline or {}).get("seconds")
    ratio = (round(m["seconds"] / base, 4)
             if ok and base and baseline.get("exit_code", 0) == 0 and "seconds" in m else None)
    return {"seconds": m.get("seconds"), "ratio": ratio, "baseline": baseline_name,
            "peak_rss_mib": m.get("peak_rss_mib"), "peak_rss_main_mib": m.get("peak_rss_main_mib"),
            "exit_code": m.get("exit_code"), "ok": ok, "timed_out": bool(m.get("timed_out"))}


def baseline(res: dict, key: str = "git_raw") -> dict | None:
    """A ``git log`` baseline of one size, with its repeat taken after the analyses if any.

    ``<key>_after`` (timed again at the end of the size) is pooled with ``<key>``:
    the seconds are the median of all runs, so load that changed during the size's
    measurements weighs on the baseline as on the figures.
    """
    first, after = res.get(key), res.get(f"{key}_after")
    if not isinstance(first, dict) or not isinstance(after, dict):
        return first
    runs = list(first.get("runs", [])) + list(after.get("runs", []))
    return {**first, "seconds": round(statistics.median(runs), 3), "runs": runs,
            "exit_code": max(first.get("exit_code", 0), after.get("exit_code", 0))}


def baseline_spread(res: dict, key: str = "git_raw") -> float | None:
    """max / min − 1 of the baseline's runs at one size (None with fewer than two runs)."""
    runs = [r for r in (baseline(res, key) or {}).get("runs", []) if r]
    return round(max(runs) / min(runs) - 1, 4) if len(runs) >= 2 else None


def figures(res: dict) -> dict[str, dict[str, object]]:
    """Every timed figure of one size: seconds, same-run ratio, peak RSS, exit code.

    Keys: ``git_raw`` and ``git_numstat`` (the baselines, ratio 1), ``mine_paths``,
    ``mine_lines``, ``incremental``, ``analyses.<command>``. Commands skipped
    (not available in that procmetrics) are left out; failed or timed-out ones
    are kept with ``ok`` false and no ratio.
    """
    raw, numstat = baseline(res, "git_raw"), res.get("git_numstat")
    out: dict[str, dict[str, object]] = {}
    for key, base, name in (("git_raw", raw, "git_raw"), ("git_numstat", numstat, "git_numstat"),
                            ("mine_paths", raw, "git_raw"), ("mine_lines", numstat, "git_numstat"),
                            ("incremental", raw, "git_raw")):
        m = raw if key == "git_raw" else res.get(key)
        if isinstance(m, dict):
            out[key] = _entry(m, base, name)
    for cmd, m in (res.get("analyses") or {}).items():
        if isinstance(m, dict) and "skipped" not in m:
            out[f"analyses.{cmd}"] = _entry(m, raw, "git_raw")
    return out


def _verdict(value: float | None, limit: float) -> str:
    if value is None:
        return "not measured"
    return "meets" if value <= limit else "MISSES"


def target_rows(res: dict) -> list[dict[str, object]]:
    """The issue's per-command targets as verdicts for one size.

    Memory verdicts use the peak RSS of the procmetrics process with its children
    (the larger figure). A failed or timed-out command gets the verdict "FAILED".
    Rows: ``figure``, ``measure``, ``value``, ``unit``, ``target``, ``verdict``.
    """
    figs = figures(res)
    rows: list[dict[str, object]] = []

    def add(fig: str, measure: str, value, unit: str, op: str, limit: float) -> None:
        f = figs.get(fig)
        failed = f is not None and not f["ok"]
        rows.append({"figure": fig, "measure": measure, "value": None if failed else value,
                     "unit": unit, "target": f"{op} {limit:g}{unit}",
                     "verdict": "FAILED" if failed else _verdict(value, limit)})

    for fig, f in figs.items():
        if not fig.startswith("analyses."):
            continue
        s_lim, m_lim = ((REPORT_S, REPORT_MIB) if fig == "analyses.report"
                        else (ANALYSIS_S, ANALYSIS_MIB))
        add(fig, "seconds", f["seconds"], " s", "≤", s_lim)
        add(fig, "peak RSS with children", f["peak_rss_mib"], " MiB", "≤", m_lim)
    one, every = figs.get("analyses.compare"), figs.get("analyses.compare_all")
    if one and every:
        value = (round(every["seconds"] / one["seconds"], 3)
                 if one["ok"] and every["ok"] and one["seconds"] else None)
        rows.append({"figure": "analyses.compare_all", "measure": "time over compare",
                     "value": value, "unit": "×", "target": f"≤ {COMPARE_ALL_OVER_COMPARE:g}×",
                     "verdict": ("FAILED" if not (one["ok"] and every["ok"])
                                 else _verdict(value, COMPARE_ALL_OVER_COMPARE))})
    if "incremental" in figs:
        add("incremental", "seconds", figs["incremental"]["seconds"], " s", "≤", INCREMENTAL_S)
    for fig in ("mine_paths", "mine_lines"):
        if fig in figs:
            add(fig, "time over git log", figs[fig]["ratio"], "×", "≤", MINING_RATIO)
            add(fig, "peak RSS with children", figs[fig]["peak_rss_mib"], " MiB", "≤", MINING_MIB)
    return rows
