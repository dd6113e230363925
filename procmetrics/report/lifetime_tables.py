"""Tables of the lifetimes section: headline figures, link-era sensitivity, the ledger,
and the secondary quantile table (every cell within the support, or saying why not)."""
from __future__ import annotations

from typing import Any

import pandas as pd

LEDGER_KEY = "defect-ledger"
LEDGER_REF = ("every defect behind these figures, and every fix link left out with the "
              f"reason, is listed in the defect ledger (table “{LEDGER_KEY}”)")


def headline_table(la: Any) -> pd.DataFrame:
    """One row per headline figure: label, value with interval, n, at risk, supported."""
    from procmetrics.analyse.lifetimes.horizon import figure_label, figure_text
    from procmetrics.analyse.lifetimes.sensitivity import sensitive_figures

    flagged = set(sensitive_figures(la.caveats))
    rows = []
    for r in la.headline.itertuples():
        if r.figure == "probability" and r.t >= r.horizon:
            continue
        lab = figure_label(r, la.unit)
        rows.append({"group": "all" if r.group == "(all)" else r.group, "figure": lab,
                     "estimate": figure_text(r, la.unit), "n": int(r.n),
                     "at_risk": None if pd.isna(r.at_risk) else int(r.at_risk),
                     "supported": bool(r.supported),
                     "link_era_sensitive": lab in flagged and r.group == "(all)"})
    return pd.DataFrame(rows, columns=["group", "figure", "estimate", "n", "at_risk",
                                       "supported", "link_era_sensitive"])


def sensitivity_table(la: Any) -> pd.DataFrame:
    rows = []
    for r in la.sensitivity.itertuples():
        p = r.figure.startswith("P(")
        f = (lambda x: f"{x:.2f}") if p else (lambda x: f"{x:,.0f}")
        if not r.supported or pd.isna(r.value):
            est = "beyond what the data support"
        else:
            lo = "–" if pd.isna(r.low) else f(r.low)
            hi = "–" if pd.isna(r.high) else f(r.high)
            est = f"{f(r.value)} ({lo}–{hi})"
        rows.append({"figure": r.figure, "start": f"{r.start:%Y-%m-%d}", "estimate": est,
                     "n": int(r.n), "at_risk": None if pd.isna(r.at_risk) else int(r.at_risk),
                     "chosen": bool(r.chosen)})
    return pd.DataFrame(rows, columns=["figure", "start", "estimate", "n", "at_risk", "chosen"])


_METHOD_WORDS = {"truncation_aware": "truncation-aware", "naive": "naive",
                 "horizon": "common horizon"}


def quantile_cell(r: pd.Series) -> str:
    """``"86 (74–100; 220 at risk)"``, or why the quantile is not reported."""
    if "supported" in r and not bool(r["supported"]):
        lim = "–" if pd.isna(r.get("support_limit")) else f"{r['support_limit']:.0f}"
        risk = "" if pd.isna(r.get("at_risk")) else f"; {int(r['at_risk'])} at risk"
        return f"beyond what the data support (> {lim}{risk})"
    if pd.isna(r["value"]):
        return "not reached"
    lo = "–" if pd.isna(r["low"]) else f"{r['low']:.0f}"
    if bool(r.get("high_open", False)):
        hi = f"> {r['support_limit']:.0f}"
    else:
        hi = "∞" if pd.isna(r["high"]) else f"{r['high']:.0f}"
    risk = "" if pd.isna(r.get("at_risk")) else f"; {int(r['at_risk'])} at risk"
    return f"{r['value']:.0f} ({lo}–{hi}{risk})"


def quantile_table(summary: pd.DataFrame) -> pd.DataFrame:
    """One row per (group, estimator); each quantile as "estimate (low–high; at risk)" text."""
    from procmetrics.analyse.measures.metrics import ALL

    rows = []
    order = {ALL: 0, "before": 1, "after": 2}
    for (group, method), g in summary.groupby(["group", "method"], sort=False):
        sl = g["support_limit"].dropna() if "support_limit" in g else pd.Series(dtype=float)
        rl = g["range_low"].dropna() if "range_low" in g else pd.Series(dtype=float)
        row = {"group": "all" if group == ALL else str(group),
               "method": _METHOD_WORDS.get(method, method), "n": int(g["n"].max()),
               "covers": (f"{rl.iloc[0]:.0f}–{sl.iloc[0]:.0f}" if len(sl) and len(rl) else ""),
               "_o": (order.get(group, 3), str(group), list(_METHOD_WORDS).index(method)
                      if method in _METHOD_WORDS else 9)}
        for _, r in g.iterrows():
            row[f"q{int(round(r['quantile'] * 100))}"] = quantile_cell(r)
        rows.append(row)
    rows.sort(key=lambda r: r["_o"])
    return pd.DataFrame(rows, columns=["group", "method", "n", "covers", "q25", "q50", "q75",
                                       "q90"])
