"""Growth exponents of the benchmark figures: k in value ∝ N^k across history sizes.

Least squares on log–log (ln value = a + k ln N). With two sizes the line goes
through both points (no interval, nothing to check the power law against); with
three or more the standard error of k and a 95% t-interval (n − 2 degrees of
freedom) are given. Fixed costs (interpreter start-up, imports) flatten the
curve at small sizes, so exponents from small histories understate the growth.
"""
from __future__ import annotations

import math

from scipy import stats

import figures as figmod  # bench/figures.py

LEVEL = 0.95


def growth_exponent(sizes: list[int], values: list[float]) -> dict[str, object]:
    """Fit value ∝ N^k by ordinary least squares on (ln N, ln value).

    Pairs whose value is missing or not positive are dropped. Returns ``k``
    (None with fewer than two distinct sizes), ``sizes`` used, ``n``, ``method``,
    ``se`` and ``interval`` (only when n ≥ 3) and a ``note``.
    """
    pairs = sorted((int(n), float(v)) for n, v in zip(sizes, values)
                   if v is not None and v > 0 and n > 0)
    used = [n for n, _ in pairs]
    out: dict[str, object] = {"sizes": used, "n": len(pairs), "k": None, "se": None,
                              "interval": None, "level": LEVEL,
                              "method": "least squares on ln value against ln N"}
    if len(set(used)) < 2:
        out["note"] = "fewer than two sizes: no exponent"
        return out
    x = [math.log(n) for n, _ in pairs]
    y = [math.log(v) for _, v in pairs]
    mx, my = sum(x) / len(x), sum(y) / len(y)
    sxx = sum((a - mx) ** 2 for a in x)
    k = sum((a - mx) * (b - my) for a, b in zip(x, y)) / sxx
    out["k"] = round(k, 4)
    if len(pairs) == 2:
        out["note"] = "two sizes: the line through both points (no interval, no check of the power law)"
        return out
    resid = [b - (my + k * (a - mx)) for a, b in zip(x, y)]
    se = math.sqrt(sum(r * r for r in resid) / (len(pairs) - 2) / sxx)
    t = stats.t.ppf(0.5 + LEVEL / 2, len(pairs) - 2)
    out.update(se=round(se, 4), interval=[round(k - t * se, 4), round(k + t * se, 4)],
               note=f"{len(pairs)} sizes; t-interval with {len(pairs) - 2} degree(s) of freedom")
    return out


def growth_table(per_size: dict[str, dict]) -> dict[str, dict[str, object]]:
    """Exponents of every figure's time and peak memory across the sizes of one run.

    ``per_size`` maps the size (non-merge commits, as a string) to that size's
    results. Only successful runs of a figure enter its fit. Analysis commands
    get a verdict on the time exponent (k ≤ 1.1, on the point estimate).
    """
    sizes = sorted(per_size, key=int)
    figs = {s: figmod.figures(per_size[s]) for s in sizes}
    names = sorted({name for s in sizes for name in figs[s]})
    table: dict[str, dict[str, object]] = {}
    for name in names:
        rows = [(int(s), figs[s][name]) for s in sizes if name in figs[s] and figs[s][name]["ok"]]
        ns = [n for n, _ in rows]
        row: dict[str, object] = {
            "seconds": {str(n): f["seconds"] for n, f in rows},
            "time": growth_exponent(ns, [f["seconds"] for _, f in rows]),
            "memory_main": growth_exponent(ns, [f["peak_rss_main_mib"] for _, f in rows]),
            "memory_tree": growth_exponent(ns, [f["peak_rss_mib"] for _, f in rows]),
            "failed_at": [int(s) for s in sizes if name in figs[s] and not figs[s][name]["ok"]],
        }
        k = row["time"]["k"]
        if name.startswith("analyses."):
            row["verdict"] = ("not measured" if k is None
                              else "meets" if k <= figmod.GROWTH_K else "MISSES")
        table[name] = row
    return table
