"""Claim kinds about the fix rate over time (reliability growth).

References
----------
Crow (1974), MIL-HDBK-189C (power-law NHPP); Cox & Lewis (1966) (Laplace test).
"""
from __future__ import annotations

import numpy as np

from procmetrics.claims import base as cl
from procmetrics.claims.base import Claim, ClaimContext, ClaimVerdict, KindSpec, Undecidable
from procmetrics.claims.common import AFTER, BEFORE, adoption_caveat, window

SPECS: dict[str, KindSpec] = {
    "fix_rate_declining": KindSpec(
        "the rate at which defects are fixed falls over time (reliability growth)",
        {"after": AFTER, "before": BEFORE},
        "power-law (Crow-AMSAA) NHPP shape beta with profile interval; Laplace and "
        "MIL-HDBK-189 trend tests", "down: shape beta < 1",
        ("section:growth", "figure:growth-curve", "table:growth-trend-tests")),
}


def eval_fix_rate(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    from procmetrics.analyse.growth.nhpp import fit_power_law
    from procmetrics.analyse.growth.trendtests import trend_tests

    after, before = window(ctx, claim.params)
    c = ctx.commits[~ctx.commits["is_merge"].fillna(False).astype(bool)]
    start = after if after is not None else c["committer_date"].min()
    end = before if before is not None else c["committer_date"].max()
    fixes = c.loc[(c["n_resolved_fixes"] > 0) & (c["committer_date"] > start)
                  & (c["committer_date"] <= end), "committer_date"]
    if len(fixes) < ctx.min_n:
        raise Undecidable(f"only {len(fixes)} fixing commits in the window "
                          f"(at least {ctx.min_n} needed)")
    t = np.sort(((fixes - start).dt.total_seconds() / 86400.0).to_numpy(float))
    T = float((end - start).total_seconds() / 86400.0)
    fit = fit_power_law(t, T, level=claim.level)
    beta = next(e for e in fit.params if e.name == "beta")
    tests = trend_tests(t, T, alpha=round(1 - claim.level, 10))
    cav = adoption_caveat(ctx, "fix_ratio")
    extra = [tests.message, "a falling fix rate is consistent with fewer defects, but "
             "equally with less testing, less use or a smaller team"]
    return cl.decide(claim, beta, side="below", threshold=1.0, what="power-law shape beta",
                     method=SPECS[claim.kind].method, n=len(t),
                     test={"name": "Laplace test (growth, one-sided)",
                           "p_value": float(tests.laplace.p_growth)}, caveats=cav, extra=extra)


EVALUATORS = {"fix_rate_declining": eval_fix_rate}
