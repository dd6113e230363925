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


# -- credentials in URLs -----------------------------------------------------------------
#: query parameters whose value is a secret (compared case-insensitively)
SECRET_PARAMS = frozenset({"password", "passwd", "pwd", "pass", "sslpassword", "token",
                           "access_token", "auth_token", "api_key", "apikey", "secret",
                           "client_secret", "sslkey_password", "private_key_passphrase"})
_PARAM = re.compile(r"([?&;])([^=&;#]*)=([^&;#]*)")


def _secrets(url: str) -> list[str]:
    out: list[str] = []
    if "://" not in url:
        return out
    tail = url.split("://", 1)[1]
    head, _, query = tail.partition("?")
    if "@" in head:
        cred = head.rsplit("@", 1)[0]
        if ":" in cred:
            out.append(cred.split(":", 1)[1])
    for _sep, key, value in _PARAM.findall("?" + query):
        if key.strip().lower() in SECRET_PARAMS and value:
            out.append(value)
    return [s for s in out if s]


def mask_url(url: str) -> str:
    """``url`` with its credentials shown as ``***``: the password of the user-info part
    and the value of every secret query parameter (``password``, ``sslpassword``,
    ``token``, …). Used wherever a store URL is printed or stored (manifest.json)."""
    if "://" not in url:
        return url
    scheme, tail = url.split("://", 1)
    head, q, query = tail.partition("?")
    if "@" in head:
        cred, host = head.rsplit("@", 1)
        user = cred.split(":", 1)[0]
        head = f"{user}:***@{host}" if ":" in cred else f"{user}@{host}"
    if q:
        query = _PARAM.sub(lambda m: m.group(1) + m.group(2) + "=" + (
            "***" if m.group(2).strip().lower() in SECRET_PARAMS and m.group(3)
            else m.group(3)), "?" + query)[1:]
    return f"{scheme}://{head}{q}{query}"


def scrub_secrets(text: str, url: str) -> str:
    """``text`` (an error message) without any credential of ``url``, raw or
    percent-decoded, and without ``password=…`` pairs a driver may echo."""
    from urllib.parse import unquote
    for secret in sorted(set(_secrets(url)) | {unquote(s) for s in _secrets(url)},
                         key=len, reverse=True):
        if len(secret) >= 1:
            text = text.replace(secret, "***")
    return re.sub(r"(?i)\b(password|sslpassword|token)(\s*=\s*)('[^']*'|\S+)", r"\1\2***",
                  text)
