"""The package's rooms and their one-way doors (DEVELOPERS.md, "Architecture").

Parsed from the source with :mod:`ast` (every import, also those inside
functions), so a lazy import cannot slip through.
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2] / "procmetrics"
QUESTIONS = ("measures", "change", "lifetimes", "growth", "carryover")
SHARED = ("result", "glmfit", "diagnostics", "memo")


def _modules() -> dict[str, set[str]]:
    out: dict[str, set[str]] = {}
    for path in ROOT.rglob("*.py"):
        parts = path.relative_to(ROOT.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        pkg = name if parts[-1] == "__init__" else name.rsplit(".", 1)[0]
        deps: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text("utf-8"))):
            if isinstance(node, ast.ImportFrom):
                base = node.module or ""
                if node.level:
                    base = ".".join(pkg.split(".")[: len(pkg.split(".")) - node.level + 1]
                                    + ([base] if base else []))
                if base.startswith("procmetrics"):
                    deps.add(base)
                    deps.update(f"{base}.{a.name}" for a in node.names)
            elif isinstance(node, ast.Import):
                deps.update(a.name for a in node.names if a.name.startswith("procmetrics"))
        out[name] = deps
    return out


MODULES = _modules()


def _within(dep: str, pkg: str) -> bool:
    return dep == pkg or dep.startswith(pkg + ".")


def test_the_tree_has_the_rooms_the_guide_describes() -> None:
    for q in QUESTIONS:
        assert f"procmetrics.analyse.{q}" in MODULES, q
    for room in ("mine", "store", "analyse", "claims", "plot", "report", "cli"):
        assert f"procmetrics.{room}" in MODULES, room
    # the flat analyse modules of old are gone: only the shared ones stay at the top
    top = {m.rsplit(".", 1)[1] for m in MODULES if m.count(".") == 2
           and m.startswith("procmetrics.analyse.")}
    assert top == set(QUESTIONS) | set(SHARED), top


@pytest.mark.parametrize("name", sorted(m for m in MODULES if _within(m, "procmetrics.analyse")))
def test_analyse_imports_no_room_downstream_or_upstream(name: str) -> None:
    banned = [f"procmetrics.{r}" for r in ("claims", "report", "plot", "cli", "mine", "store",
                                           "session", "scope")]
    bad = sorted(d for d in MODULES[name] for b in banned if _within(d, b))
    assert not bad, f"{name} imports {bad}"


@pytest.mark.parametrize("name", sorted(m for m in MODULES if _within(m, "procmetrics.analyse")))
def test_question_packages_import_only_measures_and_the_shared_modules(name: str) -> None:
    parts = name.split(".")
    if len(parts) < 3 or parts[2] not in QUESTIONS:
        return
    own = parts[2]
    allowed = {own, "measures"}
    bad = sorted(d for d in MODULES[name] if _within(d, "procmetrics.analyse")
                 and len(d.split(".")) > 2 and d.split(".")[2] in QUESTIONS
                 and d.split(".")[2] not in allowed)
    if own == "measures":
        bad += sorted(d for d in MODULES[name] if _within(d, "procmetrics.analyse")
                      and len(d.split(".")) > 2 and d.split(".")[2] in QUESTIONS
                      and d.split(".")[2] != "measures")
    assert not bad, f"{name} imports {sorted(set(bad))}"


@pytest.mark.parametrize("room,banned", [
    ("procmetrics.mine", ("store.tables", "analyse", "claims", "plot", "report", "cli")),
    ("procmetrics.store", ("mine", "analyse", "claims", "plot", "report", "cli", "scope")),
    # scope: a question-free utility between store and claims (globs, selection, window)
    ("procmetrics.scope", ("claims", "report", "plot", "cli", "mine", "session")),
    ("procmetrics.claims", ("report", "plot", "cli", "mine")),
    ("procmetrics.plot", ("claims", "report", "cli", "mine", "store")),
    ("procmetrics.report", ("cli",)),
])
def test_rooms_import_only_downstream(room: str, banned: tuple[str, ...]) -> None:
    for name, deps in MODULES.items():
        if not _within(name, room):
            continue
        bad = sorted(d for d in deps for b in banned if _within(d, f"procmetrics.{b}"))
        assert not bad, f"{name} imports {bad}"


def test_scope_uses_only_the_one_date_parser_of_analyse() -> None:
    """The scope room reads dates through analyse.measures.periods and nothing else there."""
    assert "procmetrics.scope" in MODULES
    for name, deps in MODULES.items():
        if _within(name, "procmetrics.scope"):
            bad = sorted(d for d in deps if _within(d, "procmetrics.analyse")
                         and not _within(d, "procmetrics.analyse.measures.periods")
                         and d != "procmetrics.analyse.measures")
            assert not bad, f"{name} imports {bad}"


def test_only_report_and_cli_import_plot() -> None:
    for name, deps in MODULES.items():
        if any(_within(d, "procmetrics.plot") for d in deps):
            assert _within(name, "procmetrics.report") or _within(name, "procmetrics.cli") \
                or _within(name, "procmetrics.plot"), name


def test_no_cli_module_imports_another_command() -> None:
    for name, deps in MODULES.items():
        if not _within(name, "procmetrics.cli"):
            continue
        others = sorted(d for d in deps if d.startswith("procmetrics.cli.cmd_")
                        or d.startswith("procmetrics.cli._"))
        others = [d for d in others if d.rsplit(".", 1)[0] != name]
        if name.startswith("procmetrics.cli.cmd_"):
            assert not [d for d in others if d.startswith("procmetrics.cli.cmd_")], (name, others)
    for name, deps in MODULES.items():
        if not _within(name, "procmetrics.cli") and name != "procmetrics.__main__":
            assert not [d for d in deps if _within(d, "procmetrics.cli")], name


def test_the_rule_checker_sees_a_planted_violation(tmp_path: Path) -> None:
    """The parser the rules rest on finds an import inside a function body."""
    src = "def f():\n    from procmetrics.report.build import make_report\n"
    found = {n.module for n in ast.walk(ast.parse(src)) if isinstance(n, ast.ImportFrom)}
    assert "procmetrics.report.build" in found


@pytest.mark.parametrize("package", ["procmetrics.analyse.measures", "procmetrics.analyse.change",
                                     "procmetrics.analyse.lifetimes", "procmetrics.analyse.growth",
                                     "procmetrics.analyse.carryover", "procmetrics.claims",
                                     "procmetrics.scope"])
def test_every_lazily_exported_name_resolves(package: str) -> None:
    import importlib

    mod = importlib.import_module(package)
    missing = [n for n in mod.__all__ if not hasattr(mod, n)]
    assert not missing, missing
    with pytest.raises(AttributeError):
        getattr(mod, "no_such_name")
