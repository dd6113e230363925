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
import os
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from procmetrics.errors import ConfigError, InsufficientData, ProcmetricsError
from procmetrics.analyse.measures import quality as ql
from procmetrics.report import (sec_carryover, sec_claims, sec_compare, sec_defects,
                                sec_process, sec_scope)
from procmetrics.claims.reader import ClaimsFile, load_claims
from procmetrics.claims.registry import check_usable
from procmetrics.report.context import BuildContext, apply_store_flags
from procmetrics.report.csvout import write_csvs, write_evidence
from procmetrics.store.repodata import StoreData, choose_repo, load_store_data, store_checksum
from procmetrics.report.flags import review_adoption_flags, store_flags
from procmetrics.report.html import render_html
from procmetrics.report.jsonout import write_json
from procmetrics.report.manifest import build_manifest, sha256_file, write_manifest
from procmetrics.report.meta import check_commit_url, copy_input, input_record, load_meta
from procmetrics.report.model import PERIODS, Report, ReportOptions
from procmetrics.report.outdir import check_target, fresh_folder
from procmetrics.validate import check_level, check_seed
from procmetrics import progress
from procmetrics.report.pdf import write_pdf
from procmetrics.analyse.measures.periods import resolve_policy
from procmetrics.analyse.memo import kept_results
from procmetrics.background import DEFAULT_JOBS

#: the steps make_report announces (procmetrics.progress), for the time-left estimate
REPORT_STEPS = 10


def build_report(data: StoreData, options: ReportOptions, *,
                 claims: ClaimsFile | None = None, carryover: Any = None,
                 jobs: int = DEFAULT_JOBS) -> Report:
    """Run every analysis and assemble the :class:`Report` (no files written).

    ``jobs`` > 1 lets the defect-lifetime analysis run in a second process while the
    other sections are built (:mod:`procmetrics.background`); the report is the
    same with any ``jobs``.

    Warnings raised by the numerical libraries while the analyses run are
    captured (never printed), counted and reported as a table in the
    limitations section; convergence failures are counted on their own.
    """
    if options.period not in PERIODS:
        raise ConfigError(f"unknown period {options.period!r}; choose one of "
                          + ", ".join(PERIODS), key="--period")
    # a date given as a commit may lie outside a scope: resolve it on the whole tree
    policy_date = resolve_policy(data.whole_tree or data, options.policy)
    with warnings.catch_warnings(record=True) as caught, kept_results():
        warnings.simplefilter("always")
        quality = ql.summary(data, options.period)
        report = Report(title=f"Development-process evidence for {data.repo}",
                        options=options, scope={}, store_checksum=store_checksum(data))
        ctx = BuildContext(data=data, options=options, report=report, quality=quality,
                           policy_date=policy_date, seed=options.seed, claims=claims,
                           carryover=carryover, jobs=jobs)
        # usage mistakes stop the report at once (exit 2), before any analysis runs
        _check_subsystems(data, options.subsystems)
        if claims is not None:
            check_usable(claims.claims, sec_claims.claim_context(ctx))
        try:
            _analyses(ctx)
        finally:
            if ctx.aside_lifetimes is not None:      # the build stopped before collecting it
                ctx.aside_lifetimes[-1].close()
    ctx.numerical = numerical_warnings(caught)
    sec_claims.section_limitations(ctx)
    sec_claims.section_use(ctx)
    return report


