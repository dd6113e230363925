"""Ctrl-C that a library swallowed still stops a mining run before it is marked complete.

Python raises ``KeyboardInterrupt`` wherever the main thread is when SIGINT arrives.
If that is a finalizer (SQLAlchemy returning a connection to its pool from a weakref
callback), Python only prints "Exception ignored" and carries on: a run interrupted
there finished and exited 0, as if nobody had pressed Ctrl-C (seen in the interrupt
test under load). :func:`recorded` notes every SIGINT before raising it as usual;
:func:`check`, called before the run is marked complete, raises it again.
"""
from __future__ import annotations

import signal
import threading
from contextlib import contextmanager
from typing import Any, Iterator

_received = threading.Event()


def _handler(signum: int, frame: Any) -> None:
    _received.set()
    raise KeyboardInterrupt


@contextmanager
def recorded() -> Iterator[None]:
    """Note SIGINT while the block runs (main thread only; elsewhere a no-op)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    _received.clear()
    old = signal.signal(signal.SIGINT, _handler)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, old)
        _received.clear()


def check() -> None:
    """Raise ``KeyboardInterrupt`` if a SIGINT arrived inside :func:`recorded`."""
    if _received.is_set():
        raise KeyboardInterrupt
