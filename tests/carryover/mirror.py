"""Generator of a mirrored-subtree pair with a known truth (invented project).

Upstream "orbitcore" keeps a library under ``lib/orbit/`` beside ``kernel/``; the
tree "orbitlib" mirrors only the library, under ``src/``, as a sync job does: each
upstream commit that touches ``lib/orbit/`` becomes a tree commit with the same
message and only the library part of its change, moved to ``src/`` (no backport
line, different ids). Some upstream fixes are never synced. The path map is
``lib/orbit/ -> src/``; :data:`MIRROR_TRUTH` says what must be recovered. Dates
are days after ``tests.git_support.EPOCH0``.

Layout (day: commit)
  upstream  0 A lib/orbit/a.c · 1 B lib/orbit/b.c · 2 K kernel/k.c · 3 C lib/orbit/c.c ·
            4 M lib/orbit/d.c + kernel/j.c · 10 F1→A · 12 F2→B · 14 F3→K (kernel) ·
            16 F4→M (lib/orbit/d.c) · 18 F5→M (kernel/j.c) · 20 F6→C · 22 F7→A
            (lib/orbit/a.c + kernel/k.c) · 24 F8→B
  tree      5 A · 5.2 B · 5.4 C · 5.6 M (lib part) · 15 F1 · 20 F2 · 21 F4 · 30 F7 (lib
            part) · 40 own README (tip)
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from tests.git_support import ALICE, BOB, DAVE, GitHistory, when

PATH_MAP = ("lib/orbit/", "src/")
MIRROR_TIP_DAY = 40
MIRROR_TRUTH = {
    # name: (status, latency days or None)
    "F1": ("carried", 5), "F2": ("carried", 8), "F4": ("carried", 5), "F7": ("carried", 8),
    "F3": ("not-mirrored", None), "F5": ("not-mirrored", None),
    "F6": ("missing", None), "F8": ("missing", None),
}
MIRROR_GAP_DAYS = {"F6": 20, "F8": 16}
#: target matches by the mapped patch id: every library commit the tree carries
TARGETS = ("A", "B", "C", "M")


def _body(name: str, edits: dict[int, str] | None = None) -> str:
    lines = [f"/* {name} line {i} */" for i in range(8)]
    for i, text in (edits or {}).items():
        lines[i] = text
    return "\n".join(lines) + "\n"


@dataclass
class MirrorPair:
    upstream: Path
    tree: Path
    up: dict[str, str] = field(default_factory=dict)
    down: dict[str, str] = field(default_factory=dict)


def build_mirror_pair(root: Path) -> MirrorPair:
    u = GitHistory.create(root / "orbitcore")
    state: dict[str, str] = {}                  # path -> content, upstream
    lib_change: dict[str, dict[str, str]] = {}  # upstream commit -> lib files after it
    msgs: dict[str, str] = {}
    edits: dict[str, dict[int, str]] = {}

    def commit(name: str, msg: str, files: dict[str, str], day: float, who=ALICE) -> None:
        state.update(files)
        u.commit(msg, files=files, author=who, date=when(day), name=name)
        msgs[name] = msg
        lib_change[name] = {p: c for p, c in files.items() if p.startswith(PATH_MAP[0])}

    def add(name: str, paths: list[str], day: float) -> None:
        for p in paths:
            edits[p] = {}
        commit(name, f"add {', '.join(paths)}", {p: _body(p) for p in paths}, day)

    def fix(name: str, target: str, paths: list[str], day: float) -> None:
        for p in paths:
            edits[p][1 + len(edits[p])] = f"/* {p} fixed by {name} */"
        commit(name, f"correct {', '.join(paths)}\n\nFixes: {u.ids[target][:12]} (\"...\")\n",
               {p: _body(p, edits[p]) for p in paths}, day, BOB)

    add("A", ["lib/orbit/a.c"], 0)
    add("B", ["lib/orbit/b.c"], 1)
    add("K", ["kernel/k.c"], 2)
    add("C", ["lib/orbit/c.c"], 3)
    add("M", ["lib/orbit/d.c", "kernel/j.c"], 4)
    fix("F1", "A", ["lib/orbit/a.c"], 10)
    fix("F2", "B", ["lib/orbit/b.c"], 12)
    fix("F3", "K", ["kernel/k.c"], 14)
    fix("F4", "M", ["lib/orbit/d.c"], 16)
    fix("F5", "M", ["kernel/j.c"], 18)
    fix("F6", "C", ["lib/orbit/c.c"], 20)
    fix("F7", "A", ["lib/orbit/a.c", "kernel/k.c"], 22)
    fix("F8", "B", ["lib/orbit/b.c"], 24)

    d = GitHistory.create(root / "orbitlib")

    def sync(name: str, day: float) -> None:
        files = {PATH_MAP[1] + p[len(PATH_MAP[0]):]: c for p, c in lib_change[name].items()}
        d.commit(msgs[name], files=files, author=DAVE, date=when(day), name=name)

    for name, day in (("A", 5), ("B", 5.2), ("C", 5.4), ("M", 5.6), ("F1", 15), ("F2", 20),
                      ("F4", 21), ("F7", 30)):
        sync(name, day)
    d.commit("add README", files={"README": "orbit library mirror\n"}, author=DAVE,
             date=when(MIRROR_TIP_DAY), name="readme")
    return MirrorPair(u.path, d.path, dict(u.ids), dict(d.ids))
