"""One costly computation in a second process while this one goes on.

The analyses run one after another on one core. Some need nothing the next steps
compute: the report's defect-lifetime analysis (bootstrap bands and quantile
intervals, over a minute at a million commits), or one group's bootstrap band
beside its quantile intervals. :class:`AsideJob` starts such a computation in a
second process and the caller takes its result when it needs it: the second core
does that work while the first does the rest.

The second process is a fresh interpreter running this module (``python -m
procmetrics.background``): the call goes in on its stdin and the result comes back
on its stdout, both pickled. Unlike ``multiprocessing``'s "spawn", it never imports
the caller's main script again, so a script without an ``if __name__ ==
"__main__"`` guard is not run twice.

It only moves work, never changes it. The function is pure and seeded by its
arguments (the generator travels, pickled, with its state), so the result is the
same value either way. The warnings it raises there are raised again here, with
category, text, file and line, so the report's numerical-warnings table counts
them as before. Whenever the second process cannot give a result (it cannot
start, it fails, it dies), the function runs here, in this process, where it
raises what it raises as if nothing had been tried; a result is never guessed.
"""
from __future__ import annotations

import os
import pickle
import subprocess
import sys
import threading
import warnings
from pathlib import Path
from typing import Any, Callable

#: processes a report uses by default (1: every analysis in this process)
DEFAULT_JOBS = 2


def recorded(caught: list[warnings.WarningMessage]) -> list[tuple[Any, str, str, int]]:
    """Warnings caught by ``catch_warnings(record=True)`` as picklable tuples."""
    return [(w.category, str(w.message), str(w.filename), int(w.lineno or 0)) for w in caught]


def replay(notes: list[tuple[Any, str, str, int]],
           registries: dict[str, dict[Any, Any]] | None = None) -> None:
    """Raise recorded warnings again, with their category, text, file and line.

    ``registries`` (file name -> warning registry, kept by the caller) stands in for
    the registries of the modules that raised them: under the "default" filter a
    warning replayed twice from the same place is shown once, as it would have been
    in one process (the report records every warning with "always" either way)."""
    registries = {} if registries is None else registries
    for category, message, filename, lineno in notes:
        warnings.warn_explicit(message, category, filename, lineno,
                               registry=registries.setdefault(filename, {}))


def _serve(stdin: Any, stdout: Any) -> None:
    """The second process: read (fn, args, kwargs), write (ok, value, warnings)."""
    try:
        fn, args, kwargs = pickle.load(stdin)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            value = fn(*args, **kwargs)
        out = pickle.dumps((True, value, recorded(caught)), protocol=pickle.HIGHEST_PROTOCOL)
    except BaseException:        # noqa: BLE001 - the caller reruns it and raises there
        out = pickle.dumps((False, None, []))
    stdout.write(out)
    stdout.flush()


class AsideJob:
    """``fn(*args, **kwargs)`` started in a second process; :meth:`result` returns its
    value, computing it here instead when the second process gave none."""

    def __init__(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> None:
        self.fn, self.args, self.kwargs = fn, args, kwargs
        self.ran_aside = False
        self._registries: dict[str, dict[Any, Any]] = {}
        self._proc: Any = None
        self._feed: Any = None
        try:
            data = pickle.dumps((fn, args, kwargs), protocol=pickle.HIGHEST_PROTOCOL)
            here = str(Path(__file__).resolve().parents[1])    # where procmetrics is
            env = dict(os.environ)
            env["PYTHONPATH"] = os.pathsep.join(
                [here] + ([env["PYTHONPATH"]] if env.get("PYTHONPATH") else []))
            proc = subprocess.Popen([sys.executable, "-m", "procmetrics.background"],
                                    stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                    stderr=None if os.environ.get("PROCMETRICS_DEBUG")
                                    else subprocess.DEVNULL, env=env)
        except Exception:         # noqa: BLE001 - no second process: run it here later
            return
        self._proc = proc
        # a thread writes the call, so that a large one never blocks the caller
        self._feed = threading.Thread(target=_write_and_close, args=(proc.stdin, data),
                                      daemon=True)
        self._feed.start()

    def result(self) -> Any:
        """The function's value (raised exceptions come from running it here)."""
        payload = None
        proc = self._proc
        if proc is not None:
            try:
                raw = proc.stdout.read()
                proc.wait()
                payload = pickle.loads(raw) if proc.returncode == 0 and raw else None
            except Exception:     # noqa: BLE001 - it died, or a value that will not unpickle
                payload = None
            finally:
                self.close()
        if payload is not None and payload[0]:
            _, value, notes = payload
            replay(notes, self._registries)
            self.ran_aside = True
            return value
        return self.fn(*self.args, **self.kwargs)

    def close(self) -> None:
        """Stop the second process if it still runs (a report that failed early)."""
        proc, feed = self._proc, self._feed
        self._proc = self._feed = None
        if proc is None:
            return
        if proc.poll() is None:
            proc.kill()
        if feed is not None:
            feed.join()
        proc.wait()
        if proc.stdout is not None:
            proc.stdout.close()


def _write_and_close(pipe: Any, data: bytes) -> None:
    try:
        pipe.write(data)
    except OSError:               # the second process is gone: result() runs it here
        pass
    finally:
        try:
            pipe.close()
        except OSError:
            pass


__all__ = ["AsideJob", "DEFAULT_JOBS", "recorded", "replay"]


def _main() -> None:
    """Entry of the second process. The result goes to the original stdout; anything
    else written to stdout (a library's print) goes nowhere instead of into it."""
    result = os.fdopen(os.dup(1), "wb")
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, 1)
    sys.stdout = open(os.devnull, "w")
    _serve(sys.stdin.buffer, result)
    result.close()


if __name__ == "__main__":
    _main()
