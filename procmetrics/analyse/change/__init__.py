"""Did it change: trend models, change points, interrupted time series, two-sample
comparisons, multiplicity, and the before/after analysis of a policy date.

May import: ``procmetrics.analyse.measures``, the shared modules
(``result``, ``glmfit``, ``diagnostics``) and ``errors``.
"""
from __future__ import annotations

from importlib import import_module
from typing import Any

#: public name -> the module (in this package) that defines it; loaded on first use,
#: so importing one module of the package does not load the others
_EXPORTS: dict[str, str] = {
    "TrendResult": "trend",
    "fit_trend": "trend",
    "predict_trend": "trend",
    "ChangePointConfig": "changepoints",
    "ChangePointResult": "changepoints",
    "detect_changes": "changepoints",
    "changes_for_metric": "changepoints",
    "ITSResult": "its",
    "interrupted_time_series": "its",
    "relate_changes_to_date": "its",
    "compare_distributions": "twosample",
    "compare_proportions": "twosample",
    "MultiplicityResult": "multiplicity",
    "adjust_pvalues": "multiplicity",
    "PolicyComparison": "policy",
    "compare_policy": "policy",
}
__all__ = sorted(_EXPORTS)


def __getattr__(name: str) -> Any:
    if name in _EXPORTS:
        return getattr(import_module(f"{__name__}.{_EXPORTS[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
