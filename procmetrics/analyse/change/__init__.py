"""Did it change: trend models, change points, interrupted time series, two-sample
comparisons, multiplicity, and the before/after analysis of a policy date.

May import: ``procmetrics.analyse.measures``, the shared modules
(``result``, ``glmfit``, ``diagnostics``, ``memo``) and ``errors``.
"""
from __future__ import annotations

from procmetrics.lazyexports import lazy_getattr

#: public name -> the module (in this package) that defines it (loaded on first use)
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
    "LevelChange": "levels",
    "level_change_at": "levels",
    "level_changes": "levels",
    "compare_distributions": "twosample",
    "compare_proportions": "twosample",
    "MultiplicityResult": "multiplicity",
    "adjust_pvalues": "multiplicity",
    "PolicyComparison": "policy",
    "compare_policy": "policy",
}
__all__ = sorted(_EXPORTS)

__getattr__ = lazy_getattr(__name__, _EXPORTS)
