"""Compare two report folders: report.json and every tables/*.csv, byte for byte.

Used to show that a refactoring or a speed change left every figure as it was:

    python bench/compare_reports.py reports/before reports/after

Exit 0 when identical, 1 with the differing files listed otherwise. With
``--ignore-key KEY`` (repeatable) the JSON is compared after dropping those
keys wherever they occur (e.g. timing fields).
"""
from __future__ import annotations

import argparse
import hashlib
import json
import sys
from pathlib import Path
from typing import Any


def _drop(obj: Any, keys: set[str]) -> Any:
    if isinstance(obj, dict):
        return {k: _drop(v, keys) for k, v in obj.items() if k not in keys}
    if isinstance(obj, list):
        return [_drop(v, keys) for v in obj]
    return obj


def differences(a: Path, b: Path, ignore: set[str] = frozenset()) -> list[str]:
    out = []
    names = sorted({p.relative_to(a).as_posix() for p in (a / "tables").glob("*.csv")}
                   | {p.relative_to(b).as_posix() for p in (b / "tables").glob("*.csv")})
    for name in ["report.json", *names]:
        pa, pb = a / name, b / name
        if not pa.exists() or not pb.exists():
            out.append(f"{name}: only in {'B' if not pa.exists() else 'A'}")
            continue
        if name == "report.json" and ignore:
            same = _drop(json.loads(pa.read_text()), ignore) == _drop(json.loads(pb.read_text()),
                                                                       ignore)
        else:
            same = hashlib.sha256(pa.read_bytes()).digest() == \
                hashlib.sha256(pb.read_bytes()).digest()
        if not same:
            out.append(f"{name}: differs")
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("a", type=Path)
    ap.add_argument("b", type=Path)
    ap.add_argument("--ignore-key", action="append", default=[])
    args = ap.parse_args(argv)
    diff = differences(args.a, args.b, set(args.ignore_key))
    for line in diff:
        print(line)
    n = len(list((args.a / "tables").glob("*.csv")))
    if not diff:
        print(f"identical: report.json and {n} tables")
    return 1 if diff else 0


if __name__ == "__main__":
    sys.exit(main())
