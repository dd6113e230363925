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
