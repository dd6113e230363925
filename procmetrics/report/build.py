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

from procmetrics.errors import ConfigError, InsufficientData, ProcmetricsError
from procmetrics.analyse.measures import quality as ql
from procmetrics.report import sec_claims, sec_compare, sec_defects, sec_process, sec_scope
from procmetrics.claims.reader import ClaimsFile, load_claims
from procmetrics.report.context import BuildContext, apply_store_flags
from procmetrics.report.csvout import write_csvs
from procmetrics.store.repodata import StoreData, choose_repo, load_store_data, store_checksum
from procmetrics.report.flags import store_flags
from procmetrics.report.html import render_html
from procmetrics.report.jsonout import write_json
from procmetrics.report.manifest import build_manifest, write_manifest
from procmetrics.report.model import PERIODS, Report, ReportOptions
from procmetrics.report.outdir import check_target, fresh_folder
from procmetrics.validate import check_level, check_seed
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
    apply_store_flags(report, store_flags(quality, unresolved_limit=options.unresolved_share_limit,
                                          adoption_rising=adoption))
    sec_claims.section_limitations(ctx)
    sec_claims.section_use(ctx)
    return report


@dataclass(frozen=True)
class ReportFiles:
    out: Path
    html: Path
    pdf: Path | None
    json: Path
    manifest: Path
    csv: tuple[Path, ...]
    pdf_engine: str


def write_report(report: Report, out: Path, *, manifest_info: dict[str, Any],
                 overwrite: bool = False, adopt: tuple[str, ...] = ()) -> ReportFiles:
    """Write the audit folder; ``manifest_info`` carries store URL, dialect, mining runs.

    The files are written into a fresh folder beside ``out`` that then replaces it
    (:mod:`procmetrics.report.outdir`): an earlier report is replaced only with
    ``overwrite``, any other non-empty folder is refused.
    """
    out = Path(out).absolute()
    with fresh_folder(out, overwrite=overwrite, adopt=adopt) as tmp:
        prepared = dt.datetime.now(dt.timezone.utc).replace(microsecond=0)
        csv_names = write_csvs(report, tmp)
        write_json(report, tmp / "report.json", csv_names)
        html_path = tmp / "report.html"
        html_path.write_text(render_html(report, csv_names=csv_names,
                                         prepared=f"{prepared:%Y-%m-%d}"), encoding="utf-8")
        pdf = write_pdf(report, html_path, tmp / "report.pdf", csv_names=csv_names,
                        prepared=f"{prepared:%Y-%m-%d}", engine=report.options.pdf_engine)
        written = sorted(set(csv_names.values()) | {"report.json", "report.html"}
                         | ({"report.pdf"} if pdf["engine"] != "none" else set()))
        manifest = build_manifest(out=tmp, written=written, options=report.options,
                                  store_checksum=report.store_checksum, pdf=pdf,
                                  prepared=prepared.isoformat(), **manifest_info)
        write_manifest(manifest, tmp)
    return ReportFiles(out, out / "report.html",
                       out / "report.pdf" if pdf["engine"] != "none" else None,
                       out / "report.json", out / "manifest.json",
                       tuple(out / n for n in sorted(csv_names.values())), pdf["engine"])


def make_report(store: str | None, out: str | Path, options: ReportOptions, *,
                overwrite: bool = False, adopt: tuple[str, ...] = ()) -> ReportFiles:
    """Open the store, build the report and write the folder (the CLI's one call)."""
    from procmetrics.store import open_store, resolve_url
    from procmetrics.store.engine import _safe
    from procmetrics.store.schema import SCHEMA_VERSION

    # a store kept in the report folder itself (as `make demo` does) stays with it
    url = resolve_url(store)
    if url.startswith("sqlite:///"):
        db = Path(url[len("sqlite:///"):].split("?", 1)[0])
        if str(out).strip() and db.parent == Path(out).absolute().resolve():
            adopt = (*adopt, db.name)
    check_target(out, overwrite=overwrite, adopt=adopt)     # refuse before the long work
    check_level(options.level, "level")
    check_seed(options.seed, "seed")
    claims = load_claims(options.claims_path) if options.claims_path else None
    engine = open_store(store, create=False, readonly=True)
    try:
        repo = choose_repo(engine, options.repo)
        data = load_store_data(engine, repo)
        dialect = engine.dialect.name
    finally:
        engine.dispose()
    _require_something_to_measure(data, repo)
    opts = options if options.repo == repo else ReportOptions(
        **{**options.__dict__, "repo": repo})
    report, library_warnings = _build_recording_warnings(data, opts, claims)
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
        "library_warnings": library_warnings,
    }
    return write_report(report, Path(out), manifest_info=info, overwrite=overwrite, adopt=adopt)


def _build_recording_warnings(data: Any, opts: ReportOptions, claims: Any
                              ) -> tuple[Report, list[dict[str, Any]]]:
    """Build the report; numerical warnings of libraries (numpy, statsmodels, matplotlib
    ...) are recorded for the manifest instead of reaching the console, ours are
    passed on (the CLI prints them as one line each)."""
    import warnings
    from collections import Counter
    from procmetrics.errors import ProcmetricsWarning

    with warnings.catch_warnings(record=True) as caught:
        report = build_report(data, opts, claims=claims)
    library: Counter = Counter()
    for w in caught:
        if issubclass(w.category, ProcmetricsWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        else:
            library[(w.category.__name__, " ".join(str(w.message).split()))] += 1
    return report, [{"category": c, "message": m, "count": n}
                    for (c, m), n in sorted(library.items())]


def _require_something_to_measure(data: Any, repo: str) -> None:
    """The rule of series/compare/changes: no non-merge commit with a date -> exit 7."""
    commits = data["commits"]
    merge = commits["is_merge"].fillna(False).astype(bool) if "is_merge" in commits \
        else pd.Series(False, index=commits.index)
    dated = commits["committer_date"].notna() | commits["author_date"].notna()
    if not (~merge & dated).any():
        raise InsufficientData(f"{repo}: no (non-merge) commits with a date to measure "
                               f"({len(commits)} stored commit(s)); nothing to report")


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
