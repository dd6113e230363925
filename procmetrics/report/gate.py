"""Outputs of ``procmetrics check`` for a pipeline: JSON with provenance, and JUnit XML.

The JSON document (``procmetrics-check/1``) carries, beside the verdicts, what
they were computed from: repository, ref and HEAD of the last mining run, the
store checksum, the policy date as given and as resolved, the options and the
tool version, so that a gate's log says which data passed or failed it.

In the JUnit XML every claim is one test case of one test suite: *supported*
passes; *not supported*, *undecidable* and *not supportable* are failures whose
message is the verdict and whose text is the reasons. Every value is escaped by
:mod:`xml.etree.ElementTree` (claim texts and reasons can carry any character;
characters XML 1.0 cannot hold are replaced).
"""
from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from typing import Any, Sequence

from procmetrics import __version__
from procmetrics.report.summary import estimate_text, robustness_text

CHECK_FORMAT = "procmetrics-check/1"
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def check_provenance(store: str | None, *, repo: str | None, policy: str | None,
                     period: str, claims_path: str, claims_sha256: str,
                     scope: dict[str, Any] | None = None,
                     claim_scopes: dict[str, Any] | None = None) -> dict[str, Any]:
    """What a set of verdicts was computed from (reads the store again, read-only)."""
    from procmetrics.analyse.measures.periods import resolve_policy
    from procmetrics.store import open_store, resolve_url
    from procmetrics.store.engine import _safe
    from procmetrics.analyse.measures.vocabulary import REPORT_TRAILER_KEYS
    from procmetrics.store.repodata import choose_repo, load_store_data, store_checksum

    engine = open_store(store, create=False, readonly=True)
    try:
        name = choose_repo(engine, repo)
        data = load_store_data(engine, name, trailer_keys=REPORT_TRAILER_KEYS)
    finally:
        engine.dispose()
    runs = data["mining_runs"]
    done = runs[runs["status"] == "complete"].sort_values("run_id")
    last = done.iloc[-1] if len(done) else None
    repos = data["repositories"]
    first = repos.iloc[0] if len(repos) else None
    resolved = resolve_policy(data, policy)
    return {
        "repository": name,
        "repository_path": None if first is None else first["path"],
        "ref": None if last is None else last["ref"],
        "head": None if last is None else last["head_hash"],
        "store": _safe(resolve_url(store)),
        "store_checksum_sha256": store_checksum(data),
        "policy_date_given": policy,
        "policy_date": None if resolved is None else resolved.isoformat(),
        "claims_file": {"path": claims_path, "sha256": claims_sha256},
        "options": {"repo": repo, "policy": policy, "period": period},
        "version": __version__,
        **({"scope": scope} if scope is not None else {}),
        **({"claim_scopes": claim_scopes} if claim_scopes else {}),
    }


def check_document(verdicts: Sequence[dict[str, Any]], provenance: dict[str, Any],
                   exit_code: int) -> dict[str, Any]:
    """The ``check --json`` document: provenance, verdicts (with robustness when present)."""
    out = []
    for v in verdicts:
        out.append({**v, "robustness_outcome": robustness_text(v)})
    return {"format": CHECK_FORMAT, "provenance": provenance, "exit_code": exit_code,
            "verdicts": out}


def _clean(text: Any) -> str:
    return _NOT_XML.sub("\ufffd", str(text))


def junit_xml(verdicts: Sequence[dict[str, Any]], provenance: dict[str, Any]) -> str:
    """JUnit XML: one test case per claim; anything but *supported* is a failure."""
    failures = sum(v.get("verdict") != "supported" for v in verdicts)
    suite = ET.Element("testsuite", {
        "name": _clean(f"procmetrics claims: {provenance.get('repository', '')}"),
        "tests": str(len(verdicts)), "failures": str(failures), "errors": "0",
        "skipped": "0"})
    props = ET.SubElement(suite, "properties")
    for key in ("repository", "ref", "head", "store_checksum_sha256", "policy_date",
                "version"):
        ET.SubElement(props, "property", {"name": key,
                                          "value": _clean(provenance.get(key) or "")})
    for v in verdicts:
        case = ET.SubElement(suite, "testcase", {
            "classname": _clean(f"claims.{v.get('kind', '')}"),
            "name": _clean(f"{v.get('id', '')}: {v.get('text', '')}")})
        est = estimate_text((v.get("evidence") or {}).get("estimate"))
        detail = "\n".join([*map(str, v.get("reasons") or []), f"estimate: {est}",
                            f"robustness: {robustness_text(v)}"])
        if v.get("verdict") == "supported":
            ET.SubElement(case, "system-out").text = _clean(detail)
            continue
        fail = ET.SubElement(case, "failure", {
            "type": _clean(v.get("verdict", "")),
            "message": _clean(f"{v.get('verdict_label', v.get('verdict', ''))}: "
                              f"{(v.get('reasons') or [''])[0]}")})
        fail.text = _clean(detail)
    suites = ET.Element("testsuites", {"tests": str(len(verdicts)),
                                       "failures": str(failures)})
    suites.append(suite)
    ET.indent(suites)
    return ET.tostring(suites, encoding="unicode", xml_declaration=True) + "\n"
