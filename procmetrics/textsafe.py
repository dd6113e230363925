"""Text from repositories and user files made safe for a terminal.

Subsystem names, repository names, author names, paths and claim text are data: a
MAINTAINERS title or a folder name may carry an escape sequence that sets the window
title, clears the screen or hides text. :func:`printable` shows every control
character as an escape (``\\x1b``, ``\\x0d``, ``\\u202e``), keeping newline and tab.
The CLI wraps ``sys.stdout`` and ``sys.stderr`` in :class:`PrintableStream` for the
whole run, so every command's output passes through this one place.
"""
from __future__ import annotations

import re
import sys
from typing import Any, TextIO

# C0 controls except tab and newline, DEL, C1 controls, and the Unicode bidirectional
# overrides/isolates (they reorder what a terminal shows); line/paragraph separators.
_UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u200e\u200f\u2028\u2029"
                     "\u202a-\u202e\u2066-\u2069]")


def _escape(m: re.Match[str]) -> str:
    c = m.group()
    return f"\\x{ord(c):02x}" if ord(c) < 0x100 else f"\\u{ord(c):04x}"


def printable(text: Any) -> str:
    """``text`` (made ``str``) with control characters shown escaped; ``\\n`` and ``\\t``
    kept. The same input always gives the same output; printable text is unchanged."""
    s = text if isinstance(text, str) else str(text)
    return _UNSAFE.sub(_escape, s)


class PrintableStream:
    """A text stream that writes :func:`printable` text to the stream it wraps.

    ``unfiltered`` is the wrapped stream, for data written on purpose (a CSV or JSON
    document sent to a pipe) and for the progress bar's carriage returns.
    """

    def __init__(self, stream: TextIO) -> None:
        self.unfiltered = stream

    def write(self, text: str) -> int:
        self.unfiltered.write(printable(text))
        return len(text)

    def writelines(self, lines) -> None:
        for line in lines:
            self.write(line)

    def __getattr__(self, name: str) -> Any:
        return getattr(self.unfiltered, name)


def unfiltered(stream: Any) -> Any:
    """The stream under a :class:`PrintableStream` (else ``stream`` itself)."""
    return getattr(stream, "unfiltered", stream)


def data_stdout() -> Any:
    """Where a data document (CSV, JSON) for standard output goes: exact bytes to a pipe
    or file, printable text when standard output is a terminal."""
    out = sys.stdout
    raw = unfiltered(out)
    try:
        tty = raw.isatty()
    except (AttributeError, ValueError):
        tty = False
    return out if tty else raw


# -- CSV cells ---------------------------------------------------------------------------
#: First characters that make a spreadsheet read a cell as a formula (or a DDE call).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def csv_text_cell(text: str, *, raw: bool = False) -> str:
    """A text cell for a CSV file: a leading ``'`` when the text starts like a formula
    (``=``, ``+``, ``-``, ``@``, tab, carriage return), so a spreadsheet shows it as text;
    ``raw`` keeps the exact text. Only text cells go through this: numbers (negatives
    included) stay numbers."""
    if not raw and text and text[0] in FORMULA_STARTS:
        return "'" + text
    return text


def neutralise_frame(df: Any, *, raw: bool = False) -> Any:
    """A copy of a DataFrame whose text cells went through :func:`csv_text_cell`."""
    if raw:
        return df
    out = df.copy()
    for col in out.columns:
        s = out[col]
        if s.dtype == object or str(s.dtype).startswith("string"):
            out[col] = s.map(lambda v: csv_text_cell(v) if isinstance(v, str) else v)
    return out
