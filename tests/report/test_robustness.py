"""The robustness panel on seeded simulations with a known truth.

Invented data (tests/report/synth.py): review trailers on 30% of commits before
2022-01-01 and 80% after. Stable case: author and committer dates agree, so the
claim "at least 70% of commits after the policy are reviewed" is supported under
every alternative. Fragile case: the same history plus a backlog of patches
written before the policy, unreviewed, and applied after it (committer date
after the policy, author date before). By committer dates the window after the
policy holds the backlog and the share falls to about 55%; by author dates it
holds only patches written under the policy (about 80%). The verdict depends on
the date basis, so the panel must mark it fragile and ``check`` must set bit 16.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from procmetrics.claims.base import SUPPORTED, Claim, ClaimContext, exit_code
from procmetrics.claims.robustness import judge_with_panel, variants
from tests.report.synth import synth

POLICY = pd.Timestamp("2022-01-01", tz="UTC")
CLAIMS = [
    Claim("review-70", "At least 70% of changes after the policy are reviewed.", "at_least",
          {"metric": "review_coverage", "threshold": 0.7, "after": "policy"}),
    Claim("review-higher", "Review is higher after the policy than before.",
          "higher_after_than_before", {"metric": "review_coverage", "date": "policy"}),
]


def _ctx(data) -> ClaimContext:
    return ClaimContext(commits=data["commits"], trailers=data["trailers"],
                        fix_links=data["fix_links"], tags=data["tags"], policy_date=POLICY)


def _with_backlog(data, seed: int, n: int = 300):
    """Move n unreviewed pre-policy commits' committer dates to after the policy."""
    rng = np.random.default_rng(seed)
    c = data["commits"].copy()
    reviewed = set(data["trailers"]["hash"])
    pool = c.index[(c["committer_date"] < POLICY) & ~c["hash"].isin(reviewed)]
    moved = rng.choice(pool, n, replace=False)
    lag = pd.to_timedelta(rng.uniform(0, 300, n), unit="D").round("s")
    c.loc[moved, "committer_date"] = POLICY + lag
    c = c.sort_values("committer_date").reset_index(drop=True)
    return {**{k: data[k] for k in ("trailers", "fix_links", "tags")}, "commits": c}


@pytest.mark.parametrize("seed", [5, 6])
def test_a_verdict_that_survives_every_alternative_is_not_fragile(seed):
    ctx = _ctx(synth(seed=seed, review_before=0.3, review_after=0.8))
    pairs = judge_with_panel(CLAIMS, ctx)
    axes = {v.axis for v in variants(ctx)}
    assert {"period", "date basis", "link era start"} <= axes
    for v, p in pairs:
        assert v.verdict == SUPPORTED, (v.claim.id, v.reasons)
        assert {r.axis for r in p.rows} >= {"period", "date basis"}
        assert not p.fragile and all(r.verdict == SUPPORTED for r in p.rows), p
    assert exit_code([v for v, _ in pairs], fragile=any(p.fragile for _, p in pairs)) == 0


@pytest.mark.parametrize("seed", [5, 6])
def test_a_verdict_that_depends_on_the_date_basis_is_fragile(seed):
    data = _with_backlog(synth(seed=seed, review_before=0.3, review_after=0.8), seed)
    ctx = _ctx(data)
    pairs = dict((v.claim.id, (v, p)) for v, p in judge_with_panel(CLAIMS, ctx))
    v, p = pairs["review-70"]
    print("review-70 by committer dates:", v.verdict, v.reasons[0])
    for r in p.rows:
        print(f"  {r.axis} = {r.label}: {r.verdict} ({r.evidence})")
    assert v.verdict == "not_supported"                        # ~55% after by commit date
    flips = {r.axis: r.verdict for r in p.rows if r.verdict != v.verdict}
    assert flips == {"date basis": SUPPORTED}                  # ~80% by author date
    assert p.fragile and p.flipped_by and "date basis" in p.flipped_by[0]
    d = p.to_dict()
    assert d["fragile"] is True and any(x["axis"] == "date basis" and x["used"]
                                        for x in d["variants"])
    verdicts = [pairs[c.id][0] for c in CLAIMS]
    code = exit_code(verdicts, fragile=True)
    assert code & 16 and code == 8 + 1 + 16                    # not supported + fragile
    assert exit_code(verdicts) == 9                            # without the panel: as before
