"""Lazy public names for a package ``__init__``: a name is imported from its module on
first use, so importing one module of a package does not load its siblings (the CLI
builds its parser without the statistics stack)."""
from __future__ import annotations

from importlib import import_module
from typing import Any, Callable, Mapping


def lazy_getattr(package: str, exports: Mapping[str, str]) -> Callable[[str], Any]:
    """A module-level ``__getattr__`` for ``package``: ``exports`` maps each public name
    to the submodule (relative to ``package``) that defines it."""
    def __getattr__(name: str) -> Any:
        if name in exports:
            return getattr(import_module(f"{package}.{exports[name]}"), name)
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    return __getattr__
