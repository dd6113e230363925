"""Read a claims file (TOML) into :class:`~procmetrics.claims.base.Claim` objects.

Format (version 1)::

    format = 1              # optional
    level = 0.95            # optional default interval level for every claim

    [[claim]]
    id = "review-up"        # unique; letters, digits, '-', '_', '.'
    text = "Review coverage rose after the policy of March 2023."
    kind = "review_coverage_rose"
    date = "policy"         # the --policy-date, or a date: 2023-03-01
    subsystem = "net"       # optional
    level = 0.9             # optional, this claim only

Kinds and their parameters are listed by ``procmetrics check --list-kinds``
(and in :data:`procmetrics.claims.registry.SPECS`). Every error names the
file, the line and the key.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from procmetrics.claims.base import POLICY, Claim
from procmetrics.claims.registry import SHARE_METRICS, SPECS
from procmetrics.errors import ConfigError

TOP_KEYS = {"format", "level", "claim"}
CLAIM_KEYS = {"id", "text", "kind", "level", "scope"}
_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")
_HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*(\]\]?)\s*(#.*)?$")
_KEYLINE = re.compile(r"""^\s*("([^"]+)"|'([^']+)'|([A-Za-z0-9_-]+))\s*=""")


@dataclass(frozen=True)
class ClaimsFile:
    path: str
    claims: tuple[Claim, ...]
    sha256: str

    def to_dict(self) -> dict[str, Any]:
        return {"path": self.path, "sha256": self.sha256, "n_claims": len(self.claims)}


class _Lines:
    """Finds the line of a key: at top level or inside the i-th ``[[claim]]`` table."""

    def __init__(self, text: str) -> None:
        self.top: dict[str, int] = {}
        self.claims: list[tuple[int, dict[str, int]]] = []   # (header line, key -> line)
        current: dict[str, int] | None = self.top
        for no, line in enumerate(text.splitlines(), 1):
            if line.lstrip().startswith("#"):
                continue
            h = _HEADER.match(line)
            if h:
                if h.group(1) == "[[" and h.group(2) == "claim":
                    self.claims.append((no, {}))
                    current = self.claims[-1][1]
                else:
                    current = None   # another table: its keys are reported by tomllib
                continue
            k = _KEYLINE.match(line)
            if k and current is not None:
                current.setdefault(k.group(2) or k.group(3) or k.group(4), no)

    def claim(self, i: int) -> int | None:
        return self.claims[i][0] if i < len(self.claims) else None

    def key(self, i: int | None, name: str) -> int | None:
        if i is None:
            return self.top.get(name)
        if i >= len(self.claims):
            return None
        header, keys = self.claims[i]
        return keys.get(name, header)


def _decode_error(exc: tomllib.TOMLDecodeError) -> tuple[str, int | None]:
    msg = str(exc)
    m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
    line = getattr(exc, "lineno", None) or (int(m.group(1)) if m else None)
    return re.sub(r"\s*\(at line \d+, column \d+\)", "", msg), line


def _check_value(ptype: str, value: Any, *, err: Any, key: str) -> Any:
    if ptype == "date":
        if isinstance(value, dt.datetime):
            return value.date()
        if isinstance(value, dt.date):
            return value
        if isinstance(value, str):
            if value == POLICY:
                return POLICY
            try:
                return dt.date.fromisoformat(value)
            except ValueError:
                pass
        raise err(f"expected a date (YYYY-MM-DD) or \"{POLICY}\", got {value!r}", key)
    if ptype in ("share", "number", "days", "years"):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise err(f"expected a number, got {value!r}", key)
        x = float(value)
        if ptype == "share" and not 0.0 <= x <= 1.0:
            raise err(f"a share is a number from 0 to 1 (e.g. 0.8 for 80%), got {value!r}", key)
        if ptype in ("days", "years") and not 0 < x < float("inf"):
            raise err(f"expected a positive number of {ptype}, got {value!r}", key)
        return x
    if ptype == "count":
        if isinstance(value, bool) or not isinstance(value, int) or value < 0:
            raise err(f"expected a whole number >= 0, got {value!r}", key)
        return value
    if ptype == "metric":
        if value not in SHARE_METRICS:
            raise err(f"unknown metric {value!r}; known: {', '.join(SHARE_METRICS)}", key)
        return value
    if not isinstance(value, str) or not value.strip():
        raise err(f"expected a non-empty text, got {value!r}", key)
    return value


