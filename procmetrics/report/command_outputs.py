"""Files written by the ``lifetimes`` and ``growth`` commands for ``--out DIR``.

The commands stay thin: they compute results through the library and hand
them here; this module writes the JSON, CSV tables and figures (it is the only
place on that path that imports :mod:`procmetrics.plot`). Every function
returns the paths it wrote, in order.

Files
-----
``lifetimes``: ``lifetimes.json`` (defect-table counts, population, caveats and
the full analysis), ``defects.csv``, ``defect_ledger.csv`` (every defect and
every left-out link with the reason), ``lifetime_headline.csv`` (the
horizon-conditional headline figures), ``lifetime_sensitivity.csv`` (the
figures re-estimated for later link-era starts), ``link_era_monthly.csv`` (the
monthly linked-fix share behind the settled rule, when used),
``lifetime_quantiles.csv``, ``lifetime_curves.csv``, ``lifetimes.png`` and, per group,
``lifetimes_by_<subsystem|period>.png``. With the blame heuristic also
``lifetimes_heuristic.json`` (the candidate counts, failure modes and the
analysis of the heuristic defects, all labelled ``heuristic``),
``defects_heuristic.csv``, ``szz_candidates.csv`` and
``lifetimes_heuristic.png``.

``growth``: ``growth.json``, ``growth_curve.csv``, ``growth_events.csv``,
``growth.png`` and, when a model was fitted, ``u_plot.png``.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any

from procmetrics.errors import OutputPathError
from procmetrics.report.jsontext import indented
from procmetrics.textsafe import neutralise_frame

DATE_FORMAT = "%Y-%m-%dT%H:%M:%SZ"


def write_json(path: Path, obj: Any) -> Path:
    """Deterministic JSON (sorted keys, no NaN), the text ``json.dumps(obj, indent=2,
    sort_keys=True, allow_nan=False)`` writes (:func:`procmetrics.report.jsontext.indented`);
    an unwritable path is an OutputPathError."""
    try:
        path.write_text(indented(obj, ensure_ascii=True) + "\n")
    except OSError as exc:
        raise OutputPathError(f"cannot write {path}: {exc.strerror or exc}") from exc
    return path


def _out_dir(out: Path | str) -> Path:
    if not str(out).strip():
        raise OutputPathError("--out needs a folder name ('' would mean the current folder)")
    out = Path(out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputPathError(f"cannot create the folder {out}: {exc.strerror or exc}") from exc
    return out


def _csv(df: Any, path: Path) -> Path:
    try:
        neutralise_frame(df).to_csv(path, index=False, date_format=DATE_FORMAT)
    except OSError as exc:
        raise OutputPathError(f"cannot write {path}: {exc.strerror or exc}") from exc
    return path


def _save(ax: Any, path: Path) -> Path:
    ax.figure.savefig(path, dpi=120, bbox_inches="tight")
    return path


def _table_meta(table: Any) -> dict[str, Any]:
    """The defect table's fields without its rows (those go to the CSV files); the rows
    are never converted at all (a per-cell conversion of every defect at kernel scale)."""
    from dataclasses import fields

    from procmetrics.analyse.result import to_plain

    return {f.name: to_plain(getattr(table, f.name)) for f in fields(table)
            if f.metadata.get("json", True) and f.name not in ("defects", "excluded")}


def write_lifetime_outputs(out: Path | str, table: Any, analysis: Any, *,
                           options: dict[str, Any] | None = None,
                           heuristic: Any = None) -> list[Path]:
    """Write the ``lifetimes`` files (see module docstring).

    ``table`` is a :class:`procmetrics.analyse.lifetimes.defects.DefectTable`, ``analysis``
    a :class:`procmetrics.analyse.lifetimes.analysis.LifetimeAnalysis`;
    ``heuristic`` (optional) is a mapping with ``szz`` (an
    :class:`procmetrics.analyse.lifetimes.szz.SZZResult`), ``table`` and ``analysis`` for
    the blame-based defects and ``selection`` (how the fix commits were chosen).
    """
    from procmetrics.plot.survival import plot_survival, plot_survival_by_group

    out = _out_dir(out)
    paths = [write_json(out / "lifetimes.json", {
        "options": options or {}, "defect_table": _table_meta(table),
        "analysis": analysis.to_dict()})]
    from procmetrics.analyse.lifetimes.defects import defect_ledger

    paths.append(_csv(table.defects, out / "defects.csv"))
    paths.append(_csv(defect_ledger(table), out / "defect_ledger.csv"))
    paths.append(_csv(analysis.headline, out / "lifetime_headline.csv"))
    paths.append(_csv(analysis.sensitivity, out / "lifetime_sensitivity.csv"))
    if getattr(table, "link_era", None) is not None:
        paths.append(_csv(table.link_era.monthly, out / "link_era_monthly.csv"))
    paths.append(_csv(analysis.summary, out / "lifetime_quantiles.csv"))
    paths.append(_csv(analysis.curves, out / "lifetime_curves.csv"))
    if len(analysis.curves):
        paths.append(_save(plot_survival(analysis), out / "lifetimes.png"))
        if analysis.by and (analysis.curves["group"] != "(all)").any():
            paths.append(_save(plot_survival_by_group(analysis),
                               out / f"lifetimes_by_{analysis.by}.png"))
    if heuristic is not None:
        h_table, h_an, szz = heuristic["table"], heuristic["analysis"], heuristic["szz"]
        paths.append(write_json(out / "lifetimes_heuristic.json", {
            "label": "heuristic", "selection": heuristic.get("selection", {}),
            "szz": {k: v for k, v in szz.to_dict().items() if k != "links"},
            "defect_table": _table_meta(h_table), "analysis": h_an.to_dict()}))
        paths.append(_csv(h_table.defects, out / "defects_heuristic.csv"))
        paths.append(_csv(szz.links, out / "szz_candidates.csv"))
        if len(h_an.curves):
            ax = plot_survival(h_an)
            ax.set_title("Defect lifetimes, HEURISTIC blame-based links (SZZ)")
            paths.append(_save(ax, out / "lifetimes_heuristic.png"))
    return paths


def write_growth_outputs(out: Path | str, result: Any, *,
                         options: dict[str, Any] | None = None) -> list[Path]:
    """Write the ``growth`` files for a :class:`procmetrics.analyse.growth.analysis.GrowthResult`."""
    from procmetrics.plot.growth import plot_growth, plot_u_plot

    out = _out_dir(out)
    paths = [write_json(out / "growth.json", {**result.to_dict(), "options": options or {}})]
    paths.append(_csv(result.curve, out / "growth_curve.csv"))
    paths.append(_csv(result.events, out / "growth_events.csv"))
    paths.append(_save(plot_growth(result), out / "growth.png"))
    if any(m.fitted for m in result.models):
        paths.append(_save(plot_u_plot(result), out / "u_plot.png"))
    return paths