def _analyses(ctx: BuildContext) -> None:
    report = ctx.report
    report.scope = sec_scope.scope(ctx)
    report.provenance = sec_scope.provenance(ctx)
    sec_scope.section_scope(ctx)
    sec_defects.start_lifetimes(ctx)
    progress.advance("process metrics per period")
    ctx.metrics = ctx.attempt("Process metrics", report.sections[0],
                              lambda: sec_process.compute_metrics(ctx))
    sec_scope.section_quality(ctx)
    progress.advance("trends and change points")
    sec_process.section_process(ctx)
    progress.advance("defect table")
    ctx.defects = ctx.attempt("Defect table", report.sections[0],
                              lambda: sec_defects.compute_defects(ctx))
    progress.advance("before and after the process change")
    sec_compare.section_compare(ctx)
    progress.advance("defect lifetimes")
    sec_defects.section_lifetimes(ctx)
    progress.advance("reliability growth")
    sec_defects.section_growth(ctx)
    sec_carryover.section_carryover(ctx)
    progress.advance("claims and their robustness panels")
    sec_claims.section_claims(ctx)
    adoption = any(c.code == "tag_adoption_rising" for c in
                   (ctx.metrics.caveats if ctx.metrics is not None else ()))
    flags = store_flags(ctx.quality, unresolved_limit=ctx.options.unresolved_share_limit,
                        adoption_rising=adoption)
    flags["review"] = review_adoption_flags(ctx)
    apply_store_flags(report, flags)
    _evidence_for_figures(ctx)


#: warnings raised when a step took longer than some wall-clock time: whether they
#: appear depends on the machine's load, so they cannot be part of a report that must
#: read the same on every rerun (matplotlib times its search for the best legend place)
_TIMED_NOTES = ('Creating legend with loc="best" can be slow',)


def about_the_numbers(w: warnings.WarningMessage) -> bool:
    """Whether a captured warning belongs in the report's numerical-warnings table: not
    a deprecation (about our code, and raised once per process) and not a note that a
    step was slow (present or not depending on the machine's load)."""
    if issubclass(w.category, (DeprecationWarning, PendingDeprecationWarning, ImportWarning)):
        return False
    return not str(w.message).lstrip().startswith(_TIMED_NOTES)


def numerical_warnings(caught: list[warnings.WarningMessage]) -> pd.DataFrame:
    """Captured warnings grouped by kind, place and message, with counts.

    Columns ``category``, ``where`` (module file), ``message`` (first line),
    ``count``, ``convergence`` (the warning says a fit did not converge).
    """
    rows: dict[tuple[str, str, str], int] = {}
    for w in caught:
        if not about_the_numbers(w):
            continue
        key = (w.category.__name__, Path(str(w.filename)).name,
               str(w.message).strip().splitlines()[0][:200] if str(w.message).strip() else "")
        rows[key] = rows.get(key, 0) + 1
    out = pd.DataFrame([{"category": c, "where": f, "message": m, "count": n}
                        for (c, f, m), n in sorted(rows.items())],
                       columns=["category", "where", "message", "count"])
    return out.assign(convergence=out["category"].str.contains("Convergence")
                      | out["message"].str.contains("converge", case=False))


COMMIT_FIGURES = ("trailer-adoption", "series-", "its-", "ecdf-")


def _evidence_for_figures(ctx: BuildContext) -> None:
    """The commit ledger behind the headline figures, and each figure's left-out commits."""
    from procmetrics.analyse.measures.metrics import MetricConfig, commit_flags
    from procmetrics.report.evidence import commit_ledger, denominator_note

    d = ctx.data
    flags = ctx.commit_flags(MetricConfig(period=ctx.options.period))
    ledger = commit_ledger(d["commits"], d["trailers"], d["fix_links"], flags)
    ctx.report.evidence["evidence/commits.csv"] = ledger
    for fig in ctx.report.figures.values():
        if fig.key.startswith(COMMIT_FIGURES) and "subsystem" not in fig.key:
            fig.denominator = denominator_note(
                fig.n, ledger, lines=fig.key == "ecdf-lines",
                rest_reason=("commits in the period that straddles the policy date (a "
                             "transition period the interrupted time series leaves out)"
                             if fig.key.startswith("its-") else "other commits"))
            if fig.denominator:
                fig.values = {**fig.values, "denominator": fig.denominator}


def _check_subsystems(data: StoreData, names: Any) -> None:
    """A --subsystem name the store does not map is a usage mistake (ConfigError)."""
    from procmetrics.analyse.measures.selection import check_subsystem_names

    check_subsystem_names(data["commit_subsystems"], names)


