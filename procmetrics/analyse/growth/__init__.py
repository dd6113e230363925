"""Is the fix rate falling: trend tests (Laplace, MIL-HDBK-189), NHPP
reliability-growth fits, their goodness-of-fit checks and guarded predictions.

May import: ``procmetrics.analyse.measures``, the shared modules and ``errors``.
"""
from __future__ import annotations

from importlib import import_module
from typing import Any

#: public name -> the module (in this package) that defines it; loaded on first use,
#: so importing one module of the package does not load the others
_EXPORTS: dict[str, str] = {
    "TrendTests": "trendtests",
    "trend_tests": "trendtests",
    "NHPPFit": "nhpp",
    "fit_goel_okumoto": "nhpp",
    "fit_power_law": "nhpp",
    "uniformity_checks": "checks",
    "predictions": "checks",
    "GrowthResult": "analysis",
    "analyse_growth": "analysis",
    "select_fix_times": "analysis",
}
__all__ = sorted(_EXPORTS)


def __getattr__(name: str) -> Any:
    if name in _EXPORTS:
        return getattr(import_module(f"{__name__}.{_EXPORTS[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
