"""Checks a mining run makes before it writes: where the store is, and whether the
identity or subsystem mapping the store was built with would change under it."""
from __future__ import annotations

import json
import warnings
from pathlib import Path
from typing import Any, Sequence

from procmetrics.errors import ConfigError, DataQualityWarning
from procmetrics.mine.options import MineOptions
from procmetrics.mine.subsystems import PathMapper
from procmetrics.store import resolve_url


def refuse_store_inside(store: Any, repositories: Sequence[Any]) -> None:
    """Refuse a SQLite store (given, or the default ``./procmetrics.sqlite``) that lies
    inside a repository being mined: the mined repository is read-only to us, and a
    store there would even show up in the work tree (``git status``)."""
    url = resolve_url(store)
    if not url.startswith("sqlite:///"):
        return
    path = Path(url[len("sqlite:///"):].split("?", 1)[0])
    for repo in repositories:
        top = Path(repo).expanduser().resolve()
        if path == top or top in path.parents:
            what = "the default store ./procmetrics.sqlite" if store is None \
                else f"the store {path}"
            raise ConfigError(f"{what} would be written inside the mined repository {top}; "
                              "procmetrics never writes there: give --store outside it "
                              f"(e.g. --store {top.parent / 'procmetrics.sqlite'})",
                              key="--store")


def check_rules_change(stored: tuple[str, str] | None, mapper: PathMapper,
                        opts: MineOptions) -> None:
    """A subsystem rules file given for the first time, changed or dropped would remap
    every stored path (earlier subsystem claims would then be judged against another
    mapping): refused unless ``--rewrite-policy remine`` asks for it (then a warning).
    A new MAINTAINERS blob at a new tip is the repository's own change and is followed."""
    if stored is None or stored[0] is None or stored == (mapper.kind, mapper.source):
        return
    if "rules" not in (stored[0], mapper.kind):
        return
    if stored[0] == mapper.kind == "rules" and \
            str(stored[1]).rsplit("sha256:", 1)[-1] == mapper.source.rsplit("sha256:", 1)[-1]:
        return              # the same rules (same content), perhaps from another path
    change = (f"from {stored[0]} ({stored[1]}) to {mapper.kind} ({mapper.source})")
    if opts.rewrite_policy == "remine":
        warnings.warn(f"the subsystem mapping changes {change}: every stored path is mapped "
                      "again (--rewrite-policy remine)", DataQualityWarning, stacklevel=3)
        return
    raise ConfigError(f"the subsystem mapping would change {change}, remapping every commit "
                      "stored earlier; give the same --subsystem-rules as before, or "
                      "--rewrite-policy remine to map the whole store again",
                      key="--subsystem-rules")


def identity_mapping_changed(previous: list[str], env: dict[str, str],
                              opts: MineOptions) -> bool:
    """True when the .mailmap changed and ``remine`` asks to map every commit again.

    An incremental run maps only the new commits; without ``remine`` the change is
    reported as a data-quality warning and the stored commits keep their identities.
    """
    seen = {json.loads(p).get("identity_mapping") for p in previous} - {None}
    if not seen or seen == {env["identity_mapping"]}:
        return False
    before = ", ".join(sorted(seen))
    if opts.rewrite_policy == "remine":
        return True
    warnings.warn(f"the .mailmap changed since the last run ({before} -> "
                  f"{env['identity_mapping']}): commits stored earlier keep the old "
                  "identities; run again with --rewrite-policy remine to map every commit "
                  "the same way", DataQualityWarning, stacklevel=3)
    return False
