"""Exceptions and warnings of our own.

Every user mistake the CLI can meet is one of these; the CLI maps each to one
line of text and an exit code (see ``EXIT_CODES``).
"""
from __future__ import annotations


# `procmetrics rerun`: the rebuilt figures differ from the manifest's.
EXIT_FIGURES_DIFFER = 16


class ProcmetricsError(Exception):
    """Base of every error this package raises on purpose."""

    exit_code = 1


class NotARepository(ProcmetricsError):
    """The path is not a git repository (or git cannot read it)."""

    exit_code = 3


class UnknownRef(ProcmetricsError):
    """The ref/revision does not name a commit in the repository."""

    exit_code = 3


class GitUnavailable(ProcmetricsError):
    """git is missing from PATH or too old."""

    exit_code = 3


class GitFailed(ProcmetricsError):
    """git ran but failed (corrupt objects, missing blobs, ...)."""

    exit_code = 3


class HistoryRewritten(ProcmetricsError):
    """The stored tip is no longer an ancestor of the new tip (force-push/rebase)."""

    exit_code = 4


class StoreError(ProcmetricsError):
    """The store cannot be opened, read or written."""

    exit_code = 5


class SchemaError(StoreError):
    """The store's schema version is unknown (e.g. written by a newer procmetrics)."""

    exit_code = 5


class StoreBusy(StoreError):
    """Another mining run holds the store."""

    exit_code = 6


class ConfigError(ProcmetricsError):
    """A user-supplied file (claims, subsystem rules) is malformed.

    The message names the file, line and key where known.
    """

    exit_code = 2

    def __init__(self, message: str, *, path: str | None = None,
                 line: int | None = None, key: str | None = None) -> None:
        where = ":".join(str(x) for x in (path, line) if x is not None)
        parts = [p for p in (where, f"key '{key}'" if key else None) if p]
        super().__init__(f"{', '.join(parts)}: {message}" if parts else message)
        self.path, self.line, self.key = path, line, key


class InsufficientData(ProcmetricsError):
    """Too few observations for the requested method."""

    exit_code = 7


class ProcmetricsWarning(UserWarning):
    """A statistical or data-quality caveat (also recorded on results)."""


class DataQualityWarning(ProcmetricsWarning):
    """Something about the mined data limits what can be concluded."""


class OutputPathError(ProcmetricsError):
    """An output path given (``--out``, ``-o``, ``--json``) cannot be written as asked:
    empty, a file or device where a folder is needed, a link, a non-empty folder that is
    not an earlier report, a folder that cannot be created or written."""

    exit_code = 2
