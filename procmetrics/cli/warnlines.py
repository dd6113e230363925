"""Warnings at the command line: one line each, ours shown, the libraries' kept.

* a :class:`~procmetrics.errors.ProcmetricsWarning` (a data-quality or statistical
  caveat) becomes one line ``procmetrics: warning: …`` on stderr (no source path,
  no line number, no source line);
* any other warning (numpy/scipy/statsmodels/matplotlib ``RuntimeWarning``,
  ``ConvergenceWarning``, ``UserWarning``…) is a numerical diagnostic of a library:
  it is counted, not printed (``report`` records them in ``manifest.json``); with
  ``PROCMETRICS_DEBUG=1`` a summary line lists them at the end.

When an outer recorder is installed (``warnings.catch_warnings(record=True)``, as in
tests or a notebook), every warning is also handed to it.
"""
from __future__ import annotations

import contextlib
import os
import sys
import warnings
from collections import Counter
from typing import Any, Iterator

from procmetrics.errors import ProcmetricsWarning


def one_line(message: Any) -> str:
    return " ".join(str(message).split())


def is_ours(category: type) -> bool:
    return issubclass(category, ProcmetricsWarning)


def _outer_recorder() -> Any:
    impl = getattr(warnings, "_showwarnmsg_impl", None)
    if impl is None or (getattr(impl, "__module__", "") == "warnings"
                        and getattr(impl, "__name__", "") == "_showwarnmsg_impl"):
        return None
    return impl


@contextlib.contextmanager
def warning_lines() -> Iterator[Counter]:
    """Install the one-line handler for the duration of a command."""
    library: Counter = Counter()
    outer = _outer_recorder()

    def show(message, category, filename, lineno, file=None, line=None) -> None:
        if is_ours(category):
            print(f"procmetrics: warning: {one_line(message)}", file=sys.stderr)
        else:
            library[(category.__name__, one_line(message))] += 1
        if outer is not None:
            outer(warnings.WarningMessage(message, category, filename, lineno, file, line))

    saved = warnings.showwarning
    warnings.showwarning = show
    try:
        yield library
    finally:
        warnings.showwarning = saved
        if library and os.environ.get("PROCMETRICS_DEBUG"):
            listed = "; ".join(f"{cat} x{n}: {msg}" for (cat, msg), n in library.items())
            print(f"procmetrics: note: library warnings (not shown otherwise): {listed}",
                  file=sys.stderr)
