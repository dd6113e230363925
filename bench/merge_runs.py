"""Merge the results files of several benchmark runs into one page.

A run over 100,000, 300,000 and 1,000,000 commits takes over an hour on two cores; when
the largest size is measured in a run of its own (other options, e.g. fewer repeats or a
shorter ``--analysis-timeout``), this puts the sizes side by side again: every size is
taken whole from the file that holds it (a size found in two files: the later file wins,
and the page says so), the growth exponents are fitted anew across all sizes, the gate
is run against the committed results as ``run.py`` would, and each run's start, revision
and options are listed in the notes. Ratios stay within their own run (each size carries
its own baselines), so merging never divides one run's time by another run's baseline.

    python bench/merge_runs.py --name latest results/a.json results/b.json
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import gate  # bench/gate.py
import growth_fit  # bench/growth_fit.py
import report_md  # bench/report_md.py

HERE = Path(__file__).resolve().parent


def merge(runs: list[tuple[dict, str]]) -> dict:
    """One results dict from ``(results, label)`` pairs, in order (later wins a size)."""
    if not runs:
        raise ValueError("no results files to merge")
    sizes: dict[str, dict] = {}
    source: dict[str, str] = {}
    notes: list[str] = []
    for data, label in runs:
        m = data.get("machine", {})
        notes.append(f"{label}: started {data.get('started', '?')}, finished "
                     f"{data.get('finished', '?')}, procmetrics {m.get('procmetrics', '?')}, "
                     f"sizes {', '.join(f'{int(n):,}' for n in sorted(gate.per_size(data), key=int))}")
        notes += [f"{label}: {n}" for n in data.get("notes", [])]
        for n, res in gate.per_size(data).items():
            if n in sizes:
                notes.append(f"{int(n):,} commits: taken from {label}, not {source[n]}")
            sizes[n], source[n] = res, label
    first, last = runs[0][0], runs[-1][0]
    machines = {json.dumps({k: v for k, v in d.get("machine", {}).items()
                            if k != "procmetrics"}, sort_keys=True) for d, _ in runs}
    if len(machines) > 1:
        notes.append("the runs name different machines or tool versions: compare the "
                     "ratios of a size, not seconds across sizes")
    ends = {"started": first.get("started"), "finished": last.get("finished"),
            "load_avg_start": first.get("load_avg_start"),
            "load_avg_end": last.get("load_avg_end")}
    out = {"machine": first.get("machine", {}), "sizes": sizes,
           **{k: v for k, v in ends.items() if v is not None},    # a stopped run has no end
           "growth": growth_fit.growth_table(sizes),
           "notes": notes + [f"{int(n):,} commits from {source[n]}"
                             for n in sorted(sizes, key=int)]}
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("files", type=Path, nargs="+", help="results files (.json), oldest first")
    ap.add_argument("--name", required=True, help="output name without suffix")
    ap.add_argument("--out", type=Path, default=HERE / "results", help="results folder")
    ap.add_argument("--tolerance", type=float, default=gate.TOLERANCE)
    args = ap.parse_args(argv)
    runs = [(json.loads(p.read_text()), p.name) for p in args.files]
    res = merge(runs)
    keys = sorted(res["sizes"], key=int)
    baselines = gate.find_baselines(keys, gate.default_candidates(args.out, args.name, keys))
    res["gate"] = gate.gate(res["sizes"], baselines, args.tolerance)
    res["gate"]["enforced"] = False
    args.out.mkdir(parents=True, exist_ok=True)
    (args.out / f"{args.name}.json").write_text(json.dumps(res, indent=2, sort_keys=True) + "\n")
    (args.out / f"{args.name}.md").write_text(report_md.render(res))
    print("\n".join(gate.summary(res["gate"])), file=sys.stderr)
    print(args.out / f"{args.name}.md")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
