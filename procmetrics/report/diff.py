"""Compare two report folders: verdict changes, figures that moved beyond their intervals,
changed provenance.

Reads only the folders (``report.json``, ``manifest.json``, ``tables/*.csv``);
nothing is recomputed. A number "moved beyond its interval" when the value in
one report lies outside the interval the other report gives for the same row
(same figure or table, same non-numeric key columns such as period, subsystem
and metric). Moves inside the intervals are counted, not listed: they are what
sampling noise and new data do.
"""
from __future__ import annotations

import csv
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from procmetrics.errors import ConfigError
from procmetrics.report.manifest import read_manifest

#: (value column, low column, high column) of tables and figure data with intervals
INTERVAL_COLUMNS = (("value", "ci_low", "ci_high"), ("estimate", "ci_low", "ci_high"),
                    ("level_change", "ci_low", "ci_high"), ("ratio", "low", "high"),
                    ("difference", "low", "high"), ("value", "low", "high"))
#: key columns never used to match rows (numbers, or text derived from them)
_NOT_KEYS = {"n", "numerator", "denominator", "ci_method", "p_value", "p_bh", "p_by",
             "n_before", "n_after", "share_before", "share_after", "period_end"}


@dataclass
class ReportDiff:
    a: Path
    b: Path
    verdict_changes: list[str] = field(default_factory=list)
    moved: list[str] = field(default_factory=list)
    compared: int = 0
    provenance: list[str] = field(default_factory=list)
    structure: list[str] = field(default_factory=list)

    @property
    def differs(self) -> bool:
        return bool(self.verdict_changes or self.moved)

    def to_dict(self) -> dict[str, Any]:
        return {"a": str(self.a), "b": str(self.b), "verdict_changes": self.verdict_changes,
                "moved_beyond_interval": self.moved, "interval_rows_compared": self.compared,
                "provenance_changes": self.provenance, "structure_changes": self.structure}

    def summary(self) -> str:
        lines = [f"comparing {self.a} (A) with {self.b} (B)"]
        for title, items in (("verdict changes", self.verdict_changes),
                             ("moved beyond their intervals", self.moved),
                             ("provenance changes", self.provenance),
                             ("figures and tables present in only one report", self.structure)):
            lines.append(f"{title}: {len(items) if items else 'none'}")
            lines += [f"  - {x}" for x in items]
        lines.append(f"{self.compared:,} values with intervals compared; "
                     f"{len(self.moved):,} moved beyond an interval")
        return "\n".join(lines)


def _load(folder: Path) -> tuple[dict[str, Any], dict[str, Any]]:
    folder = Path(folder)
    if not (folder / "report.json").is_file():
        raise ConfigError("not a report folder (no report.json)", path=str(folder))
    try:
        report = json.loads((folder / "report.json").read_text("utf-8"))
    except (OSError, ValueError) as exc:
        raise ConfigError(f"cannot read report.json: {exc}", path=str(folder)) from exc
    return report, read_manifest(folder / "manifest.json")


def _num(x: Any) -> float | None:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return None
    return None if math.isnan(v) else v


def _estimate(c: dict[str, Any]) -> dict[str, Any]:
    return (c.get("evidence") or {}).get("estimate") or {}


def _verdicts(a: dict[str, Any], b: dict[str, Any], out: ReportDiff) -> None:
    ca = {c["id"]: c for c in a.get("claims", [])}
    cb = {c["id"]: c for c in b.get("claims", [])}
    for cid in sorted(set(ca) | set(cb)):
        if cid not in cb:
            out.verdict_changes.append(f"claim {cid}: only in A ({ca[cid]['verdict_label']})")
            continue
        if cid not in ca:
            out.verdict_changes.append(f"claim {cid}: only in B ({cb[cid]['verdict_label']})")
            continue
        x, y = ca[cid], cb[cid]
        if x["verdict"] != y["verdict"]:
            out.verdict_changes.append(f"claim {cid}: {x['verdict_label']} -> "
                                       f"{y['verdict_label']}")
        ea, eb = _estimate(x), _estimate(y)
        _compare_row(f"claim {cid}: {ea.get('name', 'estimate')}",
                     (_num(ea.get("value")), _num(ea.get("low")), _num(ea.get("high"))),
                     (_num(eb.get("value")), _num(eb.get("low")), _num(eb.get("high"))), out)


