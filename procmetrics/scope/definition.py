"""A scope definition: named include/exclude path globs, read from a file.

Three sources, told apart by the file (``--scope FILE[:NAME]``):

- a **scope file** (``*.toml``), our own format::

      # every table under [scope] is one named scope
      [scope.shipped]
      description = "what goes into the product"      # optional
      include = ["src/**", "drivers/net/**"]           # globs (see procmetrics.scope.matcher)
      exclude = ["**/test/**"]                         # optional

  a path is in the scope when an include pattern matches it and no exclude
  pattern does;
- a **JSON compilation database** (``*.json``; see :mod:`procmetrics.scope.compdb`):
  the compiled files, each a literal path;
- a **path list** (any other name): one repository-relative path a line, ``#``
  starts a comment, blank lines are skipped; each line a literal path.

The file's SHA-256 is kept with the definition, so a report names exactly the
scope it was built with.
"""
from __future__ import annotations

import hashlib
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from procmetrics.errors import ConfigError
from procmetrics.scope.matcher import PatternSet

_SCOPE_KEYS = {"description", "include", "exclude"}


@dataclass(frozen=True)
class ScopeDef:
    """One scope: its name, include and exclude patterns, and where it came from."""

    name: str
    include: PatternSet
    exclude: PatternSet
    #: ``toml`` | ``compile_commands`` | ``path_list``
    kind: str
    source: str
    sha256: str
    description: str = ""
    #: notes about the source (e.g. compilation-database entries outside the repository)
    notes: tuple[str, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, object]:
        return {"name": self.name, "kind": self.kind, "file": Path(self.source).name,
                "file_sha256": self.sha256, "description": self.description,
                "include": list(self.include.patterns), "exclude": list(self.exclude.patterns),
                "notes": list(self.notes)}


def split_spec(spec: str) -> tuple[str, str | None]:
    """``FILE[:NAME]`` -> (file, name); a ``:`` that is part of an existing file name stays."""
    if Path(spec).exists() or ":" not in spec:
        return spec, None
    file, _, name = spec.rpartition(":")
    return file, (name or None)


def _read_bytes(path: str, what: str) -> bytes:
    try:
        return Path(path).read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read the {what} {path}: {exc.strerror or exc}",
                          key="--scope") from exc


def read_scope(spec: str, repo_root: str | None = None) -> ScopeDef:
    """The scope a ``--scope FILE[:NAME]`` names.

    ``repo_root`` is the repository's top folder, needed to make a compilation
    database's absolute paths repository-relative.
    """
    file, name = split_spec(spec)
    raw = _read_bytes(file, "scope file")
    digest = hashlib.sha256(raw).hexdigest()
    low = file.lower()
    if low.endswith(".toml"):
        return _from_toml(raw, file, name, digest)
    if name is not None:
        raise ConfigError(f"--scope {spec}: only a scope file (.toml) holds named scopes",
                          key="--scope")
    if low.endswith(".json"):
        from procmetrics.scope.compdb import compiled_paths

        if repo_root is None:
            raise ConfigError("a compilation database needs the repository's folder",
                              key="--scope")
        paths, notes = compiled_paths(raw, file, repo_root)
        return ScopeDef("compiled files", PatternSet.build(paths, literal=True, where=file),
                        PatternSet((), ()), "compile_commands", file, digest,
                        "the main source files the compilation database lists", tuple(notes))
    return ScopeDef("listed paths", PatternSet.build(read_path_list(raw, file), literal=True,
                                                     where=file),
                    PatternSet((), ()), "path_list", file, digest,
                    "the paths the list names")


def read_path_list(raw: bytes, file: str) -> list[str]:
    """One path a line; ``#`` starts a comment; blank lines skipped; duplicates kept once."""
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{file}: not UTF-8 text ({exc.reason})", key="--scope") from exc
    out: dict[str, None] = {}
    for line in text.splitlines():
        entry = line.split("#", 1)[0].strip()
        if entry:
            out[entry] = None
    if not out:
        raise ConfigError(f"{file}: the path list names no path", key="--scope")
    return list(out)


def _from_toml(raw: bytes, file: str, name: str | None, digest: str) -> ScopeDef:
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise ConfigError(f"{file}: not valid TOML ({exc})", key="--scope") from exc
    unknown = set(data) - {"scope"}
    scopes = data.get("scope")
    if unknown or not isinstance(scopes, dict) or not scopes:
        raise ConfigError(f"{file}: expected [scope.NAME] tables only"
                          + (f", found {sorted(unknown)}" if unknown else ""), key="--scope")
    if name is None:
        if len(scopes) > 1:
            raise ConfigError(f"{file} holds several scopes ({', '.join(sorted(scopes))}); "
                              f"choose one with --scope {file}:NAME", key="--scope")
        name = next(iter(scopes))
    if name not in scopes:
        raise ConfigError(f"{file} has no scope {name!r} (it has: "
                          f"{', '.join(sorted(scopes))})", key="--scope")
    body = scopes[name]
    where = f"{file} [scope.{name}]"
    if not isinstance(body, dict):
        raise ConfigError(f"{where}: expected a table", key="--scope")
    bad = set(body) - _SCOPE_KEYS
    if bad:
        raise ConfigError(f"{where}: unknown keys {sorted(bad)} (known: "
                          f"{', '.join(sorted(_SCOPE_KEYS))})", key="--scope")
    inc, exc_ = body.get("include"), body.get("exclude", [])
    if not isinstance(inc, list) or not inc:
        raise ConfigError(f"{where}: 'include' must be a non-empty list of globs",
                          key="--scope")
    if not isinstance(exc_, list):
        raise ConfigError(f"{where}: 'exclude' must be a list of globs", key="--scope")
    desc = body.get("description", "")
    if not isinstance(desc, str):
        raise ConfigError(f"{where}: 'description' must be text", key="--scope")
    return ScopeDef(name, PatternSet.build(inc, where=where), PatternSet.build(exc_, where=where),
                    "toml", file, digest, desc)
