"""Claim kinds no commit history can support (residual defects).

References
----------
Littlewood & Strigini (1993) (limits of evidence for residual-defect claims).
"""
from __future__ import annotations

from procmetrics.claims.base import (
    NOT_SUPPORTABLE, Claim, ClaimContext, ClaimVerdict, KindSpec, Param,
)
from procmetrics.analyse.result import caveat

SPECS: dict[str, KindSpec] = {
    "residual_defects_below": KindSpec(
        "fewer than N defects remain", {"threshold": Param("count", True)},
        "none: not supportable from commit data", "none", ("section:limitations",)),
    "no_defects_remain": KindSpec("no defects remain", {},
                                  "none: not supportable from commit data", "none",
                                  ("section:limitations",)),
}


def eval_not_supportable(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    what = ("that fewer than {} defects remain".format(claim.params["threshold"])
            if claim.kind == "residual_defects_below" else "that no defects remain")
    reasons = (
        f"A commit history records the defects that were found and fixed; it holds no "
        f"trace of those still hidden, so it cannot show {what}.",
        "Models that project a falling fix rate to a number of remaining defects "
        "(reliability growth) rest on assumptions this data cannot check: constant "
        "testing effort and use, every defect fixed with a link, no new code; their "
        "projection is an extrapolation.",
        "A falling rate of fixes is equally consistent with less testing, less use or a "
        "smaller team.",
        "Evidence of this kind must come from elsewhere (verification and validation "
        "records, field data, the safety case) and be judged by the assessor.",
    )
    cav = (caveat("not_identifiable", "the number of undiscovered defects cannot be "
                  "identified from fix records", "fail"),)
    return ClaimVerdict(claim, NOT_SUPPORTABLE, reasons, SPECS[claim.kind].method,
                        caveats=cav)


EVALUATORS = {
    "residual_defects_below": eval_not_supportable,
    "no_defects_remain": eval_not_supportable,
}
