"""What is measured: periods, per-period process metrics and their intervals.

Question: how reviewed, how fixed, how linked was the work in each period (and
subsystem)? Also the data-quality counts the report states beside them.
May import: ``procmetrics.analyse.result``, ``glmfit``, ``diagnostics`` and ``errors``;
nothing from the other question packages.
"""
from __future__ import annotations

from procmetrics.lazyexports import lazy_getattr

#: public name -> the module (in this package) that defines it (loaded on first use)
_EXPORTS: dict[str, str] = {
    "wilson": "intervals",
    "poisson_exact": "intervals",
    "median_ci": "intervals",
    "median_difference_ci": "intervals",
    "MetricConfig": "metrics",
    "PeriodMetrics": "metrics",
    "commit_flags": "metrics",
    "compute_period_metrics": "metrics",
    "assign_periods": "periods",
    "period_midpoints": "periods",
    "years_since": "periods",
    "resolve_policy": "periods",
    "SubsystemSelection": "selection",
    "select_subsystems": "selection",
    "history_state": "quality",
}
__all__ = sorted(_EXPORTS)

__getattr__ = lazy_getattr(__name__, _EXPORTS)
