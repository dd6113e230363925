"""Gradual `Fixes:` adoption: the horizon-conditional headline figures recover the
truth at the nominal rate with the settled link era; the naive and unconditional
figures, and the first-link start, do not. Simulated at the level of the defect
table (known truth in tests/analyse/lifetime_sim.py)."""
from __future__ import annotations

import numpy as np
import pytest

from procmetrics.analyse.lifetimes.defects import build_defects, lifetimes_for_estimation
from procmetrics.analyse.lifetimes.estimators import quantile_estimates
from procmetrics.analyse.lifetimes.horizon import choose_horizon, headline_figures
from procmetrics.analyse.lifetimes.linkera import settled_link_start
from tests.analyse.lifetime_sim import simulate, truth_probability, truth_quantile

REPLICATES = 100
NOMINAL = 0.95


def _mc(k: int, n: int) -> str:
    p = k / n
    se = np.sqrt(p * (1 - p) / n)
    return f"{p:.3f} (Monte-Carlo 95% interval {p - 1.96 * se:.3f} to {p + 1.96 * se:.3f})"


@pytest.fixture(scope="module")
def runs() -> dict[str, list[dict[str, float]]]:
    out: dict[str, list[dict[str, float]]] = {"settled": [], "first_link": []}
    for seed in range(REPLICATES):
        links, commits = simulate(np.random.default_rng(1000 + seed))
        # one table with every introducer; a link era = keeping introducers from its start
        # (the same rows build_defects keeps with links_from=start)
        every, _ = lifetimes_for_estimation(build_defects(links, commits=commits,
                                                          links_from=None).defects)
        starts = {"settled": settled_link_start(links, commits).start,
                  "first_link": every["fix_date"].min()}
        for mode in out:
            d = every[every["intro_date"] >= starts[mode]]
            H = choose_horizon(d, start=starts[mode]).horizon
            rec: dict[str, float] = {"naive_median": float(np.median(d["lifetime"]))}
            if mode == "first_link":
                (lb,) = quantile_estimates(d["lifetime"], d["window"], quantiles=(0.5,),
                                           n_boot=0)
                rec["lb_median"] = np.nan if lb.value is None else lb.value
            if H is None:
                rec["H"] = np.nan
                out[mode].append(rec)
                continue
            h = headline_figures(d, H)
            med = h[(h["figure"] == "quantile") & (h["quantile"] == 0.5)].iloc[0]
            p365 = h[(h["figure"] == "probability") & (h["t"] == 365)].iloc[0]
            tq, tp = truth_quantile(0.5, H), truth_probability(365, H)
            rec.update(H=H, n=med["n"],
                       cover_median=float(med["low"] <= tq <= med["high"]),
                       cover_p365=float(p365["low"] <= tp <= p365["high"]),
                       rel_median=med["value"] / tq)
            out[mode].append(rec)
    return out


@pytest.mark.slow
def test_headline_figures_cover_the_truth_at_the_nominal_rate(runs):
    """Settled link era: 95 % intervals of P(L <= 365 | L <= H) and of the median given
    L <= H cover the truth in about 95 % of 100 replicates. Allowed Monte-Carlo error:
    3 standard errors of a binomial share at n = 100 (0.065): assert >= 0.885."""
    rows = runs["settled"]
    ok = [r for r in rows if np.isfinite(r["H"])]
    assert len(ok) >= 0.95 * REPLICATES           # the rule finds a horizon
    for key in ("cover_median", "cover_p365"):
        k = int(sum(r[key] for r in ok))
        print(f"settled link era, {key}: {_mc(k, len(ok))} over {len(ok)} replicates "
              f"(nominal {NOMINAL}); median H {np.median([r['H'] for r in ok]):.0f} days, "
              f"median cohort {np.median([r['n'] for r in ok]):.0f}")
        assert k / len(ok) >= NOMINAL - 3 * np.sqrt(NOMINAL * (1 - NOMINAL) / len(ok))


@pytest.mark.slow
def test_first_link_start_naive_and_unconditional_figures_fail(runs):
    """Where they should fail: with the era from the first linked fix the early,
    sparsely linked years favour long lifetimes, so the headline coverage drops far below
    nominal and the unconditional truncation-aware median drifts upward (truth 120
    days: the log-normal median; the longest observed lifetime leaves < 1 % of the mass
    beyond it); the naive median is biased short."""
    first = [r for r in runs["first_link"] if np.isfinite(r["H"])]
    k = int(sum(r["cover_median"] for r in first))
    kp = int(sum(r["cover_p365"] for r in first))
    print(f"first-link era: median coverage {_mc(k, len(first))}, P365 coverage "
          f"{_mc(kp, len(first))}")
    assert k / len(first) < 0.75 and kp / len(first) < 0.75
    lb = np.nanmean([r["lb_median"] for r in runs["first_link"]])
    naive = np.mean([r["naive_median"] for r in runs["settled"]])
    print(f"unconditional truncation-aware median (first-link era): mean {lb:.1f} days; "
          f"naive median (settled era): mean {naive:.1f} days; truth 120")
    assert lb > 1.08 * 120
    assert naive < 0.95 * 120