@dataclass(frozen=True)
class ReportFiles:
    out: Path
    html: Path
    pdf: Path | None
    json: Path
    manifest: Path
    csv: tuple[Path, ...]
    pdf_engine: str


def _copy_inputs(report: Report, out: Path, info: dict[str, Any], *,
                 final: Path | None = None) -> list[str]:
    """Copy the claims, rules and metadata files into ``out/inputs``; point the manifest there.

    Paths in the manifest are relative to the manifest's folder; the absolute
    path each file had when the report was made is kept as provenance only.
    ``out`` is where the files are written now, ``final`` the folder they end up in
    (the paths are relative to that one).
    """
    final = final or out
    written: list[str] = []
    opts = report.options
    if opts.claims_path and info.get("claims") is not None:
        rel = copy_input(opts.claims_path, out, "claims.toml")
        info["claims"] = input_record(opts.claims_path, rel, info["claims"]["sha256"],
                                      n_claims=info["claims"].get("n_claims"))
        written.append(rel)
    inputs: dict[str, Any] = {}
    if opts.scope:
        from procmetrics.scope.definition import split_spec

        file, name = split_spec(opts.scope)
        rel = copy_input(file, out, "scope" + (Path(file).suffix or ".txt"))
        inputs["scope"] = input_record(file, rel, sha256_file(out / rel), name=name)
        written.append(rel)
    if opts.scope_file:
        rel = copy_input(opts.scope_file, out, "claim-scopes.toml")
        inputs["scope_file"] = input_record(opts.scope_file, rel, sha256_file(out / rel))
        written.append(rel)
    if opts.meta_path:
        rel = copy_input(opts.meta_path, out, "report-meta.toml")
        inputs["report_meta"] = input_record(opts.meta_path, rel, sha256_file(out / rel))
        written.append(rel)
    if opts.exclusions_path:
        rel = copy_input(opts.exclusions_path, out, "carryover-exclusions.toml")
        inputs["carryover_exclusions"] = input_record(opts.exclusions_path, rel,
                                                      sha256_file(out / rel))
        written.append(rel)
    for run in info.get("mining_runs", []):
        o = run.get("options_json") or {}
        rules = o.get("subsystem_rules") if isinstance(o, dict) else None
        if rules and Path(rules).is_file() and "subsystem_rules" not in inputs:
            rel = copy_input(rules, out, "subsystem-rules" + (Path(rules).suffix or ".txt"))
            inputs["subsystem_rules"] = input_record(rules, rel, sha256_file(out / rel),
                                                     run_id=run.get("run_id"))
            written.append(rel)
        elif rules and "subsystem_rules" not in inputs:
            inputs["subsystem_rules"] = {"path": None, "original_path": str(rules),
                                         "note": "the rules file was gone when the report "
                                                 "was made; not copied"}
    info["inputs"] = inputs
    url = str(info.get("store_url") or "")
    if url.startswith("sqlite:///"):
        info["store_path"] = Path(os.path.relpath(url[len("sqlite:///"):],
                                                  final.resolve())).as_posix()
    repo_path = (info.get("repository") or {}).get("path")
    if repo_path:
        info["repository_path"] = Path(os.path.relpath(repo_path, final.resolve())).as_posix()
    return written


