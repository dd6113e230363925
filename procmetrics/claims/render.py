"""Plain-text renderings of a verdict shared by the terminal, HTML and PDF."""
from __future__ import annotations

from typing import Any

from procmetrics import textfmt


def evidence_line(claim: dict[str, Any]) -> str:
    ev = claim.get("evidence") or {}
    parts = []
    if ev.get("n") is not None:
        parts.append(f"n = {ev['n']:,}")
    est = ev.get("estimate")
    if est and est.get("value") is not None:
        # the digits every command and table prints (procmetrics.textfmt)
        u = est.get("unit") or ""
        unit = f" {u}" if u else ""
        text = f"{est['name']} = {textfmt.number(est['value'], u)}{unit}"
        if est.get("low") is not None and est.get("high") is not None:
            text += (f", {est['level']:.0%} interval {textfmt.number(est['low'], u)} to "
                     f"{textfmt.number(est['high'], u)}{unit}")
        parts.append(text)
    test = ev.get("test")
    if test and test.get("p_value") is not None:
        p = test["p_value"]
        parts.append(f"{test.get('name', 'test')}: p {'< 0.001' if p < 0.001 else f'= {p:.3f}'}")
    if ev.get("method"):
        parts.append(f"method: {ev['method']}")
    diags = [d for d in ev.get("diagnostics", []) if d.get("verdict") == "fail"]
    if diags:
        parts.append("failed diagnostics: " + ", ".join(d["name"] for d in diags))
    return "; ".join(parts) if parts else "none"
