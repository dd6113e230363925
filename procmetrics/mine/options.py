"""Configuration and result of a mining run (frozen dataclasses)."""
from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from datetime import date, datetime, time, timedelta, timezone
from pathlib import Path
from typing import Literal

from procmetrics.errors import ConfigError

MergeFiles = Literal["none", "first-parent"]
RewritePolicy = Literal["fail", "remine"]

# options that change which rows a run stores; incremental runs must agree on them
CONTENT_OPTIONS = ("since", "until", "line_counts", "merge_files")


@dataclass(frozen=True)
class MineOptions:
    """What to mine and how.

    ``since``/``until`` filter by committer date (UTC): a date alone means the
    start of that day for ``since`` and its end for ``until``; datetimes
    without a zone are taken as UTC. ``merge_files``: ``"none"`` (default:
    merge commits get no file rows, so their changes are counted once, on the
    merged commits) or ``"first-parent"`` (the diff against the first parent,
    i.e. what the merge brought into the mainline).
    """

    ref: str = "HEAD"
    since: str | date | datetime | None = None
    until: str | date | datetime | None = None
    line_counts: bool = True
    merge_files: MergeFiles = "none"
    subsystem_rules: str | Path | None = None
    use_maintainers: bool = True
    prefix_depth: int = 1
    repo_name: str | None = None
    rewrite_policy: RewritePolicy = "fail"
    batch_size: int = 5000
    progress: bool | None = None        # None: a bar when stderr is a terminal

    def __post_init__(self) -> None:
        if self.merge_files not in ("none", "first-parent"):
            raise ConfigError(f"merge_files must be 'none' or 'first-parent', "
                              f"not {self.merge_files!r}")
        if self.rewrite_policy not in ("fail", "remine"):
            raise ConfigError(f"rewrite_policy must be 'fail' or 'remine', "
                              f"not {self.rewrite_policy!r}")
        if self.prefix_depth < 1:
            raise ConfigError(f"prefix depth must be at least 1, got {self.prefix_depth}")
        if self.batch_size < 1:
            raise ConfigError("batch_size must be positive")
        if not self.ref or self.ref.startswith("-"):
            raise ConfigError(f"not a usable ref: {self.ref!r}")
        s, u = self.since_epoch(), self.until_epoch()
        if s is not None and u is not None and s > u:
            raise ConfigError("--since is later than --until")

    def since_epoch(self) -> int | None:
        return _epoch(self.since, end_of_day=False, name="since")

    def until_epoch(self) -> int | None:
        return _epoch(self.until, end_of_day=True, name="until")

    def to_json(self) -> str:
        d = asdict(self)
        d["since"], d["until"] = self.since_epoch(), self.until_epoch()
        d["subsystem_rules"] = str(self.subsystem_rules) if self.subsystem_rules else None
        d.pop("progress")
        return json.dumps(d, sort_keys=True)


def _epoch(value: str | date | datetime | None, *, end_of_day: bool, name: str) -> int | None:
    if value is None:
        return None
    if isinstance(value, str):
        text = value.strip()
        try:
            if len(text) == 10:
                value = date.fromisoformat(text)
            else:
                value = datetime.fromisoformat(text.replace("Z", "+00:00"))
        except ValueError:
            raise ConfigError(f"--{name}: {value!r} is not an ISO date "
                              "(YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS][+HH:MM])") from None
    if not isinstance(value, datetime):
        value = datetime.combine(value, time(0), tzinfo=timezone.utc)
        if end_of_day:
            value = value + timedelta(days=1, seconds=-1)
    elif value.tzinfo is None:
        value = value.replace(tzinfo=timezone.utc)
    return int(value.timestamp())


@dataclass(frozen=True)
class MiningSummary:
    """What a run did and what the store holds for the repository afterwards."""

    repo: str
    run_id: int
    head_hash: str
    base_hash: str | None
    incremental: bool
    new_commits: int
    commits: int
    merges: int
    file_changes: int
    trailers: int
    fix_status: dict[str, int] = field(default_factory=dict)
    reverts: int = 0
    unparsed: int = 0
    tags: int = 0
    is_shallow: bool = False
    mapping_kind: str = ""
    mapping_source: str = ""
    seconds: float = 0.0
    cleaned_runs: tuple[int, ...] = ()

    @property
    def fix_refs(self) -> int:
        return sum(self.fix_status.values())

    def to_dict(self) -> dict[str, object]:
        d = asdict(self)
        d["fix_refs"] = self.fix_refs
        d["cleaned_runs"] = list(self.cleaned_runs)
        return d
