"""The provenance manifest: what was analysed, how, with what, and what came out.

``manifest.json`` records the repository (path, ref, HEAD, shallow), the
mining runs and their options, the tool and dependency versions, the store
(URL with any password hidden, dialect, schema version, checksum of the tidy
tables), the options of this report, SHA-256 of every output file and the
date the report was made. It is the one output that carries a run date; it
is what ``procmetrics rerun`` reads.
"""
from __future__ import annotations

import hashlib
import json
import platform
from importlib import metadata
from pathlib import Path
from typing import Any

from procmetrics import __version__
from procmetrics.errors import ConfigError
from procmetrics.report.model import ReportOptions

MANIFEST_FORMAT = "procmetrics-manifest/1"
DEPENDENCIES = ("numpy", "pandas", "scipy", "statsmodels", "matplotlib", "sqlalchemy",
                "ruptures", "lifelines", "jinja2", "jsonschema", "pyarrow")


def versions() -> dict[str, str]:
    out = {"procmetrics": __version__, "python": platform.python_version()}
    for name in DEPENDENCIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 16), b""):
            h.update(chunk)
    return h.hexdigest()


def output_checksums(out: Path, names: list[str]) -> dict[str, str]:
    """SHA-256 of the files this report wrote (names relative to ``out``).

    Only our own files: the folder may also hold the store or other material.
    """
    return {name: sha256_file(out / name) for name in sorted(names)}


def build_manifest(*, out: Path, written: list[str], options: ReportOptions, store_url: str, dialect: str,
                   schema_version: int, store_checksum: str, repository: dict[str, Any],
                   mining_runs: list[dict[str, Any]], pdf: dict[str, Any], prepared: str,
                   claims: dict[str, Any] | None, inputs: dict[str, Any] | None = None,
                   store_path: str | None = None, repository_path: str | None = None,
                   library_warnings: list[dict[str, Any]] | None = None
                   ) -> dict[str, Any]:
    """The manifest; ``store_path``, ``repository_path`` and input paths are relative
    to the manifest's folder (the absolute ``url``/``path``/``original_path`` are kept as
    provenance, and used by ``rerun`` only when the relative path finds nothing)."""
    return {
        "format": MANIFEST_FORMAT,
        "prepared_utc": prepared,
        "repository": {**repository, "path_relative": repository_path},
        "mining_runs": mining_runs,
        "store": {"url": store_url, "path": store_path, "dialect": dialect, "schema_version": schema_version,
                  "checksum_sha256": store_checksum,
                  "checksum_method": "SHA-256 over the tidy tables except mining_runs "
                                     "and repositories: per table name, row count, columns "
                                     "and the sum mod 2^256 of SHA-256 of each canonical "
                                     "row line (order-free)"},
        "report_options": {**options.to_dict(), "pdf_engine": options.pdf_engine,
                           "commit_url": options.commit_url},
        "claims_file": claims,
        "inputs": inputs or {},
        "pdf": pdf,
        "versions": versions(),
        "outputs": output_checksums(out, written),
        # numerical warnings of libraries while the report was built (not shown on the
        # console): category, message, how often
        "library_warnings": list(library_warnings or []),
    }


def write_manifest(manifest: dict[str, Any], out: Path) -> Path:
    path = out / "manifest.json"
    path.write_text(json.dumps(manifest, indent=2, sort_keys=True, ensure_ascii=False) + "\n",
                    encoding="utf-8", newline="\n")
    return path


def read_manifest(path: Path) -> dict[str, Any]:
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as exc:
        raise ConfigError(f"cannot read manifest: {exc.strerror or exc}", path=str(path)) from exc
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ConfigError(f"not valid JSON: {exc.msg}", path=str(path), line=exc.lineno) from exc
    except RecursionError as exc:
        raise ConfigError("not usable JSON: nested too deeply", path=str(path)) from exc
    if not isinstance(data, dict) or data.get("format") != MANIFEST_FORMAT:
        raise ConfigError(f"not a procmetrics manifest (format {MANIFEST_FORMAT} expected)",
                          path=str(path), key="format")
    return data
