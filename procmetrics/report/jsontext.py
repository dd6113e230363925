"""Indented JSON text, as ``json.dumps(value, sort_keys=True, indent=2, allow_nan=False)``
writes it, at C speed for the bulk of a report.

The standard library's encoder runs in Python when it indents: a chain of generators
per nesting level, over a minute for a million table cells. Here containers are
walked in Python, and every object or list whose members are all plain scalars
(text, integers, floats, booleans, None; text keys) is written by the library's C
encoder in one call: its item separator is set to the comma, newline and indent of
that level, so the text is the indenting encoder's own. The tables' rows are such
objects, so a table costs one C call a row. ``tests/report/test_json_text.py`` checks
the text against ``json.dumps`` itself.
"""
from __future__ import annotations

import json
import math
from functools import lru_cache
from typing import Any

_SCALARS = frozenset({str, int, float, bool, type(None)})


def indented(value: Any, *, ensure_ascii: bool) -> str:
    """The text of ``json.dumps(value, sort_keys=True, indent=2, allow_nan=False,
    ensure_ascii=ensure_ascii)`` (no trailing newline). ``value`` holds only dicts with
    text keys, lists or tuples, and scalars (``to_plain`` makes such values)."""
    out: list[str] = []
    _encode(value, "\n", out, _text_encoder(ensure_ascii))
    return "".join(out)


def _text_encoder(ensure_ascii: bool) -> Any:
    return json.encoder.encode_basestring_ascii if ensure_ascii else \
        json.encoder.encode_basestring


@lru_cache(maxsize=64)
def _flat(nl: str, ensure_ascii: bool) -> json.JSONEncoder:
    """The C encoder for a flat container at the level whose newline and indent is
    ``nl``: members separated by a comma and the next level's newline and indent."""
    return json.JSONEncoder(sort_keys=True, ensure_ascii=ensure_ascii, allow_nan=False,
                            separators=("," + nl + "  ", ": "))


def _is_flat(o: Any) -> bool:
    if isinstance(o, dict):
        return all(type(k) is str for k in o) and all(type(v) in _SCALARS
                                                     for v in o.values())
    return all(type(v) in _SCALARS for v in o)


def _encode(o: Any, nl: str, out: list[str], text: Any) -> None:
    """Append the indented JSON text of ``o``; ``nl`` is the newline and indent of its
    own level (the standard encoder's rules, in its order of checks)."""
    if isinstance(o, str):
        out.append(text(o))
    elif o is None:
        out.append("null")
    elif o is True:
        out.append("true")
    elif o is False:
        out.append("false")
    elif isinstance(o, int):
        out.append(int.__repr__(o))
    elif isinstance(o, float):
        if o != o or o in (math.inf, -math.inf):
            raise ValueError(f"Out of range float values are not JSON compliant: {o!r}")
        out.append(float.__repr__(o))
    elif isinstance(o, (list, tuple, dict)):
        if not o:
            out.append("{}" if isinstance(o, dict) else "[]")
        elif _is_flat(o):
            flat = _flat(nl, text is json.encoder.encode_basestring_ascii).encode(o)
            out.append(flat[0] + nl + "  " + flat[1:-1] + nl + flat[-1])
        elif isinstance(o, dict):
            _container("{}", [(_key(k, text) + ": ", v)
                              for k, v in sorted(o.items())], nl, out, text)
        else:
            _container("[]", [("", v) for v in o], nl, out, text)
    else:
        raise TypeError(f"Object of type {o.__class__.__name__} is not JSON serializable")


def _key(k: Any, text: Any) -> str:
    if not isinstance(k, str):
        raise TypeError(f"keys must be str, not {type(k).__name__}")
    return text(k)


def _container(brackets: str, items: list[tuple[str, Any]], nl: str, out: list[str],
               text: Any) -> None:
    """A list (items with empty prefixes) or an object (prefix: the key and ``": "``)."""
    inner = sep = nl + "  "
    out.append(brackets[0])
    for prefix, v in items:
        out.append(sep + prefix)
        sep = "," + inner
        _encode(v, inner, out, text)
    out.append(nl + brackets[1])
