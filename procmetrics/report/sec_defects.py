"""Sections on defects: lifetimes, and reliability growth with its guardrails."""
from __future__ import annotations

from typing import Any

import pandas as pd

from procmetrics.report import flags as fl
from procmetrics.report import plots
from procmetrics.report.context import BuildContext
from procmetrics.report.model import Figure, Table
from procmetrics.resampling import N_BOOT, SALTS

DEFECT_KINDS = ("history", "defects", "lifetimes")
#: curves are not drawn where fewer defects than this remain at risk
MIN_AT_RISK = 10


def compute_defects(ctx: BuildContext) -> Any:
    from procmetrics.analyse.lifetimes.defects import build_defects

    d = ctx.data
    cuts = [ctx.policy_date] if ctx.policy_date is not None else None
    return build_defects(d["fix_links"], commits=d.get("defect_commits", d["commits"]),
                         commit_subsystems=d["commit_subsystems"], trailers=d["trailers"],
                         period_cuts=cuts)


def horizon_days(ctx: BuildContext, defects: Any = None) -> float | None:
    """Common follow-up for the before/after lifetime comparison (days), or None
    (``defects``: the defect table it is taken from, default ``ctx.defects``)."""
    defects = ctx.defects if defects is None else defects
    if ctx.policy_date is None or defects is None or pd.isna(defects.end_date):
        return None
    span = (defects.end_date - ctx.policy_date).total_seconds() / 86400.0
    return float(min(365.0, round(span / 2))) if span > 30 else None


def lifetime_defects(ctx: BuildContext) -> Any:
    """The defect table of the lifetimes section: link era by the *settled* rule."""
    from procmetrics.analyse.lifetimes.defects import build_defects

    d = ctx.data
    cuts = [ctx.policy_date] if ctx.policy_date is not None else None
    return build_defects(d["fix_links"], commits=d.get("defect_commits", d["commits"]),
                         commit_subsystems=d["commit_subsystems"], trailers=d["trailers"],
                         period_cuts=cuts, links_from="settled")


#: defects from which the lifetime analysis's bootstrap bands are worth a second process
#: (its interpreter and imports take about 3 s; at 13,000 defects the bands about 6 s)
ASIDE_MIN_DEFECTS = 5000


def _lifetime_arguments(ctx: BuildContext, H: float | None) -> dict[str, Any]:
    """Keyword arguments of the section's ``analyse_lifetimes`` call, in one place."""
    return {"by": "period" if ctx.policy_date is not None else None, "horizon": H,
            "level": ctx.options.level, "min_at_risk": MIN_AT_RISK, "n_boot": N_BOOT,
            "rng": ctx.rng(SALTS["lifetimes"])}


def start_lifetimes(ctx: BuildContext, min_defects: int | None = None) -> None:
    """Start drawing the bootstrap bands of :func:`section_lifetimes` in a second process
    (``ctx.jobs`` > 1 and at least ``min_defects`` defects), so that they are drawn
    while the other sections are built. Nothing is recorded here: a defect table that
    cannot be built now is built, and its failure noted, where the section always did it."""
    from procmetrics.analyse.lifetimes.analysis import truncation_aware_bands
    from procmetrics.background import AsideJob

    if ctx.jobs < 2:
        return
    try:
        defects = compute_defects(ctx)
        dt = lifetime_defects(ctx)
    except Exception:            # noqa: BLE001 - the sections meet it again and note it
        return
    if len(dt.defects) < (ASIDE_MIN_DEFECTS if min_defects is None else min_defects):
        return
    H = horizon_days(ctx, defects)
    args = _lifetime_arguments(ctx, H)
    ctx.aside_lifetimes = (dt, H, AsideJob(
        truncation_aware_bands, dt, by=args["by"], level=args["level"],
        min_at_risk=args["min_at_risk"], n_boot=args["n_boot"], rng=args["rng"]))


def _lifetimes_result(ctx: BuildContext, dt: Any, H: float | None) -> Any:
    """The section's lifetime analysis, with the bands drawn in the second process when
    they were started for the same defect table and horizon."""
    from procmetrics.analyse.lifetimes.analysis import analyse_lifetimes

    aside, ctx.aside_lifetimes = ctx.aside_lifetimes, None
    bands = None
    if aside is not None:
        adt, aH, job = aside
        if adt is dt and aH == H:
            bands = job
        else:
            job.close()
    return analyse_lifetimes(dt, bands=bands, **_lifetime_arguments(ctx, H))