def _compare_row(label: str, a: tuple, b: tuple, out: ReportDiff) -> None:
    (va, la, ha), (vb, lb, hb) = a, b
    if None in (va, vb):
        return
    out.compared += 1
    outside_a = la is not None and ha is not None and not (la <= vb <= ha)
    outside_b = lb is not None and hb is not None and not (lb <= va <= hb)
    if outside_a or outside_b:
        ia = f" [{la:.4g}, {ha:.4g}]" if la is not None and ha is not None else ""
        ib = f" [{lb:.4g}, {hb:.4g}]" if lb is not None and hb is not None else ""
        out.moved.append(f"{label}: A {va:.4g}{ia}, B {vb:.4g}{ib}")


def _rows(folder: Path, rel: str | None) -> list[dict[str, str]]:
    if not rel or not (folder / rel).is_file():
        return []
    with open(folder / rel, encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def _tables(fa: Path, a: dict[str, Any], fb: Path, b: dict[str, Any], out: ReportDiff) -> None:
    items_a = {x["key"]: x for x in a.get("figures", []) + a.get("tables", [])}
    items_b = {x["key"]: x for x in b.get("figures", []) + b.get("tables", [])}
    for key in sorted(set(items_a) ^ set(items_b)):
        out.structure.append(f"{key}: only in {'A' if key in items_a else 'B'}")
    for key in sorted(set(items_a) & set(items_b)):
        ra, rb = _rows(fa, items_a[key].get("csv")), _rows(fb, items_b[key].get("csv"))
        if not ra or not rb:
            continue
        cols = set(ra[0]) & set(rb[0])
        spec = next((s for s in INTERVAL_COLUMNS if set(s) <= cols), None)
        if spec is None:
            continue
        keys = [c for c in ra[0] if c in cols and c not in spec and c not in _NOT_KEYS
                and _num(ra[0][c]) is None]
        index_b = {tuple(r[k] for k in keys): r for r in rb}
        for r in ra:
            k = tuple(r[c] for c in keys)
            other = index_b.get(k)
            if other is None:
                continue
            name = items_a[key].get("number")
            kind = "Figure" if key in {x["key"] for x in a.get("figures", [])} else "Table"
            _compare_row(f"{kind} {name} ({key}) " + ", ".join(x for x in k if x),
                         tuple(_num(r[c]) for c in spec), tuple(_num(other[c]) for c in spec),
                         out)


def _provenance(ma: dict[str, Any], mb: dict[str, Any], out: ReportDiff) -> None:
    def get(m: dict[str, Any], path: str) -> Any:
        for part in path.split("."):
            m = m.get(part) if isinstance(m, dict) else None
        return m

    for path, label in (("repository.repo", "repository"), ("repository.tip_hash", "HEAD"),
                        ("repository.tip_ref", "ref"),
                        ("store.checksum_sha256", "store checksum"),
                        ("store.schema_version", "store schema"),
                        ("claims_file.sha256", "claims file"),
                        ("versions.procmetrics", "procmetrics version"),
                        ("report_options", "report options")):
        x, y = get(ma, path), get(mb, path)
        if x != y:
            out.provenance.append(f"{label}: {x} -> {y}" if not isinstance(x, dict)
                                  else f"{label}: " + ", ".join(
                                      f"{k} {x.get(k)} -> {y.get(k) if y else None}"
                                      for k in sorted(set(x) | set(y or {}))
                                      if x.get(k) != (y or {}).get(k)))
    ra = [r.get("options_json") for r in ma.get("mining_runs") or []][-1:]
    rb = [r.get("options_json") for r in mb.get("mining_runs") or []][-1:]
    if ra != rb:
        out.provenance.append("mining options of the last run differ")
    va, vb = ma.get("versions") or {}, mb.get("versions") or {}
    changed = [f"{k} {va.get(k)} -> {vb.get(k)}" for k in sorted(set(va) | set(vb))
               if k != "procmetrics" and va.get(k) != vb.get(k)]
    if changed:
        out.provenance.append("dependency versions: " + ", ".join(changed))


def diff_reports(a: str | Path, b: str | Path) -> ReportDiff:
    """Compare report folder ``a`` with ``b`` (see the module docstring)."""
    fa, fb = Path(a), Path(b)
    ra, ma = _load(fa)
    rb, mb = _load(fb)
    out = ReportDiff(fa, fb)
    _verdicts(ra, rb, out)
    _tables(fa, ra, fb, rb, out)
    _provenance(ma, mb, out)
    return out
