"""The one computation of carry-over figures that the ``carryover`` command, the
claims (``check``) and the report share: read the exclusions file, read the
tree's and the upstream's tables from the store, build the per-fix table.

Every caller goes through :func:`carryover_from_engine`, so for the same store,
exclusions file and date the missing list and the latency figures are the same
wherever they are printed.
"""
from __future__ import annotations

import json
from typing import Any, Sequence

import pandas as pd

from procmetrics.errors import ConfigError


def read_exclusions(path: str | None) -> list[Any]:
    """The exclusions file (TOML): ``[[exclude]]`` tables with ``upstream`` and ``reason``."""
    from procmetrics.analyse.carryover.missing import Exclusion

    if path is None:
        return []
    import tomllib
    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except OSError as exc:
        raise ConfigError(f"cannot read the exclusions file {path}: {exc.strerror}") from exc
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML ({exc})") from exc
    items = data.get("exclude", [])
    unknown = set(data) - {"exclude"}
    if unknown or not isinstance(items, list):
        raise ConfigError(f"{path}: expected only [[exclude]] tables, found {sorted(unknown)}")
    out = []
    for i, item in enumerate(items, 1):
        up, reason = item.get("upstream"), item.get("reason")
        if (not isinstance(up, str) or len(up) < 7
                or any(ch not in "0123456789abcdefABCDEF" for ch in up)):
            raise ConfigError(f"{path}: exclusion {i}: 'upstream' must be a commit id "
                              "(7 to 40 hex digits)")
        if not isinstance(reason, str) or not reason.strip():
            raise ConfigError(f"{path}: exclusion {i} ({up}): a 'reason' is required")
        out.append(Exclusion(up.lower(), reason.strip()))
    return out


def parse_as_of(value: str | None, option: str = "--as-of") -> pd.Timestamp | None:
    """A date to judge the tree at (UTC), or None for its tip."""
    if value is None:
        return None
    try:
        when = pd.Timestamp(value)
    except ValueError as exc:
        raise ConfigError(f"{option}: not a date: {value!r}") from exc
    return when.tz_localize("UTC") if when.tzinfo is None else when.tz_convert("UTC")


def carryover_from_engine(engine: Any, repo: str | None, upstream: str | None = None,
                          exclusions: Sequence[Any] = (), as_of: pd.Timestamp | None = None
                          ) -> dict[str, Any]:
    """Per-fix table (``table``), matches, tip and judging dates, the tree's fix
    references resolved upstream, and the names of tree and upstream.

    Raises :class:`~procmetrics.errors.StoreError` when no upstream reference is
    recorded and :class:`~procmetrics.errors.ConfigError` when the choice is not unique.
    """
    from procmetrics.analyse.carryover.build import build_carryover
    from procmetrics.store.upstream import carryover_tables

    data = carryover_tables(engine, repo, upstream)
    pm = json.loads(data["path_map"]) if data["path_map"] else None
    out = build_carryover(data["tree_tables"], data["upstream_tables"], data["upstream"],
                          list(exclusions), as_of,
                          None if pm is None else [tuple(p) for p in pm["pairs"]])
    out.update(tree=data["tree"], upstream=data["upstream"], exclusions=list(exclusions),
               path_map=pm, path_map_text=describe_path_map(pm))
    return out


def describe_path_map(pm: dict[str, Any] | None) -> str:
    """One line on which upstream paths count and how the map was obtained."""
    if pm is None:
        return "the whole upstream counts (no path map)"
    maps = ", ".join(f"{u or '(root)'} -> {t or '(root)'}" for u, t in pm["pairs"])
    note = f"; {pm['note']}" if pm.get("note") else ""
    return (f"only upstream changes to mirrored paths count: {maps} ({pm['how']} when the "
            f"upstream was mined{note})")


def carryover_for(engine: Any, repo: str, exclusions: Sequence[Any] = ()
                  ) -> dict[str, Any] | None:
    """As :func:`carryover_from_engine` for the claims and the report, or None when
    ``repo`` has no upstream reference or several (the ``carryover`` command chooses one)."""
    from procmetrics.store.tables import read_table

    refs = read_table(engine, "upstream_references", repo)
    if refs.empty or refs["upstream_repo"].nunique() > 1:
        return None
    return carryover_from_engine(engine, repo, None, exclusions)
