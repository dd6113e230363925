"""The median-lifetime claim is decided only within the support of the estimate."""
from __future__ import annotations

import numpy as np
import pandas as pd

from procmetrics.claims.base import UNDECIDABLE, Claim, ClaimContext
from procmetrics.claims.registry import evaluate_claim

T0 = pd.Timestamp("2020-01-01", tz="UTC")


def _context(L: np.ndarray, W: np.ndarray) -> ClaimContext:
    end = T0 + pd.Timedelta(days=float(W.max()) + 1)
    intro = end - pd.to_timedelta(W, unit="D")
    fix = intro + pd.to_timedelta(L, unit="D")
    n = len(L)
    links = pd.DataFrame({
        "repo": "r", "fix_hash": [f"f{i}" for i in range(n)], "position": 0,
        "ref_hash": [f"i{i}" for i in range(n)], "status": "resolved",
        "introducer_hash": [f"i{i}" for i in range(n)], "cited_subject": None,
        "subject_match": None, "in_trailer_block": True, "raw_text": "",
        "fix_author_date": fix, "fix_committer_date": fix,
        "intro_author_date": intro, "intro_committer_date": intro})
    dates = pd.DatetimeIndex(intro).append(pd.DatetimeIndex(fix)).append(pd.DatetimeIndex([end]))
    commits = pd.DataFrame({"repo": "r", "hash": [f"i{i}" for i in range(n)]
                            + [f"f{i}" for i in range(n)] + ["end"],
                            "committer_date": dates, "author_date": dates, "is_merge": False,
                            "lines_added": 1, "lines_deleted": 0, "n_files": 1})
    trailers = pd.DataFrame(columns=["repo", "hash", "key", "value"])
    return ClaimContext(commits=commits, trailers=trailers, fix_links=links)


def test_median_beyond_the_support_is_undecidable_with_the_at_risk_count():
    # many short lifetimes in short windows, three long ones in long windows: the
    # truncation-aware median lies where fewer than 10 defects are at risk. The history
    # is 20 months long (the settled rule then starts the era at the first linked fix,
    # here a defect fixed half a day after the start)
    rng = np.random.default_rng(4)
    L = np.r_[[0.5], rng.uniform(1, 30, 60), [540.0, 570.0, 598.0]]
    W = np.r_[[600.0], rng.uniform(30, 120, 60), [599.0, 599.0, 599.0]]
    v = evaluate_claim(Claim("m", "x", "median_lifetime_below", {"threshold_days": 2000.0}),
                       _context(L, W))
    assert v.verdict == UNDECIDABLE, v.reasons
    assert "beyond what the data support" in v.reasons[0] and "at risk" in v.reasons[0]
    assert any("defect ledger" in r for r in v.reasons)
