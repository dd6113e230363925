"""The PDF of the report: headless Chromium when present, else a plain fallback.

Decision (documented in the README): the PDF is the HTML printed by Debian's
``chromium --headless --print-to-pdf`` when a Chromium binary is found
(``$PROCMETRICS_CHROMIUM``, then ``chromium`` / ``chromium-browser`` on PATH).
Without one (a fresh machine with only Python, git and make) the PDF is
built with matplotlib's ``PdfPages``: the same numbered sections, paragraphs,
tables, figures with captions and flags, set as plain text pages. The
manifest records which engine wrote the PDF.

Chromium runs with a throw-away profile, no network services, no extensions,
and ``--no-sandbox`` (needed as root and in containers without user
namespaces; the page it renders is our own, has no script and forbids every
external load by its Content-Security-Policy).
"""
from __future__ import annotations

import io
import os
import shutil
import subprocess
import tempfile
import textwrap
from pathlib import Path
from typing import Any

from procmetrics.errors import ProcmetricsError
from procmetrics.report.flags import describe
from procmetrics.claims.render import evidence_line
from procmetrics.report.html import fmt_value
from procmetrics import __version__
from procmetrics.report.meta import ReportMeta
from procmetrics.report.model import Report
from procmetrics.report.summary import (CAUTION, robustness_text, running_texts,
                                        summary_rows, warned_diagnostics)

CHROMIUM_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu",
                  "--disable-background-networking", "--disable-component-update",
                  "--disable-sync", "--no-first-run", "--disable-extensions",
                  "--disable-default-apps", "--mute-audio", "--no-pdf-header-footer")
PDF_TIMEOUT_S = 180


def find_chromium() -> str | None:
    """A Chromium binary, or ``None``."""
    env = os.environ.get("PROCMETRICS_CHROMIUM")
    if env:
        return env if Path(env).exists() else shutil.which(env)
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


def chromium_pdf(html: Path, pdf: Path, *, chromium: str) -> None:
    """Print ``html`` to ``pdf`` with headless Chromium."""
    with tempfile.TemporaryDirectory(prefix="procmetrics-chromium-") as profile:
        argv = [chromium, *CHROMIUM_FLAGS, f"--user-data-dir={profile}",
                f"--print-to-pdf={pdf.resolve()}", html.resolve().as_uri()]
        try:
            proc = subprocess.run(argv, stdin=subprocess.DEVNULL, capture_output=True,
                                  timeout=PDF_TIMEOUT_S, check=False)
        except (OSError, subprocess.TimeoutExpired) as exc:
            raise ProcmetricsError(f"chromium could not print the report: {exc}") from exc
    if proc.returncode != 0 or not pdf.exists() or pdf.stat().st_size == 0:
        tail = proc.stderr.decode("utf-8", "replace").strip().splitlines()[-1:] or [""]
        raise ProcmetricsError(f"chromium could not print the report (exit {proc.returncode}"
                               f"): {tail[0]}")


# ---------------------------------------------------------------- fallback
_A4 = (8.27, 11.69)
_LINES_PER_PAGE = 58
_WIDTH = 92


