"""Build the report from a store and write the audit folder.

``make_report(store, out, options)`` is what ``procmetrics report`` calls:
open the store read-only, read the tidy tables, run the analyses section by
section (:func:`build_report`), then write ``report.json``, ``tables/*.csv``,
``report.html``, ``report.pdf`` and, last, ``manifest.json`` (which holds the
checksums of the others).
"""
from __future__ import annotations

import datetime as dt
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from procmetrics.errors import ConfigError, ProcmetricsError
from procmetrics.analyse.measures import quality as ql
from procmetrics.report import sec_claims, sec_compare, sec_defects, sec_process, sec_scope
from procmetrics.claims.reader import ClaimsFile, load_claims
from procmetrics.claims.registry import check_usable
from procmetrics.report.context import BuildContext, apply_store_flags
from procmetrics.report.csvout import write_csvs
from procmetrics.store.repodata import StoreData, choose_repo, load_store_data, store_checksum
from procmetrics.report.flags import review_adoption_flags, store_flags
from procmetrics.report.html import render_html
from procmetrics.report.jsonout import write_json
from procmetrics.report.manifest import build_manifest, read_manifest, write_manifest
from procmetrics.report.model import PERIODS, Report, ReportOptions
from procmetrics.report.pdf import write_pdf
from procmetrics.analyse.measures.periods import resolve_policy

def build_report(data: StoreData, options: ReportOptions, *,
                 claims: ClaimsFile | None = None) -> Report:
    """Run every analysis and assemble the :class:`Report` (no files written)."""
    if options.period not in PERIODS:
        raise ConfigError(f"unknown period {options.period!r}; choose one of "
                          + ", ".join(PERIODS), key="--period")
    policy_date = resolve_policy(data, options.policy)
    quality = ql.summary(data, options.period)
    report = Report(title=f"Development-process evidence for {data.repo}", options=options,
                    scope={}, store_checksum=store_checksum(data))
    ctx = BuildContext(data=data, options=options, report=report, quality=quality,
                       policy_date=policy_date, seed=options.seed, claims=claims)
    # usage mistakes stop the report at once (exit 2), before any analysis runs
    _check_subsystems(data, options.subsystems)
    if claims is not None:
        check_usable(claims.claims, sec_claims.claim_context(ctx))
    report.scope = sec_scope.scope(ctx)
    report.provenance = sec_scope.provenance(ctx)
    sec_scope.section_scope(ctx)
    ctx.metrics = ctx.attempt("Process metrics", report.sections[0],
                              lambda: sec_process.compute_metrics(ctx))
    sec_scope.section_quality(ctx)
    sec_process.section_process(ctx)
    ctx.defects = ctx.attempt("Defect table", report.sections[0],
                              lambda: sec_defects.compute_defects(ctx))
    sec_compare.section_compare(ctx)
    sec_defects.section_lifetimes(ctx)
    sec_defects.section_growth(ctx)
    sec_claims.section_claims(ctx)
    adoption = any(c.code == "tag_adoption_rising" for c in
                   (ctx.metrics.caveats if ctx.metrics is not None else ()))
    flags = store_flags(quality, unresolved_limit=options.unresolved_share_limit,
                        adoption_rising=adoption)
    flags["review"] = review_adoption_flags(ctx)
    apply_store_flags(report, flags)
    sec_claims.section_limitations(ctx)
    sec_claims.section_use(ctx)
    return report


def _check_subsystems(data: StoreData, names: Any) -> None:
    """A --subsystem name the store does not map is a usage mistake (ConfigError)."""
    cs = data["commit_subsystems"]
    known = set(cs["subsystem"].dropna().astype(str)) if cs is not None and len(cs) else set()
    for name in names or ():
        if name not in known:
            have = ("the store maps no subsystems" if not known else "known: "
                    + ", ".join(sorted(known)[:12]) + (", ..." if len(known) > 12 else ""))
            raise ConfigError(f"subsystem {name!r} does not exist in the store ({have})",
                              key="--subsystem")


