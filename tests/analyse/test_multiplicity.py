"""Benjamini-Hochberg / Benjamini-Yekutieli against statsmodels and the BH (1995) example."""
from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from procmetrics.analyse.change.multiplicity import adjust_pvalues

# Benjamini & Hochberg (1995) JRSS B 57:289, the 15 p-values of their example; BH at
# q = 0.05 rejects the four smallest (recalled from memory).
BH_P = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240,
        0.4262, 0.5719, 0.6528, 0.7590, 1.0000]


def test_benjamini_hochberg_published_example():
    r = adjust_pvalues({f"s{i}": p for i, p in enumerate(BH_P)}, alpha=0.05)
    assert r.family_size == 15
    assert r.table["reject_bh"].sum() == 4
    assert r.table["reject_by"].sum() <= 4
    # hand computation of the BH step-up: largest i with p_(i) <= i q / m
    p = np.sort(BH_P)
    i = max(k for k in range(1, 16) if p[k - 1] <= k * 0.05 / 15)
    assert i == 4
    assert "multiple_comparisons" in {c.code for c in r.caveats}


def test_matches_statsmodels_and_skips_missing():
    rng = np.random.default_rng(0)
    p = rng.uniform(0, 0.2, 12)
    vals = {f"x{i}": v for i, v in enumerate(p)}
    vals["missing"] = float("nan")
    r = adjust_pvalues(vals)
    assert r.family_size == 12 and r.n_missing == 1
    ok = r.table["p_value"].notna()
    for meth, col in (("fdr_bh", "p_bh"), ("fdr_by", "p_by")):
        np.testing.assert_allclose(r.table.loc[ok, col], multipletests(p, method=meth)[1])
    assert np.isnan(r.table.loc[~ok, "p_bh"]).all()
