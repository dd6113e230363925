"""Render bench/run.py results as a Markdown page (machine, figures as ratios and medians)."""
from __future__ import annotations


def _verdict(value: float | None, target: float) -> str:
    if value is None:
        return "not measured"
    return "meets target" if value <= target else "MISSES target"


def _fmt(x: object, unit: str = "") -> str:
    if x is None:
        return "–"
    if isinstance(x, float):
        return f"{x:,.2f}{unit}"
    if isinstance(x, int):
        return f"{x:,}{unit}"
    return f"{x}{unit}"


def render(res: dict) -> str:
    m, t = res.get("machine", {}), res.get("targets", {})
    h = res.get("history", {})
    out = ["# procmetrics benchmark", "",
           f"Run {res.get('started', '?')} – {res.get('finished', '?')}; load average at start "
           f"{_fmt(tuple(round(x, 2) for x in res.get('load_avg_start', ())))}, at end "
           f"{_fmt(tuple(round(x, 2) for x in res.get('load_avg_end', ())))} "
           "(other work on the machine slows both sides of a ratio, not always equally).", "",
           "## Machine", "",
           "| item | value |", "|---|---|"]
    for k in ("cpu_model", "logical_cpus", "physical_cores", "ram_gib", "os", "git", "python",
              "procmetrics", "sqlalchemy", "sqlite"):
        out.append(f"| {k} | {_fmt(m.get(k))} |")
    out += ["", "## History (synthetic, `bench/generate.py`)", "",
            f"{_fmt(h.get('commits'))} non-merge commits on `main` (+ merges, + "
            f"{_fmt(h.get('extra'))} on `next`), {_fmt(h.get('files'))} files in "
            f"{_fmt(h.get('dirs'))} folders, {_fmt(h.get('maintainers'))} MAINTAINERS entries, "
            f"seed {h.get('seed')}; commits stored (merges included): "
            f"{_fmt(res.get('stored_commits'))}.", "",
            "## Figures", "",
            "Ratios are procmetrics' wall time over git's on the same history in the same run "
            "(whole process: start-up, parsing, writing SQLite, indexes, fix resolution, "
            "subsystem mapping). git baselines are medians of repeated runs.", "",
            "| measure | procmetrics | baseline | ratio / value | target | verdict |",
            "|---|---|---|---|---|---|"]
    raw, mp = res.get("git_raw", {}), res.get("mine_paths", {})
    if mp:
        out.append(f"| full mining, paths only | {_fmt(mp.get('seconds'), ' s')} | "
                   f"`git log --raw --no-merges` {_fmt(raw.get('seconds'), ' s')} | "
                   f"{_fmt(res.get('paths_ratio'), '×')} | ≤ {t.get('paths_ratio')}× | "
                   f"{_verdict(res.get('paths_ratio'), t.get('paths_ratio', 0))} |")
    if "mine_lines" in res:
        ml, ns = res["mine_lines"], res.get("git_numstat", {})
        out.append(f"| full mining, line counts | {_fmt(ml.get('seconds'), ' s')} | "
                   f"`git log --numstat --no-merges` {_fmt(ns.get('seconds'), ' s')} | "
                   f"{_fmt(res.get('lines_ratio'), '×')} | ≤ {t.get('lines_ratio')}× | "
                   f"{_verdict(res.get('lines_ratio'), t.get('lines_ratio', 0))} |")
    if mp:
        peak = max([mp.get("peak_rss_mib", 0)] + [v.get("peak_rss_mib", 0) for v in
                                                  res.get("memory", {}).values()])
        out.append(f"| peak memory of mining (procmetrics + git, RSS) | {_fmt(peak, ' MiB')} "
                   f"| – | – | ≤ {t.get('peak_rss_mib')} MiB | "
                   f"{_verdict(peak, t.get('peak_rss_mib', 0))} |")
    inc = res.get("incremental")
    if inc:
        out.append(f"| incremental mining of {_fmt(inc.get('new_commits'))} new commits "
                   f"(median of {len(inc.get('runs', []))}) | {_fmt(inc.get('seconds'), ' s')} | "
                   f"– | – | ≤ {t.get('incremental_s')} s | "
                   f"{_verdict(inc.get('seconds'), t.get('incremental_s', 0))} |")
    an = res.get("analyses", {})
    rep = an.get("report", {})
    if rep and "seconds" in rep:
        ok = rep.get("exit_code") == 0
        out.append(f"| full report on the mined store | {_fmt(rep.get('seconds'), ' s')} | – | "
                   f"{'' if ok else 'exit code ' + str(rep.get('exit_code'))} | "
                   f"≤ {t.get('report_s')} s | "
                   f"{_verdict(rep.get('seconds'), t.get('report_s', 0)) if ok else 'FAILED'} |")
    for key, label in (("store_bytes_per_commit_paths", "store size per commit, paths only"),
                       ("store_bytes_per_commit_lines", "store size per commit, line counts")):
        if key in res:
            out.append(f"| {label} | {_fmt(res[key], ' B')} | – | – | – | – |")
    pyd = res.get("pydriller")
    if pyd:
        out.append(f"| pydriller loop (`modified_files`, line counts) on "
                   f"{_fmt(pyd.get('commits'))} commits | "
                   f"{_fmt(pyd['procmetrics_lines'].get('seconds'), ' s')} | "
                   f"pydriller {_fmt(pyd['pydriller'].get('seconds'), ' s')} | "
                   f"procmetrics {_fmt(pyd.get('ratio'), '×')} faster | – | – |")
    mem = res.get("memory")
    if mem:
        out += ["", "### Peak memory as the history grows (paths only)", "",
                "| commits on the mined ref | peak RSS, procmetrics + git | procmetrics process "
                "alone | mining time |", "|---|---|---|---|"]
        for k in sorted(mem, key=int):
            out.append(f"| {int(k):,} | {_fmt(mem[k].get('peak_rss_mib'), ' MiB')} | "
                       f"{_fmt(mem[k].get('peak_rss_main_mib'), ' MiB')} | "
                       f"{_fmt(mem[k].get('seconds'), ' s')} |")
    if an:
        out += ["", "### Analyses on the line-count store", "",
                f"Policy date used where one is needed: {an.get('policy_date')}.", "",
                "| command | seconds | peak RSS | exit code |", "|---|---|---|---|"]
        for k, v in an.items():
            if not isinstance(v, dict):
                continue
            if "skipped" in v:
                out.append(f"| {k} | – | – | {v['skipped']} |")
            else:
                out.append(f"| {k} | {_fmt(v.get('seconds'))} | "
                           f"{_fmt(v.get('peak_rss_mib'), ' MiB')} | {v.get('exit_code')} |")
    failed = [(k, v) for k, v in an.items() if isinstance(v, dict) and v.get("exit_code")]
    if failed:
        out += ["", "Failed analysis commands (last line of their error output):", ""]
        for k, v in failed:
            last = (v.get("stderr") or "").strip().splitlines()
            out.append(f"- {k}: exit code {v.get('exit_code')}: {last[-1] if last else ''}")
    notes = res.get("notes")
    if notes:
        out += ["", "## Notes", ""] + [f"- {n}" for n in notes]
    return "\n".join(out) + "\n"
