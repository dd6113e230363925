"""Turn a plot function's Axes into PNG bytes, and build the figures every report has.

The plotting itself happens in :mod:`procmetrics.plot`; this module only saves
the figure (PNG, fixed DPI, no timestamp metadata) and closes it.
"""
from __future__ import annotations

import io
from typing import Any, Callable

from procmetrics.report.html import PNG_DPI


def to_png(ax: Any) -> bytes:
    """Save the Axes' figure as PNG and close it (pyplot keeps figures alive otherwise)."""
    fig = ax.figure if hasattr(ax, "figure") else ax
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=PNG_DPI, metadata={"Software": None},
                bbox_inches="tight", facecolor="white")
    from matplotlib import pyplot as plt  # local: only to release the figure

    plt.close(fig)
    return buf.getvalue()


def render(plot: Callable[..., Any], *args: Any, **kwargs: Any) -> bytes:
    """Call ``plot(*args, **kwargs) -> Axes`` and return the PNG."""
    return to_png(plot(*args, **kwargs))
