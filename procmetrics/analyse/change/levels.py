"""The level change at a date for one series or many subsystems: the guarded level
change of the interrupted time series (:mod:`procmetrics.analyse.change.its`, same fits,
same interval), without the slope, fitted values, placebos and the diagnostics that
only describe the fit: what ``compare`` runs once per subsystem and metric.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import pandas as pd

from procmetrics.analyse.change.itsfit import (TERMS, fit_and_refit, guarded, not_estimable,
                                               series_rows, sides, to_utc)
from procmetrics.analyse.change.trend import metric_kind
from procmetrics.analyse.measures.metrics import ALL
from procmetrics.analyse.memo import kept_results
from procmetrics.analyse.result import Estimate
from procmetrics.errors import InsufficientData


@dataclass(frozen=True)
class LevelChange:
    """The level change of one series at a date, as the per-subsystem tests read it
    (the same estimate, interval and p-value as :func:`interrupted_time_series`)."""

    metric: str
    subsystem: str
    level_change: Estimate
    p_value: float | None
    n_before: int
    n_after: int
    #: False when the interval is unbounded (see ``diagnostic_failed`` in the ITS caveats)
    estimable: bool


def level_change_at(table: pd.DataFrame, metric: str, at: pd.Timestamp | str, *,
                    subsystem: str = ALL, kind: str | None = None, alpha: float = 0.05,
                    dispersion_threshold: float = 1.5, hac: str = "auto") -> LevelChange:
    """Only the guarded level change of :func:`interrupted_time_series` (same fits,
    same interval), without the slope, fitted values, placebos and the diagnostics
    that only describe the fit: for running one test per subsystem.

    Raises :class:`InsufficientData` as :func:`interrupted_time_series` does.
    """
    return _level_change(table, metric, to_utc(at), subsystem, kind, alpha,
                         dispersion_threshold, hac, selected=False)


def level_changes(table: pd.DataFrame, metrics: Sequence[str], at: pd.Timestamp | str,
                  subsystems: Sequence[str], *, alpha: float = 0.05,
                  dispersion_threshold: float = 1.5, hac: str = "auto",
                  parts: Mapping[str, pd.DataFrame] | None = None
                  ) -> list[tuple[str, str, LevelChange | InsufficientData]]:
    """:func:`level_change_at` of every subsystem and metric (subsystem by subsystem,
    metrics in the given order), each subsystem's rows split into its series once:
    ``(subsystem, metric, result)``, the result being the :class:`InsufficientData`
    the test raised when the data cannot support it.

    ``parts``: the table's rows by subsystem when the caller has them (``groupby``
    order); the series of one subsystem at a time are held, not all of them. The
    subsystems share their period grid, so the design is kept while this runs
    (:func:`~procmetrics.analyse.memo.kept_results`).
    """
    at = to_utc(at)
    if parts is None:
        parts = dict(tuple(table.groupby("subsystem", sort=False)))
    empty = table.iloc[:0]
    out: list[tuple[str, str, LevelChange | InsufficientData]] = []
    with kept_results():
        for sub in subsystems:
            part = parts.get(sub, empty)
            series = dict(tuple(part.groupby("metric", sort=False))) if len(part) else {}
            for m in metrics:
                try:
                    out.append((sub, m, _level_change(series.get(m, empty), m, at, sub,
                                                      None, alpha, dispersion_threshold,
                                                      hac, selected=True)))
                except InsufficientData as exc:
                    out.append((sub, m, exc))
    return out


def _level_change(table: pd.DataFrame, metric: str, at: pd.Timestamp, subsystem: str,
                  kind: str | None, alpha: float, dispersion_threshold: float, hac: str, *,
                  selected: bool) -> LevelChange:
    kind = kind or metric_kind(metric)
    s, _ = series_rows(table, metric, subsystem, kind, at, selected)
    _, n_before, n_after = sides(s, metric, subsystem, at)
    fit, refit = fit_and_refit(s, kind, at, alpha, dispersion_threshold, hac, True, detail=False)
    unit = {"proportion": "log-odds", "count": "log-rate"}.get(kind, "metric units")
    level, p, _ = guarded(fit, refit, "post", "level_change", unit, int(s["n"].sum()),
                           n_before + n_after - len(TERMS))
    return LevelChange(metric, subsystem, level, p, n_before, n_after,
                       not not_estimable(kind, level))
