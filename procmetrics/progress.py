"""Progress of a long command on stderr: numbered steps, time so far, time left.

One sink for every analysis command and the report. The command opens it
(:func:`steps`) with the number of steps when it knows it; library code marks
where it is (:func:`advance`), which does nothing when no command listens (a
notebook, a test). Lines go to stderr and only when stderr is a terminal,
unless asked otherwise (``--progress`` / ``--no-progress``): pipes, CI logs and
the report's own files never see them.

The estimate of the time left is the mean time of the steps done so far times
the steps left, printed as "about N s left" from the second step on; steps
differ in cost, so it is a rough guide, and it says "about".
"""
from __future__ import annotations

import sys
import time
from contextlib import contextmanager
from contextvars import ContextVar
from typing import Iterator, TextIO

_ACTIVE: ContextVar["Steps | None"] = ContextVar("procmetrics_progress", default=None)


class Steps:
    """Numbered steps of one command (``total`` None: steps are counted, not estimated)."""

    def __init__(self, label: str, total: int | None, stream: TextIO) -> None:
        self.label, self.total, self.stream = label, total, stream
        self.started = time.monotonic()
        self.done = 0
        self.current = ""
        self._tty = bool(getattr(stream, "isatty", lambda: False)())

    def line(self, name: str) -> str:
        elapsed = time.monotonic() - self.started
        count = f"{self.done}/{self.total}" if self.total else f"{self.done}"
        text = f"{self.label}: [{count}] {name} ({_secs(elapsed)} so far"
        if self.total and 1 < self.done <= self.total:
            left = elapsed / (self.done - 1) * (self.total - self.done + 1)
            text += f"; about {_secs(left)} left"
        return text + ")"

    def advance(self, name: str) -> None:
        self.done += 1
        self.current = name
        self._write(self.line(name))

    def detail(self, text: str) -> None:
        """Where the current step is; a step of its own when no numbered step runs."""
        if self.total is None or not self.done:
            self.advance(text)
        else:
            self._write(self.line(f"{self.current}: {text}"))

    def _write(self, text: str) -> None:
        if self._tty:
            self.stream.write("\r\x1b[2K" + text)
        else:
            self.stream.write(text + "\n")
        self.stream.flush()

    def close(self) -> None:
        if self._tty and self.done:
            elapsed = time.monotonic() - self.started
            self.stream.write(f"\r\x1b[2K{self.label}: done in {_secs(elapsed)}\n")
            self.stream.flush()


def _secs(s: float) -> str:
    return f"{s:.0f} s" if s < 120 else f"{s / 60:.1f} min"


@contextmanager
def steps(label: str, total: int | None = None, *, enabled: bool | None = None,
          stream: TextIO | None = None) -> Iterator[Steps | None]:
    """Listen for :func:`advance` calls while the block runs.

    ``enabled`` None: only when the stream (default stderr) is a terminal.
    """
    out = stream if stream is not None else getattr(sys.stderr, "unfiltered", sys.stderr)
    if enabled is None:
        enabled = bool(getattr(out, "isatty", lambda: False)())
    if not enabled:
        yield None
        return
    s = Steps(label, total, out)
    token = _ACTIVE.set(s)
    try:
        yield s
    finally:
        _ACTIVE.reset(token)
        s.close()


def advance(name: str) -> None:
    """Mark the start of a step (no effect unless a command listens)."""
    s = _ACTIVE.get()
    if s is not None:
        s.advance(name)


def detail(text: str) -> None:
    """Say where the current step is (no effect unless a command listens)."""
    s = _ACTIVE.get()
    if s is not None:
        s.detail(text)
