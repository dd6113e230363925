"""Where a report folder is written: a fresh folder beside the target, moved into place.

A report is evidence handed to assessors, so its folder holds only what this run
wrote: nothing stale from an earlier run, no file planted there, and no write through
a symbolic link someone placed in the target (the new folder is built empty and
renamed over the old one, so nothing inside the old one is ever opened for writing).

* missing target or an empty folder: written;
* a folder holding a previous procmetrics report (its ``manifest.json``): replaced
  only with ``overwrite``;
* anything else (a file, a device, a symbolic link, a non-empty folder of other
  files, ``''``): refused with :class:`~procmetrics.errors.OutputPathError`.
"""
from __future__ import annotations

import contextlib
import os
import shutil
import stat
import tempfile
from pathlib import Path
from typing import Iterator

from procmetrics.errors import ConfigError, OutputPathError


def _is_previous_report(out: Path) -> bool:
    from procmetrics.report.manifest import read_manifest
    man = out / "manifest.json"
    try:
        if not stat.S_ISREG(man.lstat().st_mode):
            return False
        read_manifest(man)
    except (OSError, ConfigError):
        return False
    return True


def _sqlite_family(names: tuple[str, ...]) -> set[str]:
    return {n + s for n in names for s in ("", "-wal", "-shm", "-journal", "-mining.lock")}


def check_target(out: str | os.PathLike[str], *, overwrite: bool = False,
                 adopt: tuple[str, ...] = ()) -> Path:
    """Refuse an output folder this run may not write (see the module docstring)."""
    if not os.fspath(out).strip():
        raise OutputPathError("--out needs a folder name ('' would mean the current folder)")
    path = Path(out).absolute()
    if path.is_symlink():
        raise OutputPathError(f"{path} is a symbolic link; give a real folder")
    if path.exists() and not path.is_dir():
        raise OutputPathError(f"{path} exists and is not a folder")
    if path.is_dir():
        try:
            entries = [e for e in os.listdir(path) if e not in _sqlite_family(adopt)]
        except OSError as exc:
            raise OutputPathError(f"cannot read the folder {path}: {exc.strerror}") from exc
        if entries:
            if not _is_previous_report(path):
                raise OutputPathError(f"{path} is not empty and is not a procmetrics report "
                                      "folder; give a new or empty folder")
            if not overwrite:
                raise OutputPathError(f"{path} holds an earlier report; give --overwrite to "
                                      "replace it (the whole folder is replaced)")
    return path


@contextlib.contextmanager
def fresh_folder(out: str | os.PathLike[str], *, overwrite: bool = False,
                 adopt: tuple[str, ...] = ()) -> Iterator[Path]:
    """Yield an empty folder beside ``out``; on success it replaces ``out``.

    ``adopt`` names regular files already in ``out`` (e.g. the store ``rerun`` mined
    there) that are moved into the new folder before the swap; everything else in
    ``out`` is removed with it.
    """
    path = check_target(out, overwrite=overwrite, adopt=adopt)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{path.name}.procmetrics-", dir=path.parent))
    except OSError as exc:
        raise OutputPathError(f"cannot create the report folder beside {path}: "
                              f"{exc.strerror or exc}") from exc
    umask = os.umask(0)
    os.umask(umask)
    try:
        os.chmod(tmp, 0o777 & ~umask)
        yield tmp
        _swap(tmp, path, adopt)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def _swap(tmp: Path, path: Path, adopt: tuple[str, ...]) -> None:
    try:
        if path.is_dir() and not path.is_symlink():
            for name in sorted(_sqlite_family(adopt)):
                src = path / name
                with contextlib.suppress(FileNotFoundError):
                    if stat.S_ISREG(src.lstat().st_mode):
                        os.replace(src, tmp / name)
            old = Path(tempfile.mkdtemp(prefix=f".{path.name}.old-", dir=path.parent))
            os.replace(path, old / "previous")     # rename: links inside are not followed
            os.replace(tmp, path)
            shutil.rmtree(old)                     # removes links themselves, not targets
        else:
            os.replace(tmp, path)
    except OSError as exc:
        raise OutputPathError(f"cannot move the new report into {path}: "
                              f"{exc.strerror or exc}") from exc
