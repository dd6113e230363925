"""Turn a plot function's Axes into PNG bytes.

The plotting itself happens in :mod:`procmetrics.plot` (figures built on
``matplotlib.figure.Figure``, no pyplot state); this module only saves the
figure as PNG at a fixed DPI without timestamp metadata.
"""
from __future__ import annotations

import io
from typing import Any, Callable

from procmetrics.report.html import PNG_DPI


def to_png(ax: Any) -> bytes:
    """Save the Axes' figure as PNG (white background, tight bounding box)."""
    fig = ax.figure if hasattr(ax, "figure") else ax
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=PNG_DPI, metadata={"Software": None},
                bbox_inches="tight", facecolor="white")
    return buf.getvalue()


def render(plot: Callable[..., Any], *args: Any, **kwargs: Any) -> bytes:
    """Call ``plot(*args, **kwargs) -> Axes`` and return the PNG."""
    return to_png(plot(*args, **kwargs))
