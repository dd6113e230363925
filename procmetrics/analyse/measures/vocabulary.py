"""Names shared by the metric code and the command line (no heavy imports).

The command line builds its option choices from these without importing the
statistics stack; :mod:`procmetrics.analyse.measures.metrics` re-exports them.
"""
from __future__ import annotations

ALL = "(all)"
METRIC_COLUMNS: list[str] = ["period", "period_start", "period_end", "subsystem", "metric",
                             "numerator", "denominator", "value", "ci_low", "ci_high",
                             "ci_method", "n"]
DEFAULT_REVIEW_KEYS: tuple[str, ...] = ("Reviewed-by", "Acked-by", "Tested-by")
#: the trailer lines the report and the claims check read from the store: every use
#: there is of review-type keys (commit flags, the defects' reviewed flag, the evidence
#: ledger, trailer adoption); other keys (Signed-off-by, Cc, ...) are left in the store
REPORT_TRAILER_KEYS: tuple[str, ...] = DEFAULT_REVIEW_KEYS
DEFAULT_FIX_KEYWORDS: tuple[str, ...] = ("fix", "bug", "crash", "leak", "regression",
                                         "overflow", "race")

#: metric name -> kind ("proportion", "count", "total", "median")
METRICS: dict[str, str] = {
    "commits": "count", "active_authors": "count",
    "review_coverage": "proportion", "independent_review": "proportion",
    "unreviewed_self_commits": "proportion", "fix_ratio": "proportion",
    "fix_ratio_heuristic": "proportion", "revert_ratio": "proportion",
    "stable_request_share": "proportion", "fixes_tag_adoption": "proportion",
    "applied_by_other": "proportion",
    "churn_lines": "total", "churn_median": "median",
}