def _text_lines(report: Report, csv_names: dict[str, str], prepared: str) -> list[Any]:
    """The document as a flat list of (style, text) lines and ('figure', key) items."""
    meta = report.meta if report.meta is not None else ReportMeta()
    sc = report.scope
    out: list[Any] = [("mono", f"{label:<14}{value}") for label, value in meta.control_rows()]
    out += [("mono", f"{'Date':<14}{meta.date or prepared}"), ("gap", ""),
            ("title", report.title),
            ("p", f"Repository {sc.get('repo')} at {str(sc.get('head_hash') or '')[:12]}. "
                  f"Prepared on {meta.date or prepared} by procmetrics {__version__}."),
            ("gap", ""), ("h", "Summary")]
    facts = [("Repository", str(sc.get("repo"))), ("Ref analysed", str(sc.get("ref") or "–")),
             ("HEAD commit", str(sc.get("head_hash") or "–")),
             ("Range", f"{str(sc.get('first_commit') or '')[:10]} to "
                       f"{str(sc.get('last_commit') or '')[:10]}: {sc.get('n_commits', 0):,} "
                       f"commits, {sc.get('n_analysed', 0):,} not merges"),
             ("Process change", str(sc.get("policy_date") or "none given")[:10]),
             ("Store checksum", report.store_checksum), ("Tool", f"procmetrics {__version__}")]
    out += [("mono", f"{k:<16}{v}") for k, v in facts] + [("gap", "")]
    out += [("b", x) for x in textwrap.wrap(CAUTION, _WIDTH)] + [("gap", "")]
    if report.claims:
        out.append(("b", "Claims at a glance"))
        for r in summary_rows(report.claims):
            line = (f"{r['number']}. [{r['label']}] {r['id']}: {r['estimate']}"
                    + (f"; n = {r['n']:,}" if r["n"] is not None else "")
                    + f"; robustness: {r['robustness']}"
                    + (f"; rows: {r['evidence']}" if r["evidence"] else ""))
            w = textwrap.wrap(line, _WIDTH - 3)
            out.extend(("p", ("" if i == 0 else "   ") + t) for i, t in enumerate(w))
    out += [("page", ""), ("h", "Contents")]
    out += [("p", f"{s.number}. {s.title}") for s in report.sections] + [("page", "")]
    for s in report.sections:
        out.append(("h", f"{s.number}. {s.title}"))
        for b in s.blocks:
            if b.kind in ("p", "note", "caution"):
                out.extend(("p", t) for t in textwrap.wrap(b.text, _WIDTH))
                out.append(("gap", ""))
            elif b.kind == "list":
                for it in b.items:
                    w = textwrap.wrap(it, _WIDTH - 3)
                    out.extend(("p", ("•  " if i == 0 else "   ") + t) for i, t in enumerate(w))
                out.append(("gap", ""))
            elif b.kind == "figure":
                out.append(("figure", b.ref))
            elif b.kind == "table":
                t = report.tables[b.ref]
                out.extend(("p", x) for x in textwrap.wrap(f"Table {t.number}. {t.title}", _WIDTH))
                if t.csv_only:
                    out.extend(("p", x) for x in textwrap.wrap(
                        f"{len(t.data)} rows, in the report's tables/ folder and report.json. "
                        + t.note, _WIDTH))
                    out.append(("gap", ""))
                    continue
                cols = [k for k, _ in t.columns]
                rows = [[h for _, h in t.columns]] + [
                    [fmt_value(k, r.get(k), k in t.percent_columns) for k in cols]
                    for r in t.data.reindex(columns=cols).astype(object).to_dict("records")]
                widths = [min(28, max(len(str(r[i])) for r in rows)) for i in range(len(cols))]
                for r in rows:
                    out.append(("mono", "  ".join(str(c)[:w].ljust(w) for c, w in zip(r, widths))))
                for f in t.flags:
                    out.extend(("flag", x) for x in
                               textwrap.wrap(f"▸ {describe(f.code)}: {f.message}", _WIDTH))
                out.append(("gap", ""))
            elif b.kind == "verdicts":
                for i, c in enumerate(report.claims, 1):
                    rob = c.get("robustness") or {}
                    out.append(("b", f"Claim {i} ({c['id']}): {c['verdict_label']}"
                                + (" — fragile" if rob.get("fragile") else "")))
                    out.extend(("p", x) for x in textwrap.wrap(f"“{c['text']}”", _WIDTH))
                    for r in c["reasons"]:
                        out.extend(("p", x) for x in textwrap.wrap("–  " + r, _WIDTH))
                    out.extend(("p", x) for x in
                               textwrap.wrap("Evidence: " + evidence_line(c), _WIDTH))
                    files = (c.get("evidence_pack") or {}).get("files") or []
                    out.extend(("p", x) for x in textwrap.wrap(
                        "Rows behind this verdict: " + ("; ".join(
                            f"{f['path']} ({f['rows']:,} rows)" for f in files) or "none"),
                        _WIDTH))
                    see = "; ".join(f"{x['label']} ({x['title']})" for x in c.get("see") or [])
                    if see:
                        out.extend(("p", x) for x in textwrap.wrap("Shown in: " + see, _WIDTH))
                    warned = "; ".join(warned_diagnostics(c)) or "none"
                    out.extend(("p", x) for x in textwrap.wrap(
                        "Diagnostics that warned: " + warned, _WIDTH))
                    out.extend(("p", x) for x in textwrap.wrap(
                        "Robustness: " + robustness_text(c), _WIDTH))
                    out.append(("gap", ""))
    out.append(("p", f"Store checksum {report.store_checksum}."))
    return out


