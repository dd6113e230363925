"""Render bench/run.py results as a Markdown page: growth across sizes, figures and
same-run ratios per size, the issue's targets as verdicts, and the regression gate."""
from __future__ import annotations

import figures as figmod  # bench/figures.py
import gate as gatemod  # bench/gate.py


def _fmt(x: object, unit: str = "") -> str:
    if x is None:
        return "–"
    if isinstance(x, float):
        return f"{x:,.2f}{unit}"
    if isinstance(x, int):
        return f"{x:,}{unit}"
    return f"{x}{unit}"


def _load(res: dict, key: str) -> str:
    return _fmt(tuple(round(x, 2) for x in res.get(key, ())))


def _k(fit: dict) -> str:
    if fit.get("k") is None:
        return "–"
    iv = fit.get("interval")
    return f"{fit['k']:.2f}" + (f" [{iv[0]:.2f}, {iv[1]:.2f}]" if iv else "")


def _label(fig: str) -> str:
    return {"git_raw": "`git log --raw --no-merges` (baseline)",
            "git_numstat": "`git log --numstat --no-merges` (baseline)",
            "mine_paths": "mining, paths only", "mine_lines": "mining, line counts",
            "incremental": "incremental mining, 1,000 commits",
            "analyses.compare_all": "`compare --all-subsystems`"}.get(
        fig, f"`{fig.split('.', 1)[1]}`" if fig.startswith("analyses.") else fig)


def growth_lines(res: dict) -> list[str]:
    """The growth table (also printed on stderr at the end of a run)."""
    g = res.get("growth") or {}
    sizes = sorted(res.get("sizes", {}), key=int)
    if not g:
        return ["No growth exponents: no size finished."]
    some = next(iter(g.values()))["time"]
    out = ["| figure | " + " | ".join(f"s at {int(n):,}" for n in sizes)
           + " | k, time | k, peak RSS alone | k, peak RSS with children | k ≤ 1.1 |",
           "|---|" + "---|" * len(sizes) + "---|---|---|---|"]
    for fig, row in g.items():
        secs = " | ".join(_fmt(row["seconds"].get(n)) if n in row["seconds"] else
                          ("failed" if int(n) in row["failed_at"] else "–") for n in sizes)
        out.append(f"| {_label(fig)} | {secs} | {_k(row['time'])} | {_k(row['memory_main'])} | "
                   f"{_k(row['memory_tree'])} | {row.get('verdict', '–')} |")
    out += ["", f"Exponent k in value ∝ N^k, {some['method']}; sizes: "
            f"{', '.join(f'{int(n):,}' for n in sizes)} non-merge commits. "
            + ("Two sizes: each k is the line through two points (no interval, no check "
               "of the power law). " if len(sizes) == 2 else
               "Brackets: 95% t-interval (n − 2 degrees of freedom). " if len(sizes) > 2 else "")
            + "Fixed costs (start-up, imports) flatten small sizes, so k from small "
              "histories understates the growth; the verdict uses the point estimate."]
    return out


def _size_section(n: str, res: dict) -> list[str]:
    h = res.get("history", {})
    figs = figmod.figures(res)
    verdicts = {(r["figure"], r["measure"]): r for r in figmod.target_rows(res)}

    def v(fig: str, measure: str) -> str:
        r = verdicts.get((fig, measure))
        return f"{r['target']}: {r['verdict']}" if r else "–"

    out = ["", f"## {int(n):,} commits", "",
           f"{_fmt(h.get('commits'))} non-merge commits on `main` (+ merges, + "
           f"{_fmt(h.get('extra'))} on `next`), {_fmt(h.get('files'))} files in "
           f"{_fmt(h.get('dirs'))} folders, {_fmt(h.get('maintainers'))} MAINTAINERS entries, "
           f"seed {h.get('seed')}, generator version {h.get('generator_version', 1)}; commits "
           f"stored (merges included): {_fmt(res.get('stored_commits'))}. Load average at "
           f"start {_load(res, 'load_avg_start')}, at end {_load(res, 'load_avg_end')}.", "",
           "| figure | seconds | baseline (same run) | ratio | peak RSS alone | with children "
           "| exit | time target | memory target |", "|---|---|---|---|---|---|---|---|---|"]
    for fig, f in figs.items():
        if fig.startswith("git_"):
            base = "–"
        else:
            base = _label(f["baseline"]).replace(" (baseline)", "")
        tgt_t = (v(fig, "seconds") if fig.startswith("analyses.") or fig == "incremental"
                 else v(fig, "time over git log"))
        out.append(f"| {_label(fig)} | {_fmt(f['seconds'])} | {base} | "
                   f"{_fmt(f['ratio'], '×') if not fig.startswith('git_') else '–'} | "
                   f"{_fmt(f['peak_rss_main_mib'], ' MiB')} | {_fmt(f['peak_rss_mib'], ' MiB')} | "
                   f"{'timed out' if f['timed_out'] else f['exit_code']} | {tgt_t} | "
                   f"{v(fig, 'peak RSS with children')} |")
    raw = figmod.baseline(res)
    if raw and raw.get("runs"):
        after = " (before mining and after the analyses)" if "git_raw_after" in res else ""
        out += ["", f"`git log --raw --no-merges` runs{after}: "
                    + ", ".join(f"{r:.2f}" for r in raw["runs"]) + f" s; median {raw['seconds']:.2f} s, "
                    f"max/min − 1 = {figmod.baseline_spread(res) or 0:.0%}."]
    ca = verdicts.get(("analyses.compare_all", "time over compare"))
    if ca:
        out += ["", f"`compare --all-subsystems` over `compare`: {_fmt(ca['value'], '×')} "
                    f"(target {ca['target']}: {ca['verdict']})."]
    out.append("")
    for key, label in (("store_bytes_per_commit_paths", "paths only"),
                       ("store_bytes_per_commit_lines", "line counts")):
        if key in res:
            out.append(f"Store size per commit, {label}: {_fmt(res[key], ' B')}.")
    an = res.get("analyses") or {}
    if an.get("policy_date"):
        out += ["", f"Analyses on the {'line-count' if 'lines' in an.get('store', 'lines') else 'paths-only'} "
                    f"store; policy date "
                    f"{an['policy_date']} ({an.get('policy_date_source', 'prefix ref')})."]
    mem = res.get("memory")
    if mem:
        out += ["", "Peak memory of mining as this history grows (paths only):", "",
                "| commits on the mined ref | procmetrics + git | procmetrics alone | seconds |",
                "|---|---|---|---|"]
        for k in sorted(mem, key=int):
            out.append(f"| {int(k):,} | {_fmt(mem[k].get('peak_rss_mib'), ' MiB')} | "
                       f"{_fmt(mem[k].get('peak_rss_main_mib'), ' MiB')} | "
                       f"{_fmt(mem[k].get('seconds'), ' s')} |")
    failed = [(k, m) for k, m in an.items() if isinstance(m, dict) and m.get("exit_code")]
    if failed:
        out += ["", "Failed analysis commands (last line of their error output):", ""]
        for k, m in failed:
            last = (m.get("stderr") or "").strip().splitlines()
            out.append(f"- {k}: exit code {m.get('exit_code')}: {last[-1] if last else ''}")
    return out