def write_report(report: Report, out: Path, *, manifest_info: dict[str, Any],
                 overwrite: bool = False, adopt: tuple[str, ...] = ()) -> ReportFiles:
    """Write the audit folder; ``manifest_info`` carries store URL, dialect, mining runs.

    The files are written into a fresh folder beside ``out`` that then replaces it
    (:mod:`procmetrics.report.outdir`): an earlier report is replaced only with
    ``overwrite``, any other non-empty folder is refused. The claims, rules and
    metadata files are copied in and the manifest refers to everything by paths
    relative to itself.
    """
    out = Path(out).absolute()
    with fresh_folder(out, overwrite=overwrite, adopt=adopt) as tmp:
        prepared = dt.datetime.now(dt.timezone.utc).replace(microsecond=0)
        info = dict(manifest_info)
        inputs_written = _copy_inputs(report, tmp, info, final=out)
        progress.advance("tables, evidence, JSON and HTML")
        csv_names = write_csvs(report, tmp)
        evidence_names = write_evidence(report, tmp)
        write_json(report, tmp / "report.json", csv_names)
        html_path = tmp / "report.html"
        html_path.write_text(render_html(report, csv_names=csv_names,
                                         prepared=f"{prepared:%Y-%m-%d}"), encoding="utf-8")
        progress.advance("PDF")
        pdf = write_pdf(report, html_path, tmp / "report.pdf", csv_names=csv_names,
                        prepared=f"{prepared:%Y-%m-%d}", engine=report.options.pdf_engine)
        written = sorted(set(csv_names.values()) | {"report.json", "report.html"}
                         | set(inputs_written) | set(evidence_names)
                         | ({"report.pdf"} if pdf["engine"] != "none" else set()))
        manifest = build_manifest(out=tmp, written=written, options=report.options,
                                  store_checksum=report.store_checksum, pdf=pdf,
                                  prepared=prepared.isoformat(), **info)
        write_manifest(manifest, tmp)
    return ReportFiles(out, out / "report.html",
                       out / "report.pdf" if pdf["engine"] != "none" else None,
                       out / "report.json", out / "manifest.json",
                       tuple(out / n for n in sorted(csv_names.values())), pdf["engine"])


def make_report(store: str | None, out: str | Path, options: ReportOptions, *,
                overwrite: bool = False, adopt: tuple[str, ...] = (),
                jobs: int = DEFAULT_JOBS) -> ReportFiles:
    """Open the store, build the report and write the folder (the CLI's one call;
    ``jobs``: processes for the analyses, see :func:`build_report`)."""
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
    meta = load_meta(options.meta_path)
    check_commit_url(options.commit_url)
    progress.advance("reading the store")
    from procmetrics.analyse.measures.vocabulary import REPORT_TRAILER_KEYS
    from procmetrics.claims.carryover_source import carryover_for, read_exclusions

    exclusions = read_exclusions(options.exclusions_path)
    engine = open_store(store, create=False, readonly=True)
    try:
        repo = choose_repo(engine, options.repo)
        from procmetrics.claims.check import claim_scope_request
        from procmetrics.scope.apply import ScopeRequest

        data = load_store_data(engine, repo, within=claim_scope_request(
            claims.claims if claims is not None else (),
            ScopeRequest(options.scope, options.since, options.until), options.scope_file),
            trailer_keys=REPORT_TRAILER_KEYS)
        carryover = carryover_for(engine, repo, exclusions)
        dialect = engine.dialect.name
    finally:
        engine.dispose()
    _require_something_to_measure(data, repo)
    if carryover is None and options.exclusions_path is not None:
        raise ConfigError(f"--exclusions: {repo} has no single upstream reference (mine it "
                          "with --upstream) for the exclusions to apply to", key="--exclusions")
    opts = options if options.repo == repo else ReportOptions(
        **{**options.__dict__, "repo": repo})
    report, library_warnings = _build_recording_warnings(data, opts, claims, carryover, jobs)
    report.meta = meta
    if meta.title:
        report.title = meta.title
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


def _build_recording_warnings(data: Any, opts: ReportOptions, claims: Any,
                              carryover: Any = None, jobs: int = DEFAULT_JOBS
                              ) -> tuple[Report, list[dict[str, Any]]]:
    """Build the report; numerical warnings of libraries (numpy, statsmodels, matplotlib
    ...) are recorded for the manifest instead of reaching the console, ours are
    passed on (the CLI prints them as one line each)."""
    import warnings
    from collections import Counter
    from procmetrics.errors import ProcmetricsWarning

    with warnings.catch_warnings(record=True) as caught:
        report = build_report(data, opts, claims=claims, carryover=carryover, jobs=jobs)
    library: Counter = Counter()
    for w in caught:
        if issubclass(w.category, ProcmetricsWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        elif not str(w.message).lstrip().startswith(_TIMED_NOTES):
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
