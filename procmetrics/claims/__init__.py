"""Claims files to verdicts.

``reader`` parses a TOML claims file; ``base`` holds the claim, context and
verdict types and the decision rule; one module per family of kinds
(``shares``, ``lifetimes``, ``growth``, ``unsupportable``) declares its
kinds and evaluators; ``registry`` joins them and judges; ``check`` runs a
file against a store; ``render`` words a verdict's evidence.

May import: ``procmetrics.analyse``, ``procmetrics.store`` and ``errors``.
Imported by ``report`` and ``cli``; nothing in ``analyse`` imports it.
"""
from __future__ import annotations

from procmetrics.lazyexports import lazy_getattr

#: public name -> the module (in this package) that defines it (loaded on first use)
_EXPORTS: dict[str, str] = {
    "Claim": "base",
    "ClaimContext": "base",
    "ClaimVerdict": "base",
    "exit_code": "base",
    "VERDICTS": "base",
    "SPECS": "registry",
    "evaluate_claim": "registry",
    "evaluate_claims": "registry",
    "load_claims": "reader",
    "parse_claims": "reader",
    "check_claims": "check",
    "render_verdicts": "check",
    "evidence_line": "render",
}
__all__ = sorted(_EXPORTS)

__getattr__ = lazy_getattr(__name__, _EXPORTS)