def _level(value: Any, err: Any, key: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or \
            not 0.5 <= float(value) < 1.0:
        raise err(f"level is a confidence level from 0.5 to below 1 (e.g. 0.95), got {value!r}",
                  key)
    return float(value)


def parse_claims(text: str, path: str = "<claims>") -> ClaimsFile:
    """Parse and check a claims file's text; raise :class:`ConfigError` with line and key."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg, line = _decode_error(exc)
        raise ConfigError(f"not valid TOML: {msg}", path=path, line=line) from None
    except RecursionError:
        raise ConfigError("not usable TOML: nested too deeply", path=path) from None
    where = _Lines(text)

    def top_err(message: str, key: str) -> ConfigError:
        return ConfigError(message, path=path, line=where.key(None, key), key=key)

    for key in sorted(set(data) - TOP_KEYS):
        raise top_err(f"unknown top-level key; allowed: {', '.join(sorted(TOP_KEYS))} "
                      "(claims go in [[claim]] tables)", key)
    if "format" in data and data["format"] != 1:
        raise top_err(f"unsupported format {data['format']!r}; this procmetrics reads format 1",
                      "format")
    default_level = _level(data["level"], top_err, "level") if "level" in data else 0.95
    raw = data.get("claim")
    if raw is None:
        raise ConfigError("no claims: add at least one [[claim]] table", path=path, key="claim")
    if not isinstance(raw, list) or not all(isinstance(c, dict) for c in raw):
        raise top_err("'claim' must be an array of tables written [[claim]]", "claim")
    claims: list[Claim] = []
    seen: dict[str, int] = {}
    for i, c in enumerate(raw):
        def err(message: str, key: str, _i: int = i, _c: dict = c) -> ConfigError:
            label = f"claim {_c['id']!r}" if isinstance(_c.get("id"), str) else f"claim #{_i + 1}"
            return ConfigError(f"{label}: {message}", path=path, line=where.key(_i, key),
                               key=key)

        for key in ("id", "kind"):
            if key not in c:
                raise ConfigError(f"claim #{i + 1}: missing required key '{key}'", path=path,
                                  line=where.claim(i), key=key)
        cid = c["id"]
        if not isinstance(cid, str) or not _ID.match(cid):
            raise err("an id is 1-64 letters, digits, '-', '_' or '.', starting with a letter "
                      f"or digit; got {cid!r}", "id")
        if cid in seen:
            raise err(f"duplicate id (first used by claim #{seen[cid] + 1})", "id")
        seen[cid] = i
        kind = c["kind"]
        if kind not in SPECS:
            raise err(f"unknown kind {kind!r}; known kinds: {', '.join(sorted(SPECS))}", "kind")
        spec = SPECS[kind]
        allowed = CLAIM_KEYS | set(spec.params)
        for key in sorted(set(c) - allowed):
            raise err(f"key not used by kind {kind!r}; its parameters: "
                      f"{', '.join(sorted(spec.params)) or 'none'}", key)
        params: dict[str, Any] = {}
        for name, prm in spec.params.items():
            if name not in c:
                if prm.required:
                    raise ConfigError(f"claim {cid!r}: kind {kind!r} needs '{name}' "
                                      f"({prm.help or prm.type})", path=path,
                                      line=where.claim(i), key=name)
                continue
            params[name] = _check_value(prm.type, c[name], err=err, key=name)
        text_ = c.get("text", spec.summary)
        if not isinstance(text_, str):
            raise err(f"expected a text, got {text_!r}", "text")
        level = _level(c["level"], err, "level") if "level" in c else default_level
        scope_name = c.get("scope")
        if scope_name is not None and (not isinstance(scope_name, str) or not scope_name):
            raise err(f"'scope' names one scope of the scope file (--scope-file), got "
                      f"{scope_name!r}", "scope")
        claims.append(Claim(cid, text_.strip(), kind, params, level, where.claim(i),
                            scope=scope_name))
    return ClaimsFile(path, tuple(claims), hashlib.sha256(text.encode("utf-8")).hexdigest())


def load_claims(path: str | Path) -> ClaimsFile:
    """Read and parse a claims file from disk."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read claims file: {exc.strerror or exc}", path=str(p)) from exc
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise ConfigError("claims file is not UTF-8 text", path=str(p), line=line) from None
    return parse_claims(text, str(p))
