"""How numbers are printed: one place decides the digits of every estimate.

The CLI, the report's tables and captions and the claims' reasons all print an
estimate through these functions, so the same quantity reads the same
everywhere (days without decimals, shares as percentages with one decimal,
ratios and other numbers with three significant digits).
"""
from __future__ import annotations

import math
from typing import Any

#: units printed as whole numbers (lifetimes, horizons, spans)
WHOLE_UNITS = ("days", "day", "releases", "commits", "defects")


def _missing(x: Any) -> bool:
    if x is None:
        return True
    try:
        return not math.isfinite(float(x))
    except (TypeError, ValueError):
        return True


def number(x: Any, unit: str = "") -> str:
    """One number in the house digits for its unit ("-" when missing)."""
    if _missing(x):
        return "-"
    v = float(x)
    if unit in WHOLE_UNITS:
        return f"{v:.0f}"
    if unit in ("share", "%"):
        return f"{100 * v:.1f}%"
    if abs(v) >= 1000:
        return f"{v:.0f}"
    return f"{v:.3g}"


def interval(value: Any, low: Any, high: Any, unit: str = "") -> str:
    """``value (low to high)``; an unbounded end prints as "-∞" (low) or "∞" (high)."""
    if _missing(value):
        return "not reached"
    lo = "-∞" if _missing(low) else number(low, unit)
    hi = "∞" if _missing(high) else number(high, unit)
    return f"{number(value, unit)} ({lo} to {hi})"


def estimate(est: Any) -> str:
    """An :class:`procmetrics.analyse.result.Estimate` as ``value (low–high) unit``."""
    unit = getattr(est, "unit", "") or ""
    text = interval(est.value, est.low, est.high, unit)
    return f"{text} {unit}" if unit in WHOLE_UNITS else text


def with_unit(x: Any, unit: str) -> str:
    """``86 days``: a number followed by its unit (for sentences)."""
    return f"{number(x, unit)} {unit}".rstrip()
