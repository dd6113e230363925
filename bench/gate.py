"""Regression gate of the benchmark: this run's figures against the committed results.

For every size of the run, each figure's same-run time ratio (see ``figures.py``)
and the peak RSS of the procmetrics process alone are compared with the same
figure of the committed results for that size; for the analysis commands also the
peak RSS summed with their children (their own second process, see
``procmetrics/background.py``: work moved there must not leave the gate's view;
mining's children are git, whose memory is not procmetrics'). A figure fails the gate when it
is more than ``tolerance`` (default 25%) above the committed value, or when its
command failed or timed out in this run. A figure (or size) the committed results
do not have is "new", not a failure; so is a size whose committed history was
built with other generator parameters (the figures would not be like for like).

    python bench/gate.py bench/results/latest-20000-50000.json   # against the committed results
    python bench/gate.py /tmp/run.json --baseline bench/results/latest.json
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
from pathlib import Path

import figures as figmod  # bench/figures.py

TOLERANCE = 0.25
MEASURES = (("ratio", "time ratio"), ("peak_rss_main_mib", "peak RSS, procmetrics alone"),
            ("peak_rss_mib", "peak RSS, with its children"))
#: measures gated only for the analysis commands (``analyses.<command>``)
ANALYSIS_ONLY = {"peak_rss_mib"}
# generator parameters that must agree; missing ones take the value earlier generators used
HISTORY_KEYS = {"commits": None, "extra": None, "files": 58_000, "dirs": 600,
                "maintainers": 3000, "people": 4000, "seed": 20261201,
                "generator_version": 1, "fix_distance": 3000.0, "years": 20.0}


def per_size(data: dict) -> dict[str, dict]:
    """Results by size: the ``sizes`` of a multi-size file, or a single-size file of older runs."""
    if "sizes" in data:
        return dict(data["sizes"])
    h = data.get("history") or {}
    n = h.get("non_merge_commits", h.get("commits"))
    return {str(n): data} if n else {}


def history_differs(current: dict, baseline: dict) -> list[str]:
    """Generator parameters in which the two histories differ (empty: like for like)."""
    a, b = current.get("history") or {}, baseline.get("history") or {}
    return [f"{k}: {b.get(k, d)} -> {a.get(k, d)}" for k, d in HISTORY_KEYS.items()
            if a.get(k, d) != b.get(k, d)]


def compare(current: dict, baseline: dict | None,
            tolerance: float = TOLERANCE) -> list[dict[str, object]]:
    """Rows comparing one size's figures with the baseline's (same size).

    Status per row: ``ok``, ``REGRESSED`` (current > baseline × (1 + tolerance)),
    ``FAILED`` (the command failed or timed out now), ``new`` (no usable baseline
    figure: absent, failed there, or not recorded) or ``not measured`` (in the
    baseline only). ``change`` is current / baseline − 1.
    """
    cur = {k: v for k, v in figmod.figures(current).items() if not k.startswith("git_")}
    base = ({k: v for k, v in figmod.figures(baseline).items() if not k.startswith("git_")}
            if baseline is not None else {})
    rows: list[dict[str, object]] = []
    for fig in sorted(cur):
        f = cur[fig]
        if not f["ok"]:
            rows.append({"figure": fig, "measure": "run", "current": None, "baseline": None,
                         "change": None, "status": "FAILED",
                         "detail": "timed out" if f["timed_out"] else f"exit code {f['exit_code']}"})
            continue
        b = base.get(fig)
        for key, label in MEASURES:
            now = f.get(key)
            if now is None or (key in ANALYSIS_ONLY and not fig.startswith("analyses.")):
                continue
            then = b.get(key) if b is not None and b["ok"] else None
            row = {"figure": fig, "measure": label, "current": now, "baseline": then,
                   "change": None, "status": "new", "detail": ""}
            if b is None:
                row["detail"] = "not in the baseline"
            elif not b["ok"]:
                row["detail"] = "failed in the baseline"
            elif not then:
                row["detail"] = "not recorded in the baseline"
            else:
                row["change"] = round(now / then - 1, 4)
                row["status"] = "REGRESSED" if now > then * (1 + tolerance) else "ok"
            rows.append(row)
    for fig in sorted(set(base) - set(cur)):
        rows.append({"figure": fig, "measure": "run", "current": None, "baseline": None,
                     "change": None, "status": "not measured", "detail": "in the baseline only"})
    return rows


def gate(sizes: dict[str, dict], baselines: dict[str, tuple[dict, str]],
         tolerance: float = TOLERANCE) -> dict[str, object]:
    """The gate over every size of a run; ``passed`` is false when any row regressed or failed."""
    out: dict[str, object] = {"tolerance": tolerance, "sizes": {}, "failures": []}
    for n in sorted(sizes, key=int):
        found = baselines.get(n)
        entry: dict[str, object] = {"baseline": found[1] if found else None}
        differs = history_differs(sizes[n], found[0]) if found else []
        if differs:
            entry["baseline_note"] = "history built differently: " + "; ".join(differs)
        rows = compare(sizes[n], found[0] if found and not differs else None, tolerance)
        entry["rows"] = rows
        spreads = {"this run": figmod.baseline_spread(sizes[n]),
                   "committed": figmod.baseline_spread(found[0]) if found else None}
        noisy = {k: v for k, v in spreads.items() if v is not None and v > tolerance}
        if noisy:
            entry["noise_note"] = ("git log --raw varied by " + ", ".join(
                f"{v:.0%} ({k})" for k, v in noisy.items()) + " between its runs, more than the "
                "tolerance: a failure here may be load on the machine, not procmetrics")
        out["sizes"][n] = entry
        for r in rows:
            if r["status"] in ("REGRESSED", "FAILED"):
                what = (f"{r['detail']}" if r["status"] == "FAILED"
                        else f"{r['baseline']:g} -> {r['current']:g} ({r['change']:+.0%})")
                out["failures"].append(f"{int(n):,} commits: {r['figure']} {r['measure']} "
                                       f"{r['status']}: {what}")
    out["passed"] = not out["failures"]
    return out


def read_committed(path: Path) -> tuple[dict, str] | None:
    """The committed (git HEAD) version of a results file.

    Outside a git checkout (an unpacked release) the file on disk stands in; inside
    one, a file never committed is no baseline (a run that regressed and overwrote
    it must not become the reference by itself).
    """
    if not path.parent.is_dir():
        return None
    r = subprocess.run(["git", "-C", str(path.parent), "show", f"HEAD:./{path.name}"],
                       capture_output=True, text=True)
    if r.returncode == 0:
        return json.loads(r.stdout), f"{path.name} (committed, HEAD)"
    inside = subprocess.run(["git", "-C", str(path.parent), "rev-parse", "--is-inside-work-tree"],
                            capture_output=True, text=True).returncode == 0
    if not inside and path.exists():
        return json.loads(path.read_text()), f"{path.name} (file on disk, no git checkout)"
    return None


def find_baselines(sizes: list[str], candidates: list[tuple[dict, str]]
                   ) -> dict[str, tuple[dict, str]]:
    """For each size, the first candidate file holding results for it."""
    found: dict[str, tuple[dict, str]] = {}
    for n in sizes:
        for data, source in candidates:
            res = per_size(data).get(n)
            if res is not None:
                found[n] = (res, source)
                break
    return found


def default_candidates(results_dir: Path, name: str, sizes: list[str]) -> list[tuple[dict, str]]:
    """Committed results to compare with: this run's own file, the file of the same sizes
    (``latest-<size>-<size>.json``), ``latest.json``, then ``latest-<N>.json``."""
    same = "latest-" + "-".join(str(n) for n in sorted(sizes, key=int))
    paths = [results_dir / f"{name}.json", results_dir / f"{same}.json",
             results_dir / "latest.json"]
    paths += [results_dir / f"latest-{n}.json" for n in sizes]
    seen, out = set(), []
    for p in paths:
        if p not in seen:
            seen.add(p)
            got = read_committed(p)
            if got is not None:
                out.append(got)
    return out


def summary(result: dict) -> list[str]:
    """Plain-text lines: the verdict, the baseline of each size, the failures."""
    lines = [f"regression gate (tolerance +{result['tolerance']:.0%} on same-run ratios and "
             f"peak RSS): {'passed' if result['passed'] else 'FAILED'}"]
    for n, e in result["sizes"].items():
        counts: dict[str, int] = {}
        for r in e["rows"]:
            counts[r["status"]] = counts.get(r["status"], 0) + 1
        base = e["baseline"] or "no committed results for this size"
        note = f"; {e['baseline_note']}" if e.get("baseline_note") else ""
        lines.append(f"  {int(n):,} commits against {base}{note}: "
                     + ", ".join(f"{v} {k}" for k, v in sorted(counts.items())))
        if e.get("noise_note"):
            lines.append(f"    note: {e['noise_note']}")
    lines += [f"  {f}" for f in result["failures"]]
    return lines


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("current", type=Path, help="results JSON of a run")
    ap.add_argument("--baseline", type=Path, action="append", default=[],
                    help="results JSON to compare with (repeatable; default: the committed "
                         "version of CURRENT, latest-<sizes>.json, latest.json, latest-<N>.json beside it)")
    ap.add_argument("--tolerance", type=float, default=TOLERANCE)
    a = ap.parse_args(argv)
    sizes = per_size(json.loads(a.current.read_text()))
    if a.baseline:
        cands = [(json.loads(p.read_text()), str(p)) for p in a.baseline]
    else:
        cands = default_candidates(a.current.parent, a.current.stem, list(sizes))
    result = gate(sizes, find_baselines(list(sizes), cands), a.tolerance)
    print("\n".join(summary(result)))
    return 0 if result["passed"] else 1


if __name__ == "__main__":
    sys.exit(main())
