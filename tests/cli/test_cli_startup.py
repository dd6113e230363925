"""The command line starts without loading the statistics stack.

Building the parser (``procmetrics --help``, or ``procmetrics mine``) must not
import the analysis libraries: they cost seconds and hundreds of MB before a
mining run starts. Checked in a fresh interpreter through ``sys.modules``.
"""
from __future__ import annotations

import json
import subprocess
import sys

HEAVY = ("statsmodels", "scipy", "matplotlib", "lifelines", "ruptures", "jinja2", "dask")


def test_building_the_parser_imports_no_statistics_library():
    code = ("import json, sys; from procmetrics.cli import build_parser; build_parser(); "
            "print(json.dumps(sorted({m.split('.')[0] for m in sys.modules})))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    loaded = set(json.loads(out))
    assert not loaded & set(HEAVY), sorted(loaded & set(HEAVY))


def test_every_command_has_help():
    from procmetrics.cli import COMMANDS, main
    for name in COMMANDS:
        try:
            main([name, "--help"])
        except SystemExit as exc:   # argparse exits 0 after printing help
            assert exc.code == 0, name


def _modules_after(argv: list[str]) -> set[str]:
    """Modules loaded by ``procmetrics ARGV`` in a fresh interpreter (help exits 0)."""
    code = ("import json, sys\nfrom procmetrics.cli import main\n"
            f"try:\n    main({argv!r})\nexcept SystemExit:\n    pass\n"
            "print(json.dumps(sorted(sys.modules)), file=sys.stderr)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True)
    return set(json.loads(done.stderr.strip().splitlines()[-1]))


def test_a_command_loads_its_own_module_only():
    """``procmetrics mine`` imports cmd_mine and not the analyses' modules (nor pandas,
    which they import): about 1 s of every call."""
    loaded = _modules_after(["mine", "--help"])
    commands = {m for m in loaded if m.startswith("procmetrics.cli.cmd_")}
    assert commands == {"procmetrics.cli.cmd_mine"}
    assert "pandas" not in loaded


def test_top_level_help_and_a_misspelt_command_still_see_every_command(capsys):
    from procmetrics.cli import COMMANDS, main
    loaded = _modules_after(["--help"])
    assert {f"procmetrics.cli.cmd_{c}" for c in COMMANDS} <= loaded
    try:
        main(["mnie"])
    except SystemExit as exc:
        assert exc.code == 2
    err = capsys.readouterr().err
    assert "invalid choice: 'mnie'" in err and all(repr(c) in err for c in COMMANDS)


def test_a_command_parsed_alone_has_the_options_it_has_among_all():
    """The one-command parser is the full parser's subparser for that command: same
    options, defaults, choices and help."""
    import argparse

    from procmetrics.cli import COMMANDS, build_parser

    def options(parser: argparse.ArgumentParser) -> dict[str, list[tuple]]:
        sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
        return {name: [(a.option_strings, a.dest, a.nargs, repr(a.default), a.choices,
                        a.help, a.required) for a in p._actions]
                for name, p in sub.choices.items()}

    everything = options(build_parser())
    assert sorted(everything) == sorted(COMMANDS)
    for name in COMMANDS:
        assert options(build_parser(name)) == {name: everything[name]}
