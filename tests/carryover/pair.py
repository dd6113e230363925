"""Generator of an upstream/downstream pair with a known truth (invented project).

Upstream "orbitkit" grows net/, fs/ and core/ files; release ``v1.0`` is tagged
on day 6 and a vendor tree forks there (a clone reset to ``v1.0``, its remote
and later tags removed, so upstream's later commits are not reachable from it).
Upstream then lands fixes with ``Fixes:`` trailers; the vendor tree carries a
known subset with each backport-line style, some by content only
(``cherry-pick`` without ``-x``), and leaves others out. :data:`TRUTH` says what
must be recovered; dates are whole days after ``tests.git_support.EPOCH0``.

Layout (day: commit)
  upstream  0 A net/sock.c · 1 B fs/inode.c · 2 C core/sched.c · 3 D net/route.c ·
            4 E fs/dir.c · 5 F_pre fixes A · 6 G core/timer.c (tag v1.0) ·
            10 F1→B · 12 F2→C · 14 F3→D · 16 F4→E · 18 P2 net/filter.c · 20 F5→G ·
            22 F6→A · 24 P1 fs/quota.c · 26 F7→P1 · 28 F8→P2 · 30 F9→C ·
            32 F10→B · 33 revert F10 · 34 F10b→B (same diff as F10) · 50 F11→E
  vendor    8 own · 15 F1 (-x) · 16 F3 ([ Upstream commit ]) · 20 F2 (commit .. upstream.) ·
            22 P2 (content only) · 24 own fix citing upstream P2 · 30 F4 (content only) ·
            40 F10b (content only) · 45 own (tip)
"""
from __future__ import annotations

import subprocess
import sys
from dataclasses import dataclass, field
from pathlib import Path

from tests.git_support import ALICE, BOB, CAROL, DAVE, GitHistory, when

LINES = 10


def _body(name: str, edits: dict[int, str] | None = None) -> str:
    lines = [f"/* {name} line {i} */" for i in range(LINES)]
    for i, text in (edits or {}).items():
        lines[i] = text
    return "\n".join(lines) + "\n"


# Expected outcome for each upstream fix (names as in the layout above).
TRUTH = {
    # name: (status, method of the fix's match or None, latency days or None, target method)
    "F1": ("carried", "cherry-picked", 5, "same-id"),
    "F2": ("carried", "commit-upstream", 8, "same-id"),
    "F3": ("carried", "upstream-commit", 2, "same-id"),
    "F4": ("carried", "patch-id", 14, "same-id"),
    "F5": ("missing", None, None, "same-id"),
    "F6": ("missing", None, None, "same-id"),
    "F8": ("missing", None, None, "patch-id"),
    "F9": ("excluded", None, None, "same-id"),
    "F10": ("carried", "patch-id", 8, "same-id"),       # ambiguous: F10b has the same patch
    "F10b": ("carried", "patch-id", 6, "same-id"),      # ambiguous
}
SHARED = ("F_pre",)             # in the shared history: carried with the same id
NOT_RELEVANT = ("F7",)          # target (P1) not carried by the tree
NOT_DUE = ("F11",)              # landed upstream after the tree's tip
AMBIGUOUS = ("F10", "F10b")
TIP_DAY = 45
MISSING_GAP_DAYS = {"F5": 25, "F6": 23, "F8": 17}
EXCLUDED_REASON = "core/sched.c rewritten in the vendor tree; does not apply"


@dataclass
class Pair:
    upstream: Path
    tree: Path
    up: dict[str, str] = field(default_factory=dict)     # name -> upstream hash
    down: dict[str, str] = field(default_factory=dict)   # name -> tree hash

    def exclusions_toml(self, path: Path) -> Path:
        path.write_text(f'[[exclude]]\nupstream = "{self.up["F9"]}"\n'
                        f'reason = "{EXCLUDED_REASON}"\n', encoding="utf-8")
        return path


