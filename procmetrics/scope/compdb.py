"""The files a JSON compilation database says were compiled, as repository paths.

The format (an open format compilers and build systems write, usually named
``compile_commands.json``) is a JSON array of objects, each with ``directory``
(the working folder of the compile), ``file`` (the main source, absolute or
relative to ``directory``) and either ``arguments`` (a list) or ``command`` (one
string). Each ``file`` is resolved against its ``directory``, symbolic links
resolved, and made relative to the repository's top folder; files outside the
repository (generated sources in a build folder, system files) are dropped and
counted in a note, never silently.
"""
from __future__ import annotations

import json
import os
from pathlib import Path

from procmetrics.errors import ConfigError


def compiled_paths(raw: bytes, file: str, repo_root: str) -> tuple[list[str], list[str]]:
    """Repository-relative paths of the compiled files (sorted, unique) and notes."""
    try:
        data = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ConfigError(f"{file}: not a JSON compilation database ({exc})",
                          key="--scope") from exc
    if not isinstance(data, list):
        raise ConfigError(f"{file}: a compilation database is a JSON array of entries",
                          key="--scope")
    root = os.path.realpath(repo_root)
    inside: set[str] = set()
    outside: list[str] = []
    for k, entry in enumerate(data, 1):
        if not isinstance(entry, dict) or not isinstance(entry.get("directory"), str) \
                or not isinstance(entry.get("file"), str):
            raise ConfigError(f"{file}: entry {k} needs 'directory' and 'file' (text)",
                              key="--scope")
        if not isinstance(entry.get("arguments"), list) and \
                not isinstance(entry.get("command"), str):
            raise ConfigError(f"{file}: entry {k} needs 'arguments' (a list) or 'command'",
                              key="--scope")
        full = os.path.join(entry["directory"], entry["file"])
        full = os.path.realpath(os.path.normpath(full))
        rel = os.path.relpath(full, root)
        if rel == os.curdir or rel == os.pardir or rel.startswith(os.pardir + os.sep) \
                or os.path.isabs(rel):
            outside.append(entry["file"])
            continue
        inside.add(Path(rel).as_posix())
    notes = []
    if outside:
        shown = ", ".join(sorted(set(outside))[:5]) + (" ..." if len(set(outside)) > 5 else "")
        notes.append(f"{len(outside)} of {len(data)} entries compile a file outside the "
                     f"repository ({shown}); they are not in the scope")
    if not inside:
        raise ConfigError(f"{file}: no entry compiles a file inside the repository {root}",
                          key="--scope")
    return sorted(inside), notes
