"""How long do defects live: the defect table from fix links, naive and
truncation-aware estimators, comparisons (log-rank, Cox), and blame-based
(SZZ) candidate links.

May import: ``procmetrics.analyse.measures``, the shared modules and ``errors``.
"""
from __future__ import annotations

from procmetrics.lazyexports import lazy_getattr

#: public name -> the module (in this package) that defines it (loaded on first use)
_EXPORTS: dict[str, str] = {
    "DefectTable": "defects",
    "build_defects": "defects",
    "lifetimes_for_estimation": "defects",
    "defect_ledger": "ledger",
    "LinkEra": "linkera",
    "settled_link_start": "linkera",
    "Quantile": "quantiles",
    "efron_petrosian": "double",
    "doubly_truncated_curve": "double",
    "choose_horizon": "horizon",
    "headline_figures": "horizon",
    "link_era_sensitivity": "sensitivity",
    "SurvivalCurve": "estimators",
    "kaplan_meier": "estimators",
    "truncated_product_limit": "estimators",
    "quantile_estimates": "estimators",
    "logrank": "comparisons",
    "stratified_logrank": "comparisons",
    "CoxResult": "cox",
    "fit_cox": "cox",
    "LifetimeAnalysis": "analysis",
    "analyse_lifetimes": "analysis",
    "restrict_to_horizon": "analysis",
    "szz_candidates": "szz",
    "select_unlinked_fixes": "szz",
}
__all__ = sorted(_EXPORTS)

__getattr__ = lazy_getattr(__name__, _EXPORTS)
