"""Multiple comparisons across subsystems (or metrics): false discovery rate control.

Benjamini-Hochberg controls the FDR for independent or positively dependent
tests; Benjamini-Yekutieli controls it under any dependence (subsystems of one
project share contributors, so their tests are rarely independent). Both are
reported with the family size; NaN p-values are left out of the family and
counted.

References
----------
Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate.
JRSS B 57:289-300.
Benjamini, Y. & Yekutieli, D. (2001). The control of the false discovery rate in
multiple testing under dependency. Annals of Statistics 29:1165-1188.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
import pandas as pd
from statsmodels.stats.multitest import multipletests

from procmetrics.analyse.result import Caveat, caveat, to_plain

MULTIPLICITY_COLUMNS = ["label", "p_value", "p_bh", "reject_bh", "p_by", "reject_by"]


@dataclass(frozen=True)
class MultiplicityResult:
    """Adjusted p-values (columns :data:`MULTIPLICITY_COLUMNS`) and the family size."""

    table: pd.DataFrame
    family_size: int
    n_missing: int
    alpha: float
    methods: tuple[str, ...] = ("Benjamini-Hochberg (fdr_bh)", "Benjamini-Yekutieli (fdr_by)")
    caveats: tuple[Caveat, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return to_plain(self)


def adjust_pvalues(pvalues: Mapping[str, float] | pd.Series, *,
                   alpha: float = 0.05) -> MultiplicityResult:
    """Benjamini-Hochberg and Benjamini-Yekutieli adjusted p-values.

    Parameters
    ----------
    pvalues : label -> p-value (e.g. subsystem -> ITS level-change p-value).
    alpha : the false discovery rate to control.

    References
    ----------
    Benjamini & Hochberg (1995); Benjamini & Yekutieli (2001); statsmodels
    ``multipletests``.
    """
    s = pd.Series(pvalues, dtype=float)
    ok = s.notna().to_numpy()
    table = pd.DataFrame({"label": s.index.astype(str), "p_value": s.to_numpy()})
    for col in ("p_bh", "p_by"):
        table[col] = np.nan
    table["reject_bh"] = False
    table["reject_by"] = False
    m = int(ok.sum())
    if m:
        for meth, pc, rc in (("fdr_bh", "p_bh", "reject_bh"), ("fdr_by", "p_by", "reject_by")):
            rej, padj, _, _ = multipletests(s.to_numpy()[ok], alpha=alpha, method=meth)
            table.loc[ok, pc] = padj
            table.loc[ok, rc] = rej
    cavs = []
    if m > 1:
        cavs.append(caveat("multiple_comparisons",
                           f"{m} comparisons in the family; p-values adjusted by "
                           "Benjamini-Hochberg and Benjamini-Yekutieli", "info"))
    return MultiplicityResult(table=table[MULTIPLICITY_COLUMNS], family_size=m,
                              n_missing=int((~ok).sum()), alpha=alpha, caveats=tuple(cavs))
