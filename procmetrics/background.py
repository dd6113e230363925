"""One costly computation in a second process while this one goes on.

The analyses run one after another on one core. Some need nothing the next steps
compute: the report's defect-lifetime analysis (bootstrap bands and quantile
intervals, over a minute at a million commits), or one group's bootstrap band
beside its quantile intervals. :class:`AsideJob` starts such a computation in a
second process and the caller takes its result when it needs it: the second core
does that work while the first does the rest.

It only moves work, never changes it. The function is pure and seeded by its
arguments (the generator travels, pickled, with its state), so the result is the
same value either way. The warnings it raises there are raised again here, with
category, text, file and line, so the report's numerical-warnings table counts
them as before. Whenever the second process cannot give a result (it cannot
start, it fails, it dies), the function runs here, in this process, where it
raises what it raises as if nothing had been tried; a result is never guessed.
"""
from __future__ import annotations

import multiprocessing
import warnings
from typing import Any, Callable

#: processes a report uses by default (1: every analysis in this process)
DEFAULT_JOBS = 2


def _child(conn: Any, fn: Callable[..., Any], args: tuple[Any, ...],
           kwargs: dict[str, Any]) -> None:
    """Run ``fn`` in the second process and send (ok, value, warnings) back."""
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            value = fn(*args, **kwargs)
        conn.send((True, value, recorded(caught)))
    except BaseException:        # noqa: BLE001 - the parent reruns it and raises there
        try:
            conn.send((False, None, []))
        except BaseException:    # noqa: BLE001 - a broken pipe: the parent sees EOF
            pass
    finally:
        conn.close()


#: one registry per file, as each module has its own: under the "default" filter a
#: warning replayed from the same place is shown once, as it would have been
_REGISTRIES: dict[str, dict[Any, Any]] = {}


def recorded(caught: list[warnings.WarningMessage]) -> list[tuple[Any, str, str, int]]:
    """Warnings caught by ``catch_warnings(record=True)`` as picklable tuples."""
    return [(w.category, str(w.message), str(w.filename), int(w.lineno or 0)) for w in caught]


def replay(notes: list[tuple[Any, str, str, int]]) -> None:
    """Raise recorded warnings again, with their category, text, file and line."""
    for category, message, filename, lineno in notes:
        warnings.warn_explicit(message, category, filename, lineno,
                               registry=_REGISTRIES.setdefault(filename, {}))


class AsideJob:
    """``fn(*args, **kwargs)`` started in a second process ('spawn': a fresh
    interpreter, nothing inherited but the arguments); :meth:`result` returns its
    value, computing it here instead when the second process gave none."""

    def __init__(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> None:
        self.fn, self.args, self.kwargs = fn, args, kwargs
        self.ran_aside = False
        self._proc: Any = None
        self._conn: Any = None
        try:
            mp = multiprocessing.get_context("spawn")
            recv, send = mp.Pipe(duplex=False)
            proc = mp.Process(target=_child, args=(send, fn, args, kwargs), daemon=True,
                              name="procmetrics-aside")
            proc.start()
            send.close()
            self._proc, self._conn = proc, recv
        except Exception:         # noqa: BLE001 - no second process: run it here later
            self._proc = self._conn = None

    def result(self) -> Any:
        """The function's value (raised exceptions come from running it here)."""
        payload = None
        if self._conn is not None:
            try:
                payload = self._conn.recv()
            except Exception:     # noqa: BLE001 - EOF (it died), or a value that will not unpickle
                payload = None
            finally:
                self.close()
        if payload is not None and payload[0]:
            _, value, notes = payload
            replay(notes)
            self.ran_aside = True
            return value
        return self.fn(*self.args, **self.kwargs)

    def close(self) -> None:
        """Stop the second process if it still runs (a report that failed early)."""
        conn, proc = self._conn, self._proc
        self._conn = self._proc = None
        if conn is not None:
            conn.close()
        if proc is not None:
            if proc.is_alive():
                proc.terminate()
            proc.join()


__all__ = ["AsideJob", "DEFAULT_JOBS", "recorded", "replay"]
