"""Report metadata (``--meta FILE``) and the input files copied into the report folder.

The metadata file is TOML with the document's control data, all optional::

    document_id  = "QA-EVID-0042"
    revision     = "B"
    title        = "Process evidence for the 2026 audit"   # replaces the default title
    author       = "A. Writer"
    reviewer     = "R. Checker"
    approver     = "P. Owner"
    organisation = "Example Systems Ltd"
    date         = "2026-12-01"      # document date; default: the day the report is made

They are printed in the control block of page one and in the running header
and footer of the PDF. The claims file, the subsystem-rules file of the
mining run and the metadata file are copied into ``inputs/`` of the report
folder, so that the folder carries everything ``procmetrics rerun`` needs
except the store and the repository.
"""
from __future__ import annotations

import shutil
import tomllib
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any

from procmetrics.errors import ConfigError

INPUTS_DIR = "inputs"


@dataclass(frozen=True)
class ReportMeta:
    """The document control data; every field optional (``""`` when absent)."""

    document_id: str = ""
    revision: str = ""
    title: str = ""
    author: str = ""
    reviewer: str = ""
    approver: str = ""
    organisation: str = ""
    date: str = ""

    def to_dict(self) -> dict[str, str]:
        return {f.name: getattr(self, f.name) for f in fields(self)}

    def identity(self) -> str:
        """``"QA-EVID-0042 rev. B"``, or ``""`` when no document identity was given."""
        if not self.document_id:
            return ""
        return self.document_id + (f" rev. {self.revision}" if self.revision else "")

    def control_rows(self) -> list[tuple[str, str]]:
        """(label, value) rows of the control block; absent values say so."""
        labels = [("document_id", "Document"), ("revision", "Revision"),
                  ("organisation", "Organisation"), ("author", "Prepared by"),
                  ("reviewer", "Reviewed by"), ("approver", "Approved by")]
        return [(lab, getattr(self, k) or "not given") for k, lab in labels]


_KEYS = {f.name for f in fields(ReportMeta)}
#: accepted spelling variants
_ALIASES = {"organization": "organisation", "id": "document_id", "document": "document_id"}


def load_meta(path: str | Path | None) -> ReportMeta:
    """Read and check a metadata file; ``None`` gives an empty :class:`ReportMeta`."""
    if path is None:
        return ReportMeta()
    p = Path(path)
    try:
        raw = tomllib.loads(p.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ConfigError(f"cannot read the report metadata file: {exc.strerror or exc}",
                          path=str(p)) from exc
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML: {exc}", path=str(p)) from None
    except UnicodeDecodeError:
        raise ConfigError("not UTF-8 text", path=str(p)) from None
    out: dict[str, str] = {}
    for key, value in raw.items():
        k = _ALIASES.get(key, key)
        if k not in _KEYS:
            raise ConfigError("unknown key; expected one of " + ", ".join(sorted(_KEYS)),
                              path=str(p), key=key)
        if not isinstance(value, (str, int, float)) or isinstance(value, bool):
            if hasattr(value, "isoformat"):
                value = value.isoformat()
            else:
                raise ConfigError("expected a text value", path=str(p), key=key)
        text = str(value).strip()
        if len(text) > 200 or any(ch in text for ch in "\r\n\x00"):
            raise ConfigError("expected one line of at most 200 characters", path=str(p),
                              key=key)
        out[k] = text
    return ReportMeta(**out)


def copy_input(src: str | Path, out: Path, name: str) -> str:
    """Copy ``src`` to ``out/inputs/name``; return the path relative to ``out`` (POSIX)."""
    dest = out / INPUTS_DIR / name
    dest.parent.mkdir(parents=True, exist_ok=True)
    if Path(src).resolve() != dest.resolve():
        shutil.copyfile(src, dest)
    return f"{INPUTS_DIR}/{name}"


def input_record(src: str | Path, rel: str, sha256: str, **extra: Any) -> dict[str, Any]:
    """What the manifest says about one copied input: the copy (relative), the original."""
    return {"path": rel, "original_path": str(Path(src).resolve()), "sha256": sha256, **extra}


def check_commit_url(template: str | None) -> str | None:
    """Validate a ``--commit-url`` template: http(s), exactly one ``{hash}``, no other braces."""
    if template is None:
        return None
    t = template.strip()
    if not (t.startswith("https://") or t.startswith("http://")):
        raise ConfigError("the commit URL must start with https:// or http://",
                          key="--commit-url")
    if t.count("{hash}") != 1 or t.replace("{hash}", "").count("{") or \
            t.replace("{hash}", "").count("}"):
        raise ConfigError("the commit URL must contain '{hash}' once and no other braces",
                          key="--commit-url")
    if any(ch.isspace() or ch in "\"'<>\\" for ch in t):
        raise ConfigError("the commit URL must not contain spaces, quotes, '<', '>' or '\\'",
                          key="--commit-url")
    return t


def commit_link(template: str | None, commit_hash: str) -> str | None:
    """The link for one hash (hex digits only are substituted), or None."""
    h = str(commit_hash or "").strip().lower()
    if not template or not h or any(ch not in "0123456789abcdef" for ch in h):
        return None
    return template.replace("{hash}", h)
