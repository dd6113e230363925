"""Self-contained HTML: every image a ``data:`` URI, no script, a strict CSP.

Repository text (subjects, names, subsystem names) is untrusted: the template
engine escapes every value (``autoescape=True``); only our own stylesheet is
inserted verbatim, and its SHA-256 is what the Content-Security-Policy allows.
"""
from __future__ import annotations

import base64
import hashlib
import math
import struct
from importlib import resources
from typing import Any

import jinja2
from markupsafe import Markup
import numpy as np
import pandas as pd

from procmetrics import __version__
from procmetrics.claims.render import evidence_line
from procmetrics.report.flags import describe
from procmetrics.report.meta import ReportMeta, commit_link
from procmetrics.report.model import Report, Table
from procmetrics.report.summary import (CAUTION, sig, HASH_COLUMNS, page_css, robustness_text,
                                        summary_rows, warned_diagnostics)

#: rendering resolution of the PNG figures (dots per CSS inch)
PNG_DPI = 150


def stylesheet() -> str:
    return resources.files("procmetrics.report").joinpath("report.css").read_text("utf-8")


def csp_for(*css: str) -> str:
    """The Content-Security-Policy allowing exactly our style blocks (by SHA-256)."""
    digests = " ".join(
        "'sha256-" + base64.b64encode(hashlib.sha256(c.encode("utf-8")).digest()).decode()
        + "'" for c in css)
    return ("default-src 'none'; img-src data:; "
            f"style-src {digests}; base-uri 'none'; form-action 'none'")


def png_size(png: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk."""
    if png[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError("not a PNG image")
    w, h = struct.unpack(">II", png[16:24])
    return int(w), int(h)


def data_uri(png: bytes) -> str:
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def fmt_value(key: str, v: Any, percent: bool = False) -> str:
    """Table cell text: integers with separators, shares as percent, p-values bounded."""
    if v is None or v is pd.NA or v is pd.NaT:
        return "–"
    if isinstance(v, pd.Timestamp):
        return "–" if pd.isna(v) else v.strftime("%Y-%m-%d")
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (int, np.integer)):
        return f"{int(v):,}"
    if isinstance(v, (float, np.floating)):
        x = float(v)
        if math.isnan(x):
            return "–"
        if math.isinf(x):
            return "∞" if x > 0 else "−∞"
        if key.startswith("p_") or key == "p" or key.endswith("_p"):
            return "< 0.001" if x < 0.001 else f"{x:.3f}"
        if percent or key.startswith("share") or key.endswith("_share") \
                or key.startswith("pct"):
            return f"{100 * x:.1f}".replace("-", "−")
        if x.is_integer() and abs(x) < 1e15:
            return f"{int(x):,}"
        if abs(x) >= 100:
            return f"{x:,.0f}"
        return sig(x).replace("-", "−")
    return str(v)


def _numeric(table: Table) -> dict[str, bool]:
    out = {}
    for k, _ in table.columns:
        col = table.data[k] if k in table.data.columns else pd.Series(dtype=object)
        out[k] = bool(len(col)) and bool(pd.api.types.is_numeric_dtype(col)) and \
            not pd.api.types.is_bool_dtype(col)
    return out


def render_html(report: Report, *, csv_names: dict[str, str], prepared: str) -> str:
    """The whole document as one HTML string."""
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("procmetrics.report", "templates"),
        autoescape=True, undefined=jinja2.StrictUndefined,
        trim_blocks=False, lstrip_blocks=False)
    css = stylesheet()
    meta = report.meta if report.meta is not None else ReportMeta()
    running = page_css(report, meta, prepared)
    images, widths = {}, {}
    for key, fig in report.figures.items():
        if fig.png:
            images[key] = data_uri(fig.png)
            widths[key] = round(png_size(fig.png)[0] * 96 / PNG_DPI)
    # cells only for the tables the page shows: a table kept to its CSV file is named
    # with its row count (the defect ledger: over 100,000 rows at kernel scale)
    shown = {k: t for k, t in report.tables.items() if not t.csv_only}
    n_rows = {k: len(t.data) for k, t in report.tables.items()}
    records = {k: t.data.reindex(columns=[c for c, _ in t.columns])
               .astype(object).to_dict(orient="records") for k, t in shown.items()}
    rows = {k: [{c: fmt_value(c, v, c in t.percent_columns) for c, v in r.items()}
                for r in records[k]]
            for k, t in shown.items()}
    numeric = {k: _numeric(t) for k, t in report.tables.items()}
    url = report.options.commit_url
    links = {k: [{c: (commit_link(url, str(v)) if c in HASH_COLUMNS and isinstance(v, str)
                      else None) for c, v in r.items()}
                 for r in records[k]]
             for k in shown}
    head = report.scope.get("head_hash") or ""
    return env.get_template("report.html.j2").render(
        report=report, scope=report.scope, csp=csp_for(css, running), css=Markup(css),
        running_css=Markup(running), meta=meta, control=meta.control_rows(),
        version=__version__, prepared=meta.date or prepared, images=images, widths=widths,
        csv_names=csv_names, rows=rows, n_rows=n_rows, links=links, numeric=numeric,
        describe=describe,
        evidence_line=evidence_line, summary=summary_rows(report.claims),
        head_link=commit_link(url, head), warned=warned_diagnostics,
        caution=CAUTION, robustness_text=robustness_text)