def fallback_pdf(report: Report, pdf: Path, *, csv_names: dict[str, str], prepared: str) -> None:
    """A text-and-figures PDF with matplotlib's PdfPages (no browser needed)."""
    from matplotlib.backends.backend_pdf import PdfPages
    from matplotlib.figure import Figure as MplFigure
    import matplotlib.image as mpimg

    style = {"title": (15, "bold", "serif"), "h": (12, "bold", "serif"),
             "b": (10, "bold", "serif"), "p": (9.5, "normal", "serif"),
             "mono": (7.5, "normal", "monospace"), "flag": (8.5, "normal", "serif"),
             "gap": (6, "normal", "serif")}
    done: list[Any] = []
    with PdfPages(pdf, metadata={"Title": report.title, "Creator": "procmetrics",
                                 "CreationDate": None, "ModDate": None}) as pages:
        fig, y = None, 0.0

        def new_page() -> tuple[Any, float]:
            if fig is not None:
                done.append(fig)
            return MplFigure(figsize=_A4), 0.94

        fig, y = new_page()
        step = 0.86 / _LINES_PER_PAGE
        for item in _text_lines(report, csv_names, prepared):
            kind, text = item
            if kind == "figure":
                f = report.figures[text]
                cap = textwrap.wrap(f.caption_line(), _WIDTH)
                flags = [x for fl in f.flags for x in
                         textwrap.wrap(f"▸ {describe(fl.code)}: {fl.message}", _WIDTH)]
                need = 0.36 + step * (len(cap) + len(flags) + 1)
                if y - need < 0.05:
                    fig, y = new_page()
                if f.png:
                    img = mpimg.imread(io.BytesIO(f.png), format="png")
                    h = min(0.34, 0.84 * img.shape[0] / img.shape[1] * _A4[0] / _A4[1])
                    ax = fig.add_axes((0.08, y - h, 0.84, h))
                    ax.imshow(img)
                    ax.set_axis_off()
                    y -= h + step
                for line in cap:
                    fig.text(0.08, y, line, fontsize=9, family="serif", va="top")
                    y -= step
                for line in flags:
                    fig.text(0.08, y, line, fontsize=8.5, family="serif", va="top",
                             color="#8a5a00")
                    y -= step
                y -= step
                continue
            if kind == "page":
                fig, y = new_page()
                continue
            size, weight, family = style[kind]
            lines = 2 if kind in ("title", "h") else 1
            if y - step * lines < 0.05:
                fig, y = new_page()
            if kind != "gap":
                fig.text(0.08, y, text, fontsize=size, fontweight=weight, family=family,
                         va="top", color="#8a5a00" if kind == "flag" else "#1d1d1b")
            y -= step * (lines if kind != "gap" else 0.6)
        done.append(fig)
        head, foot = running_texts(report, prepared)
        for i, page in enumerate(done, 1):
            grey = dict(fontsize=7, family="serif", color="#5a5a55")
            page.text(0.08, 0.975, head[0], va="top", **grey)
            page.text(0.92, 0.975, head[1], va="top", ha="right", **grey)
            page.text(0.08, 0.025, foot, va="bottom", **grey)
            page.text(0.92, 0.025, f"page {i} of {len(done)}", va="bottom", ha="right", **grey)
            pages.savefig(page)


def write_pdf(report: Report, html: Path, pdf: Path, *, csv_names: dict[str, str],
              prepared: str, engine: str = "auto") -> dict[str, Any]:
    """Write the PDF; return what the manifest records about how it was made.

    ``engine``: ``auto`` (Chromium if found, else the fallback), ``chromium``
    (fail without it), ``fallback`` or ``none`` (no PDF).
    """
    if engine == "none":
        return {"engine": "none", "note": "PDF not requested"}
    note = ""
    if engine in ("auto", "chromium"):
        exe = find_chromium()
        if exe is None:
            if engine == "chromium":
                raise ProcmetricsError("no chromium found for --pdf-engine chromium "
                                       "(set PROCMETRICS_CHROMIUM or install chromium)")
            note = "no chromium found; fallback PDF written with matplotlib"
        else:
            try:
                chromium_pdf(html, pdf, chromium=exe)
                return {"engine": "chromium", "note": ""}
            except ProcmetricsError as exc:
                if engine == "chromium":
                    raise
                note = f"{exc}; fallback PDF written with matplotlib"
    fallback_pdf(report, pdf, csv_names=csv_names, prepared=prepared)
    return {"engine": "matplotlib", "note": note}