def section_lifetimes(ctx: BuildContext) -> None:
    from procmetrics.analyse.lifetimes.defects import LEDGER_COLUMNS, defect_ledger
    from procmetrics.report import lifetime_tables as lt

    rep = ctx.report
    s = rep.add_section("lifetimes", "Defect lifetimes")
    if ctx.defects is None:
        s.p("No defect table could be built from the fix references of this store.")
        return
    early = ctx.aside_lifetimes[0] if ctx.aside_lifetimes is not None else None
    dt = ctx.attempt("Defect table (lifetimes)", s,
                     lambda: early if early is not None else lifetime_defects(ctx))
    if dt is None:
        return
    n = int(len(dt.defects))
    era = "every introducer" if dt.links_from is None else f"{dt.links_from:%Y-%m-%d}"
    s.p(f"A defect is a resolved fix reference: a commit naming, in a “Fixes:” line, the "
        f"earlier commit that introduced the problem. {n:,} defects are used "
        f"(lifetime = committer date of the first fix minus committer date of the "
        "introducing commit). Defects fixed without a link, and defects not yet found, are "
        "not in this data.")
    s.p(f"Link era: from {era} ({dt.n_before_links:,} defects introduced earlier left out). "
        f"Rule: {dt.link_era_rule}. Before linking settled, few fixes were linked, so the "
        "early introducers that appear are mostly the long-lived ones.")
    s.p("Lifetimes seen in a history are right-truncated: a defect introduced a month "
        "before the end of the history can only appear if it was fixed within that month. "
        "The headline figures therefore describe lifetimes *given lifetime ≤ H*: for "
        "defects introduced at least H before the end, every lifetime up to H could be "
        "seen, so these figures need no model of the truncation. They say nothing about "
        "defects living longer than H. The unconditional curves (naive Kaplan–Meier, biased "
        "short; truncation-aware Lynden-Bell) are a secondary view, shown only where at "
        f"least {MIN_AT_RISK} defects support them.")
    H = horizon_days(ctx)
    la = ctx.attempt("Defect lifetimes", s, lambda: _lifetimes_result(ctx, dt, H))
    if la is None:
        return
    from procmetrics.analyse.measures.metrics import ALL

    sens_cav = [c for c in la.caveats if c.code == "link_era_sensitive"]
    ch = la.horizon_choice
    if ch is not None and ch.horizon is not None:
        rep.add_table(s, Table(
            "lifetime-headline", f"Headline defect-lifetime figures, conditional on lifetime ≤ "
            f"H = {ch.horizon:.0f} days, with {ctx.options.level:.0%} intervals.",
            [("group", "Defects introduced"), ("figure", "Figure"), ("estimate", "Estimate "
              "[interval]"), ("n", "Defects in cohort"), ("at_risk", "At risk"),
             ("supported", "Within support"), ("link_era_sensitive", "Link-era sensitive")],
            lt.headline_table(la),
            note=f"{ch.rule}. Probabilities: share of the cohort, Wilson interval; quantiles: "
                 "order-statistic interval. Quote these with H and the link-era start; "
                 + lt.LEDGER_REF + ".",
            flags=fl.from_result(sens_cav, "lifetime-headline")))
    else:
        s.note("No headline figures: " + (ch.rule if ch is not None else "no horizon") + ".")
    curves = la.curves[la.curves["group"] == ALL].reset_index(drop=True)
    fig = Figure(
        "lifetime-curves", "Defect lifetimes: share still unfixed (secondary view)",
        "Share of defects still unfixed t days after introduction: naive Kaplan–Meier "
        "(observed lifetimes at face value, biased short) and truncation-aware "
        "(Lynden-Bell) estimates with pointwise bands; curves stop where fewer than "
        f"{MIN_AT_RISK} defects remain at risk; " + lt.LEDGER_REF,
        n=n - la.n_negative_excluded,
        method="Kaplan–Meier (Greenwood, log-log band) and Lynden-Bell product-limit "
               "(percentile bootstrap band, 2,000 resamples)",
        interval=f"{ctx.options.level:.0%} pointwise bands", data=curves,
        kinds=DEFECT_KINDS, values={"summary": la.summary, "groups": la.groups,
                                    "population": la.population, "headline": la.headline,
                                    "horizon_choice": ch, "link_era_start": dt.links_from,
                                    "link_era_rule": dt.link_era_rule,
                                    "ledger": lt.LEDGER_KEY},
        png=plots.survival_png(ctx, la, ALL))
    ctx.add_figure(s, fig, result=la, min_n=ctx.options.min_n, lifetime=True)
    rep.add_table(s, Table(
        "lifetime-quantiles", "Defect lifetime quantiles in days (secondary view), with "
        f"{ctx.options.level:.0%} intervals and the defects at risk at each quantile.",
        [("group", "Defects introduced"), ("method", "Estimator"), ("n", "Defects"),
         ("covers", "Supported range (days)"), ("q25", "25%"), ("q50", "Median"),
         ("q75", "75%"), ("q90", "90%")],
        lt.quantile_table(la.summary),
        note="Truncation-aware: Lynden-Bell estimate, conditional on lifetime ≤ the longest "
             "observed; naive: observed lifetimes at face value (biased short); common "
             "horizon: defects introduced at least the horizon before the end of the history "
             "and fixed within it. Each cell: estimate (interval; defects at risk). A quantile "
             f"where fewer than {MIN_AT_RISK} defects are at risk is not reported (“beyond "
             "what the data support”); “> t” marks an interval reaching beyond the support. "
             "Quantiles, not means: lifetimes are heavily skewed; " + lt.LEDGER_REF + ".",
        flags=fl.rule_flags("lifetime-quantiles", n=None, min_n=None, lifetime=True)
        + fl.from_result(sens_cav, "lifetime-quantiles")))
    if len(la.sensitivity):
        rep.add_table(s, Table(
            "lifetime-sensitivity", "Link-era sensitivity: each figure re-estimated with the "
            "link era starting later.",
            [("figure", "Figure"), ("start", "Link era from"), ("estimate", "Estimate "
              "(interval)"), ("n", "Defects"), ("at_risk", "At risk"),
             ("chosen", "Chosen start")], lt.sensitivity_table(la),
            note="A figure is flagged link-era sensitive when a later start gives an estimate "
                 "outside its interval and the later estimate's own interval excludes it: "
                 "linking was still settling, or lifetimes changed over the history.",
            flags=fl.from_result(sens_cav, "lifetime-sensitivity")))
    ledger = defect_ledger(dt)
    rep.add_table(s, Table(
        lt.LEDGER_KEY, "Defect ledger: every defect (introducer, fix, dates, lifetime, "
        "window, subsystem) and every fix link left out, with the reason.",
        [(c, c) for c in LEDGER_COLUMNS], ledger,
        note="Reasons: before link era, negative lifetime, follow-up fix, unresolved "
             "reference (with its status), missing date.", csv_only=True))
    if la.comparison is not None:
        c = la.comparison
        hz = la.curves[la.curves["method"] == "horizon"].reset_index(drop=True)
        ok = c.p_value < ctx.alpha
        fig = Figure(
            "lifetime-before-after", "Defect lifetimes before and after the policy date",
            f"Lifetimes of defects introduced before and after {ctx.policy_date:%Y-%m-%d}, "
            f"within a common follow-up horizon of {H:.0f} days (log-rank p = "
            f"{c.p_value:.3g}; {'a difference' if ok else 'no evidence of a difference'} at "
            f"the {ctx.alpha:g} level)",
            n=int(c.n), method=f"Kaplan–Meier per group; {c.method}",
            interval=f"{ctx.options.level:.0%} pointwise bands", data=hz,
            kinds=DEFECT_KINDS, values={"test": c.to_dict(), "horizon_days": H},
            png=plots.survival_groups_png(ctx, la))
        ctx.add_figure(s, fig, result=c, min_n=ctx.options.min_n, p_value=c.p_value)