def _gate_section(g: dict) -> list[str]:
    out = ["", "## Regression gate", ""] + [ln.strip() for ln in gatemod.summary(g)[:1]]
    if not g.get("enforced", True):
        out[-1] += " (not enforced: `--no-gate`)"
    for n, e in g["sizes"].items():
        out += ["", f"{int(n):,} commits, against {e['baseline'] or 'no committed results'}"
                + (f" ({e['baseline_note']})" if e.get("baseline_note") else "")
                + (f". Note: {e['noise_note']}" if e.get("noise_note") else "") + ":", "",
                "| figure | measure | committed | this run | change | status |",
                "|---|---|---|---|---|---|"]
        for r in e["rows"]:
            ch = f"{r['change']:+.1%}" if r["change"] is not None else (r["detail"] or "–")
            out.append(f"| {_label(r['figure'])} | {r['measure']} | {_fmt(r['baseline'])} | "
                       f"{_fmt(r['current'])} | {ch} | {r['status']} |")
    if g["failures"]:
        out += ["", "Failures:", ""] + [f"- {f}" for f in g["failures"]]
    return out


def render(res: dict) -> str:
    if "sizes" not in res:       # a single-size file of an earlier harness
        res = {**res, "sizes": gatemod.per_size(res)}
    m = res.get("machine", {})
    sizes = sorted(res["sizes"], key=int)
    out = ["# procmetrics benchmark", "",
           f"Run {res.get('started', '?')} – {res.get('finished', '?')}; sizes "
           f"{', '.join(f'{int(n):,}' for n in sizes)} non-merge commits; load average at "
           f"start {_load(res, 'load_avg_start')}, at end {_load(res, 'load_avg_end')} (other "
           "work on the machine slows both sides of a ratio, not always equally).", "",
           "Ratios: procmetrics' wall time (whole process) over a `git log` baseline timed in "
           "the same run on the same history (median of repeats). Targets are the issue's, "
           "set for 1,000,000 commits; at smaller sizes their verdicts say little.", "",
           "## Machine", "", "| item | value |", "|---|---|"]
    for k in ("cpu_model", "logical_cpus", "physical_cores", "ram_gib", "os", "git", "python",
              "procmetrics", "sqlalchemy", "sqlite"):
        out.append(f"| {k} | {_fmt(m.get(k))} |")
    if len(sizes) > 1 or res.get("growth"):
        out += ["", "## Growth across sizes", ""] + growth_lines(res)
    for n in sizes:
        out += _size_section(n, res["sizes"][n])
    pyd = res.get("pydriller")
    if pyd:
        out += ["", "## pydriller", "",
                f"A pydriller loop (`modified_files`, line counts) on {_fmt(pyd.get('commits'))} "
                f"commits took {_fmt(pyd['pydriller'].get('seconds'), ' s')}; `procmetrics mine` "
                f"with line counts {_fmt(pyd['procmetrics_lines'].get('seconds'), ' s')} "
                f"(procmetrics {_fmt(pyd.get('ratio'), '×')} faster)."]
    if res.get("gate"):
        out += _gate_section(res["gate"])
    if res.get("notes"):
        out += ["", "## Notes", ""] + [f"- {n}" for n in res["notes"]]
    return "\n".join(out) + "\n"
