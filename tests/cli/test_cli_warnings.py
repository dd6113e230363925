"""Warnings at the command line: ours as one line ``procmetrics: warning: …``, library
numerical warnings kept off the console (recorded), through procmetrics.cli.main."""
from __future__ import annotations

import warnings

import numpy as np

from procmetrics.cli import main
from procmetrics.errors import DataQualityWarning


def _noisy_run(args):
    warnings.warn("the data are odd\n  across two lines", DataQualityWarning)
    with np.errstate(invalid="warn"):           # numpy's own RuntimeWarning, whatever
        np.log(np.array([-1.0]))                # another test set with np.seterr
    warnings.warn("Maximum Likelihood optimization failed", UserWarning)
    return 0


def test_ours_one_line_libraries_silent(monkeypatch, capsys):
    import procmetrics.cli.cmd_export as cmd
    monkeypatch.setattr(cmd, "run", _noisy_run)
    monkeypatch.delenv("PROCMETRICS_DEBUG", raising=False)
    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.showwarning = warnings._showwarning_orig   # as in a real process
        code = main(["export", "--table", "commits"])
    assert code == 0
    err = capsys.readouterr().err
    assert err == "procmetrics: warning: the data are odd across two lines\n"


def test_debug_lists_library_warnings(monkeypatch, capsys):
    import procmetrics.cli.cmd_export as cmd
    monkeypatch.setattr(cmd, "run", _noisy_run)
    monkeypatch.setenv("PROCMETRICS_DEBUG", "1")
    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.showwarning = warnings._showwarning_orig
        main(["export", "--table", "commits"])
    lines = capsys.readouterr().err.splitlines()
    assert lines[0].startswith("procmetrics: warning: the data are odd")
    assert lines[1].startswith("procmetrics: note: library warnings") and \
        "RuntimeWarning x1" in lines[1] and "UserWarning x1" in lines[1]
    assert len(lines) == 2



_POOL_LOG = """
import logging, sys
if sys.argv[1] == "quiet":
    from procmetrics.cli import quiet_library_logs
    quiet_library_logs()
try:
    raise KeyboardInterrupt
except KeyboardInterrupt:
    logging.getLogger("sqlalchemy.pool").error("Exception during reset or similar",
                                               exc_info=True)
"""


def test_an_interrupted_pool_reset_prints_no_traceback():
    """SQLAlchemy's pool logs a reset interrupted by Ctrl-C with a traceback through
    Python's last-resort handler (seen in an interrupt test); the CLI keeps it off
    stderr. Run in a fresh interpreter (pytest installs its own log handlers); the
    control run without the CLI's setting shows the traceback the check looks for."""
    import os
    import subprocess
    import sys

    env = {k: v for k, v in os.environ.items() if k != "PROCMETRICS_DEBUG"}
    runs = {mode: subprocess.run([sys.executable, "-c", _POOL_LOG, mode], env=env,
                                 capture_output=True, text=True, timeout=60)
            for mode in ("quiet", "plain")}
    assert "Traceback" in runs["plain"].stderr
    assert runs["quiet"].returncode == 0 and "Traceback" not in runs["quiet"].stderr


def test_an_unknown_subsystem_name_is_a_usage_mistake(tmp_path):
    """``series --subsystem``, ``compare --control`` and ``growth --subsystem`` with a name
    the store does not map exit 2 naming the option (they printed an empty series or an
    unfitted control with exit 0)."""
    from procmetrics.cli import main
    from procmetrics.mine import MineOptions, mine_repository
    from tests.git_support import GitHistory, when

    h = GitHistory.create(tmp_path / "r")
    h.commit("net: one\n", files={"net/a.c": "1\n"}, date=when(0))
    h.commit("net: two\n", files={"net/a.c": "2\n"}, date=when(40))
    store = tmp_path / "s.sqlite"
    mine_repository(h.path, store=store, options=MineOptions(progress=False))
    for argv in (["series", "--subsystem", "nosuch"],
                 ["compare", "--at", "2000-01-01", "--control", "nosuch"],
                 ["growth", "--subsystem", "nosuch"]):
        assert main([*argv, "--store", str(store), "--no-progress"]) == 2, argv
