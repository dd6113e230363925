"""compare_policy: the per-subsystem family leaves out fits that cannot be estimated."""
from __future__ import annotations

import numpy as np
import pandas as pd

from procmetrics.analyse.change.policy import compare_policy
from tests.analyse.series_data import simulated_commits

AT = pd.Timestamp("2021-01-01", tz="UTC")


def test_subsystem_with_no_reviews_before_the_date_is_skipped_with_reason():
    # Simulation with a known truth: "net" is reviewed at 40% then 70%; "legacy" is
    # never reviewed before the date (its log-odds level change is infinite).
    rng = np.random.default_rng(4)
    c, t, cs = simulated_commits(rng, n=5000, start="2019-01-01", days=4 * 365,
                                 p_review=lambda d: np.where(d >= AT, 0.7, 0.4),
                                 subsystems=("net", "legacy"))
    legacy_before = set(cs.loc[cs.subsystem == "legacy", "hash"]) & set(
        c.loc[c.committer_date < AT, "hash"])
    t = t[~t.hash.isin(legacy_before)]
    pc = compare_policy(c, t, at=AT, commit_subsystems=cs, metrics=("review_coverage",),
                        n_resamples=99, n_boot=50)
    assert list(pc.subsystems["subsystem"]) == ["net"]
    assert any("legacy" in s and "not estimable" in s for s in pc.skipped)
    net = pc.subsystems.iloc[0]
    truth = np.log(0.7 / 0.3) - np.log(0.4 / 0.6)   # simulation truth (log-odds jump)
    assert net.ci_low < truth < net.ci_high