def section_growth(ctx: BuildContext) -> None:
    from procmetrics.analyse.growth.analysis import FIX_EVENTS_DEFINITION, analyse_growth
    from procmetrics.claims.growth import fix_event_times

    rep = ctx.report
    s = rep.add_section("growth", "Reliability growth and its limits")
    s.p("Reliability-growth models describe how the rate of fixes changes over time. Here the "
        "events are " + FIX_EVENTS_DEFINITION + ", in calendar days: the same selection as "
        "the growth command and the fix_rate_declining claim. Trend tests come first (Laplace and the MIL-HDBK-189 power-law test); a model "
        "is fitted only when its trend test shows a falling fix rate, and is then checked "
        "for fit (Cramér–von Mises and Kolmogorov–Smirnov on transformed times, a u-plot and "
        "a hold-out period).")
    s.note("Guardrails: fixes are not failures in service, calendar time is not exposure, "
           "the code keeps growing, and tagging practice changes. A falling fix rate is "
           "consistent with fewer defects, but equally with less testing, less use or a "
           "smaller team. No number of remaining defects is derived from these curves, and "
           "every value beyond the end of the history is marked as an extrapolation.")
    if ctx.defects is None:
        return
    d = ctx.data
    ft = ctx.attempt("Fix times", s, lambda: fix_event_times(
        d["fix_links"], d.get("defect_commits", d["commits"]), commit_subsystems=d["commit_subsystems"]))
    if ft is None:
        return
    g = ctx.attempt("Reliability growth", s, lambda: analyse_growth(
        ft, alpha=ctx.alpha, level=ctx.options.level, n_boot=N_BOOT,
        rng=ctx.rng(SALTS["growth"])))
    if g is None:
        return
    fitted = [m.model for m in g.models if m.fitted]
    fig = Figure(
        "growth-curve", "Cumulative fixes over time",
        f"Cumulative number of fix events since {g.origin:%Y-%m-%d}"
        + (f", with the fitted {', '.join(fitted)} mean-value curve(s) and bootstrap bands; "
           "the shaded part lies beyond the history and is an extrapolation"
           if fitted else "; no growth model was fitted (" + g.refused_reason + ")"),
        n=int(g.n), method="observed counting process; NHPP models by maximum likelihood"
        if fitted else "observed counting process",
        interval=f"{ctx.options.level:.0%} parametric bootstrap band" if fitted
        else "no interval: no model fitted", data=g.curve, kinds=("history", "defects", "growth"),
        values={"scope": g.scope, "population": g.population,
                "trend": None if g.trend is None else g.trend.to_dict(),
                "models": [m.to_dict() for m in g.models]},
        png=plots.growth_png(ctx, g))
    # "no evidence of a change" only when neither test sees a trend either way
    p = None if g.trend is None else float(min(g.trend.laplace.p_two_sided,
                                               g.trend.power_law.p_two_sided))
    ctx.add_figure(s, fig, result=g, min_n=ctx.options.min_n, p_value=p)
    if g.trend is not None:
        rows = []
        for t in (g.trend.laplace, g.trend.power_law):
            rows.append({"test": t.name, "statistic": t.statistic, "n": t.n,
                         "p_growth": t.p_growth, "p_deterioration": t.p_deterioration,
                         "direction": t.direction})
        rep.add_table(s, Table(
            "growth-trend-tests", "Trend tests on the fix times.",
            [("test", "Test"), ("statistic", "Statistic"), ("n", "Fix events"),
             ("p_growth", "p (falling rate)"), ("p_deterioration", "p (rising rate)"),
             ("direction", "Reading")], pd.DataFrame(rows),
            note=g.trend.message + ". " + g.trend.rule + "."))
    rows = []
    for m in g.models:
        if not m.fitted:
            rows.append({"model": m.model, "status": "refused", "detail": m.refused_reason})
            continue
        parts = [f"{e.name} = {e.value:.3g} ({e.level:.0%} interval {e.low:.3g} to "
                 f"{e.high:.3g})" if e.low is not None and e.high is not None else
                 f"{e.name} = {e.value:.3g}" for e in m.fit.params]
        checks = [f"{d.name}: {d.verdict}" for d in m.diagnostics]
        rows.append({"model": m.model, "status": "fitted",
                     "detail": "; ".join(parts) + ". Checks: " + ", ".join(checks)})
        for pr in m.predictions:
            if pr.estimate is None:
                rows.append({"model": m.model, "status": f"prediction {pr.name} refused",
                             "detail": pr.refused_reason})
            else:
                e = pr.estimate
                rows.append({"model": m.model, "status": f"prediction {pr.name}",
                             "detail": f"{e.value:.3g} {e.unit} ({e.level:.0%} interval "
                                       f"{e.low if e.low is None else format(e.low, '.3g')} to "
                                       f"{e.high if e.high is None else format(e.high, '.3g')}"
                                       "); extrapolated beyond the history"})
    rep.add_table(s, Table("growth-models", "Growth models: fitted or refused, and why.",
                           [("model", "Model"), ("status", "Status"), ("detail", "Detail")],
                           pd.DataFrame(rows, columns=["model", "status", "detail"])))