def build_pair(root: Path) -> Pair:
    u = GitHistory.create(root / "orbitkit")
    files: dict[str, dict[int, str]] = {}

    def add(name: str, path: str, day: int, who=ALICE) -> None:
        files[path] = {}
        u.commit(f"{path.split('/')[0]}: add {path}", files={path: _body(path)},
                 author=who, date=when(day), name=name)

    def fix(name: str, target: str, path: str, line: int, day: int, who=BOB,
            same_change_as: str | None = None) -> None:
        files[path][line] = f"/* {path} line {line} fixed by {same_change_as or name} */"
        u.commit(f"{path.split('/')[0]}: correct line {line} of {path}\n\n"
                 f"The check was off by one.\n\nFixes: {u.ids[target][:12]} (\"...\")\n"
                 f"Signed-off-by: {who[0]} <{who[1]}>\n",
                 files={path: _body(path, files[path])}, author=who, date=when(day), name=name)

    add("A", "net/sock.c", 0)
    add("B", "fs/inode.c", 1)
    add("C", "core/sched.c", 2, CAROL)
    add("D", "net/route.c", 3)
    add("E", "fs/dir.c", 4, CAROL)
    fix("F_pre", "A", "net/sock.c", 1, 5)
    add("G", "core/timer.c", 6)
    u.tag("v1.0", message="orbitkit 1.0", date=when(6))
    fix("F1", "B", "fs/inode.c", 1, 10)
    fix("F2", "C", "core/sched.c", 1, 12)
    fix("F3", "D", "net/route.c", 1, 14)
    fix("F4", "E", "fs/dir.c", 1, 16)
    add("P2", "net/filter.c", 18)
    fix("F5", "G", "core/timer.c", 1, 20)
    fix("F6", "A", "net/sock.c", 8, 22)
    add("P1", "fs/quota.c", 24)
    fix("F7", "P1", "fs/quota.c", 1, 26)
    fix("F8", "P2", "net/filter.c", 1, 28)
    fix("F9", "C", "core/sched.c", 8, 30)
    fix("F10", "B", "fs/inode.c", 8, 32)
    u.git("revert", "--no-edit", u.ids["F10"], env=u._ident_env(BOB, None, when(33), None))
    u.ids["F10_revert"] = u.rev()
    files["fs/inode.c"].pop(8)
    fix("F10b", "B", "fs/inode.c", 8, 34, same_change_as="F10")
    fix("F11", "E", "fs/dir.c", 8, 50)

    tree_path = root / "orbitkit-vendor"
    subprocess_env = u.env
    u.git("clone", "-q", "--no-local", str(u.path), str(tree_path))
    d = GitHistory(tree_path, subprocess_env)
    d.git("checkout", "-q", "-B", "main", "v1.0")
    d.git("remote", "remove", "origin")
    d.commit("board: add vendor board config", files={"board/cfg.c": _body("board")},
             author=DAVE, date=when(8), name="own1")

    def pick(name: str, day: int, style: str | None) -> None:
        h = u.ids[name]
        env = d._ident_env(DAVE, None, when(day), None)
        if style == "cherry-picked":
            d.git("cherry-pick", "-x", h, env=env)
            d.ids[name] = d.rev()
            return
        d.git("cherry-pick", "-n", h, env=env)
        msg = u.git("log", "-1", "--format=%B", h)
        subject, _, rest = msg.partition("\n")
        if style == "commit-upstream":
            msg = f"{subject}\n\ncommit {h} upstream.\n{rest}"
        elif style == "upstream-commit":
            msg = f"{subject}\n\n[ Upstream commit {h[:12]} ]\n{rest}"
        else:       # content only: the vendor rewords the subject and drops the trailers
            msg = f"vendor: {subject}\n"
        d.commit(msg, author=DAVE, date=when(day), name=name)

    pick("F1", 15, "cherry-picked")
    pick("F3", 16, "upstream-commit")
    pick("F2", 20, "commit-upstream")
    pick("P2", 22, None)
    d.commit(f"board: tune filter defaults\n\nFixes: {u.ids['P2'][:12]} (\"net: add net/filter.c\")\n",
             files={"board/cfg.c": _body("board", {2: "/* tuned */"})}, author=DAVE,
             date=when(24), name="own_fix")
    pick("F4", 30, None)
    pick("F10b", 40, None)
    d.commit("board: empty commit (no diff, no patch id)", author=DAVE, date=when(TIP_DAY - 1),
             name="empty")
    d.commit("board: final tuning", files={"board/cfg.c": _body("board", {2: "/* t2 */"})},
             author=DAVE, date=when(TIP_DAY), name="own2")
    return Pair(u.path, tree_path, dict(u.ids), dict(d.ids))


def run_cli(*args: str) -> subprocess.CompletedProcess[str]:
    """``procmetrics ARGS`` in a child process (output captured as text)."""
    return subprocess.run([sys.executable, "-m", "procmetrics", *args], capture_output=True,
                          text=True)


def mine_pair(root: Path) -> tuple[Pair, str, subprocess.CompletedProcess[str]]:
    """The pair built under ``root`` and mined (tree with its upstream) into
    ``root/s.sqlite``: the pair, the store and the mine run (checked to succeed)."""
    pair = build_pair(root)
    store = str(root / "s.sqlite")
    r = run_cli("mine", str(pair.tree), "--upstream", str(pair.upstream), "--store", store,
                "--no-progress")
    assert r.returncode == 0, r.stderr
    return pair, store, r
