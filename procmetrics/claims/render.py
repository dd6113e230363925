"""Plain-text renderings of a verdict shared by the terminal, HTML and PDF."""
from __future__ import annotations

from typing import Any


def evidence_line(claim: dict[str, Any]) -> str:
    ev = claim.get("evidence") or {}
    parts = []
    if ev.get("n") is not None:
        parts.append(f"n = {ev['n']:,}")
    est = ev.get("estimate")
    if est and est.get("value") is not None:
        unit = f" {est['unit']}" if est.get("unit") else ""
        text = f"{est['name']} = {est['value']:.3g}{unit}"
        if est.get("low") is not None and est.get("high") is not None:
            text += (f", {est['level']:.0%} interval {est['low']:.3g} to "
                     f"{est['high']:.3g}{unit}")
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
