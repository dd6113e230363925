"""Claim kinds about the fix rate over time (reliability growth).

References
----------
Crow (1974), MIL-HDBK-189C (power-law NHPP); Cox & Lewis (1966) (Laplace test).
"""
from __future__ import annotations

from typing import Any

import pandas as pd

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


def _utc(x: Any) -> pd.Timestamp:
    ts = pd.Timestamp(x)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def fix_event_times(fix_links: pd.DataFrame, commits: pd.DataFrame, *,
                    links_from: Any = "settled", after: Any = None, before: Any = None,
                    commit_subsystems: pd.DataFrame | None = None, subsystem: str | None = None,
                    after_tag: str | None = None, tags: pd.DataFrame | None = None,
                    tag_containment: pd.DataFrame | None = None, batch_hours: float = 0.0,
                    basis: str = "committer"):
    """The fix events of the ``growth`` command, the report's growth section and the
    ``fix_rate_declining`` claim: one selection, one set of options, one count.

    Every defect with a resolved ``Fixes:`` link counts, whatever its introducer's
    age (``build_defects(links_from=None)``); observation starts at the link era:
    ``links_from="settled"`` (default) = the month from which ``Fixes:`` linking has
    settled (:mod:`procmetrics.analyse.lifetimes.linkera`, the rule of the lifetime
    median: while linking is still being adopted, fix counts rise with the habit and
    not with the defects, which reads as a rising fix rate); ``"first_link"`` = the
    first linked fix, which starts the clock and is not counted; a date; or None =
    the first commit of the history.
    ``after``/``before`` narrow the window (a claim's); ``basis`` is the clock
    (committer or author dates). The events are chosen by
    :func:`procmetrics.analyse.growth.analysis.select_fix_times`; its
    ``FIX_EVENTS_DEFINITION`` says in words what is counted.
    """
    from procmetrics.analyse.growth.analysis import select_fix_times
    from procmetrics.analyse.lifetimes.defects import build_defects

    table = build_defects(fix_links, basis=basis, commits=commits,
                          commit_subsystems=commit_subsystems, links_from=None)
    d = table.defects
    if links_from is None:
        origin = commits[f"{basis}_date"].min() if len(commits) else None
    elif links_from == "settled":
        # the lifetimes' rule, computed once here (not a second pass over the defects)
        from procmetrics.analyse.lifetimes.linkera import settled_link_start

        origin = settled_link_start(fix_links, commits, clock=basis).start
        if origin is None or pd.isna(origin):
            origin = d["fix_date"].min() if len(d) else None
    elif isinstance(links_from, str):
        origin = d["fix_date"].min() if len(d) else None
    else:
        origin = _utc(links_from)
    if after is not None:
        origin = _utc(after) if origin is None or pd.isna(origin) else max(origin, _utc(after))
    end = table.end_date
    if before is not None:
        end = min(end, _utc(before)) if pd.notna(end) else _utc(before)
    return select_fix_times(d, end=end, origin=origin, subsystem=subsystem,
                            after_tag=after_tag, tags=tags, tag_containment=tag_containment,
                            batch_hours=batch_hours)


def claim_fix_events(claim: Claim, ctx: ClaimContext):
    """The fix events a ``fix_rate_declining`` claim counts (its verdict and its
    evidence rows call this one function): the settled link era, as the growth command
    and the report; a start date in the context (the robustness panel's: the first
    linked fix, or a year after it) replaces it; the claim's window narrows it."""
    after, before = window(ctx, claim.params)
    start = ctx.links_from if isinstance(ctx.links_from, pd.Timestamp) else "settled"
    return fix_event_times(ctx.fix_links, ctx.history, links_from=start,
                           after=after, before=before, basis=ctx.date_basis)


def eval_fix_rate(claim: Claim, ctx: ClaimContext) -> ClaimVerdict:
    from procmetrics.analyse.growth.analysis import FIX_EVENTS_DEFINITION
    from procmetrics.analyse.growth.nhpp import fit_power_law
    from procmetrics.analyse.growth.trendtests import trend_tests

    ft = claim_fix_events(claim, ctx)
    t = ft.times
    if len(t) < ctx.min_n:
        raise Undecidable(f"only {len(t)} fix events in the window "
                          f"(at least {ctx.min_n} needed); {FIX_EVENTS_DEFINITION}")
    T = float(ft.end_days)
    fit = fit_power_law(t, T, level=claim.level)
    beta = next(e for e in fit.params if e.name == "beta")
    tests = trend_tests(t, T, alpha=round(1 - claim.level, 10))
    cav = adoption_caveat(ctx, "fix_ratio")
    extra = [f"{len(t)} {FIX_EVENTS_DEFINITION}, from {ft.origin:%Y-%m-%d} to "
             f"{ft.end_date:%Y-%m-%d}", tests.message, "a falling fix rate is consistent with fewer defects, but "
             "equally with less testing, less use or a smaller team"]
    return cl.decide(claim, beta, side="below", threshold=1.0, what="power-law shape beta",
                     method=SPECS[claim.kind].method, n=len(t),
                     test={"name": "Laplace test (growth, one-sided)",
                           "p_value": float(tests.laplace.p_growth)}, caveats=cav, extra=extra)


EVALUATORS = {"fix_rate_declining": eval_fix_rate}
