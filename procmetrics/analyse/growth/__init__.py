"""Is the fix rate falling: trend tests (Laplace, MIL-HDBK-189), NHPP
reliability-growth fits, their goodness-of-fit checks and guarded predictions.

May import: ``procmetrics.analyse.measures``, the shared modules and ``errors``.
"""
from __future__ import annotations

from procmetrics.lazyexports import lazy_getattr

#: public name -> the module (in this package) that defines it (loaded on first use)
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

__getattr__ = lazy_getattr(__name__, _EXPORTS)