@dataclass(frozen=True)
class ReportFiles:
    out: Path
    html: Path
    pdf: Path | None
    json: Path
    manifest: Path
    csv: tuple[Path, ...]
    pdf_engine: str


def _clear_previous(out: Path) -> None:
    """Remove the files a previous report wrote here (listed in its manifest), nothing else."""
    old = out / "manifest.json"
    if not old.exists():
        return
    try:
        names = read_manifest(old).get("outputs", {})
    except ConfigError:
        return
    for name in names:
        p = (out / name).resolve()
        if out.resolve() in p.parents and p.is_file():
            p.unlink()
    old.unlink()


def write_report(report: Report, out: Path, *, manifest_info: dict[str, Any]) -> ReportFiles:
    """Write the audit folder; ``manifest_info`` carries store URL, dialect, mining runs."""
    out.mkdir(parents=True, exist_ok=True)
    _clear_previous(out)
    prepared = dt.datetime.now(dt.timezone.utc).replace(microsecond=0)
    csv_names = write_csvs(report, out)
    json_path = write_json(report, out / "report.json", csv_names)
    html_path = out / "report.html"
    html_path.write_text(render_html(report, csv_names=csv_names,
                                     prepared=f"{prepared:%Y-%m-%d}"), encoding="utf-8")
    pdf_path = out / "report.pdf"
    pdf = write_pdf(report, html_path, pdf_path, csv_names=csv_names,
                    prepared=f"{prepared:%Y-%m-%d}", engine=report.options.pdf_engine)
    written = sorted(set(csv_names.values()) | {"report.json", "report.html"}
                     | ({"report.pdf"} if pdf["engine"] != "none" else set()))
    manifest = build_manifest(out=out, written=written, options=report.options,
                              store_checksum=report.store_checksum, pdf=pdf,
                              prepared=prepared.isoformat(), **manifest_info)
    man_path = write_manifest(manifest, out)
    return ReportFiles(out, html_path, pdf_path if pdf["engine"] != "none" else None,
                       json_path, man_path, tuple(out / n for n in sorted(csv_names.values())),
                       pdf["engine"])


def make_report(store: str | None, out: str | Path, options: ReportOptions) -> ReportFiles:
    """Open the store, build the report and write the folder (the CLI's one call)."""
    from procmetrics.store import open_store, resolve_url
    from procmetrics.store.engine import _safe
    from procmetrics.store.schema import SCHEMA_VERSION

    claims = load_claims(options.claims_path) if options.claims_path else None
    engine = open_store(store, create=False, readonly=True)
    try:
        repo = choose_repo(engine, options.repo)
        data = load_store_data(engine, repo)
        dialect = engine.dialect.name
    finally:
        engine.dispose()
    opts = options if options.repo == repo else ReportOptions(
        **{**options.__dict__, "repo": repo})
    report = build_report(data, opts, claims=claims)
    repos = data["repositories"]
    runs = data["mining_runs"].sort_values("run_id")
    info = {
        "store_url": _safe(resolve_url(store)), "dialect": dialect,
        "schema_version": SCHEMA_VERSION,
        "repository": {k: _json_safe(v) for k, v in repos.iloc[0].to_dict().items()}
        if len(repos) else {},
        "mining_runs": [{k: _json_safe(v) for k, v in r.items()}
                        for r in runs.to_dict(orient="records")],
        "claims": None if claims is None else claims.to_dict(),
    }
    return write_report(report, Path(out), manifest_info=info)


def _json_safe(v: Any) -> Any:
    if isinstance(v, pd.Timestamp):
        return v.isoformat()
    if v is pd.NA or v is pd.NaT or (isinstance(v, float) and v != v):
        return None
    if hasattr(v, "item"):
        return v.item()
    if isinstance(v, str) and v[:1] in "{[":
        try:
            return json.loads(v)
        except ValueError:
            return v
    return v


__all__ = ["build_report", "write_report", "make_report", "resolve_policy", "ReportFiles",
           "ProcmetricsError"]
