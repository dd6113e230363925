"""What the section builders share while a report is assembled."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np
import pandas as pd

from procmetrics.errors import InsufficientData, ProcmetricsError
from procmetrics.report import flags as fl
from procmetrics.store.repodata import StoreData
from procmetrics.report.model import Figure, Flag, Report, ReportOptions, Section


@dataclass
class BuildContext:
    """Mutable only while building; the finished :class:`Report` is what gets written."""

    data: StoreData
    options: ReportOptions
    report: Report
    quality: dict[str, Any]
    policy_date: pd.Timestamp | None
    seed: int
    metrics: Any = None               # PeriodMetrics for every subsystem of interest
    defects: Any = None               # DefectTable
    claims: Any = None                # ClaimsFile
    #: carry-over of the tree against its upstream reference
    #: (:func:`procmetrics.claims.carryover_source.carryover_from_engine`), or None
    carryover: Any = None
    skipped: list[str] = field(default_factory=list)
    #: warnings of the numerical libraries captured during the build (see build.py)
    numerical: Any = None
    #: processes the build may use (:mod:`procmetrics.background`; 1: this one)
    jobs: int = 1
    #: the lifetime analysis started in a second process: (defect table, horizon, by, job)
    aside_lifetimes: Any = None
    #: commit flags of the report's (whole-report) tables, per flag-relevant option
    _flags: dict[Any, pd.DataFrame] = field(default_factory=dict)

    def commit_flags(self, config: Any) -> pd.DataFrame:
        """:func:`procmetrics.analyse.measures.metrics.commit_flags` of the report's
        commits and trailers, computed once per set of options it depends on (the
        tables do not change while the report is built); callers must not modify it."""
        from procmetrics.analyse.measures.metrics import _flags_key, commit_flags

        key = _flags_key(self.data["commits"], self.data["trailers"], config)
        if key not in self._flags:
            self._flags[key] = commit_flags(self.data["commits"], self.data["trailers"], config)
        return self._flags[key]

    @property
    def alpha(self) -> float:
        return round(1.0 - self.options.level, 10)

    def rng(self, salt: int) -> np.random.Generator:
        """A generator per analysis so adding one analysis never shifts another's draws
        (``procmetrics.resampling.SALTS`` names the salts the commands share)."""
        return np.random.default_rng([self.seed, salt])

    def subsystems(self) -> list[str]:
        """The subsystems to show one by one: the ones asked for, else none."""
        return list(self.options.subsystems)

    def attempt(self, what: str, section: Section, fn: Callable[[], Any]) -> Any:
        """Run one analysis; when the data cannot carry it, say so in the section."""
        try:
            return fn()
        except InsufficientData as exc:
            msg = f"{what}: not computed, too little data ({exc})."
        except (ProcmetricsError, ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
            msg = f"{what}: not computed ({exc.__class__.__name__}: {exc})."
        section.note(msg)
        self.skipped.append(msg)
        self.report.flags.append(Flag("too_few_observations" if "too little" in msg
                                      else "model_refused", "warn", "report", msg, "report"))
        return None

    def add_figure(self, section: Section, fig: Figure, result: Any = None,
                   **rules: Any) -> Figure:
        """Number and attach a figure with the flags of its result and the report's rules.

        ``result`` is one analysis result, or a dict ``{name: result}`` whose names
        lead the flag messages.
        """
        if isinstance(result, dict):
            for name, res in result.items():
                fig.flags.extend(fl.from_result(res, fig.key, prefix=name))
        elif result is not None:
            fig.flags.extend(fl.from_result(result, fig.key))
        fig.flags.extend(fl.rule_flags(fig.key, n=fig.n, min_n=rules.pop("min_n", None),
                                       method=fig.method, alpha=self.alpha, **rules))
        fig.flags[:] = fl.dedupe(fig.flags)
        return self.report.add_figure(section, fig)


def frame(rows: list[dict[str, Any]], columns: list[str]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=columns)


def date_text(ts: Any) -> str:
    if ts is None or (isinstance(ts, float) and np.isnan(ts)) or ts is pd.NaT:
        return "–"
    return pd.Timestamp(ts).strftime("%Y-%m-%d")


def apply_store_flags(report: Report, store: dict[str, list[Flag]]) -> None:
    """Attach the store-level flags to every figure they concern."""
    for fig in report.figures.values():
        extra = list(store.get("all", []))
        if "defects" in fig.kinds:
            extra += store.get("defects", [])
        if "trailers" in fig.kinds or "defects" in fig.kinds:
            extra += store.get("trailers", [])
        if "review" in fig.kinds:
            extra += store.get("review", [])
        fig.flags[:] = fl.dedupe(fig.flags + fl.retarget(extra, fig.key))
    for group in store.values():
        report.flags.extend(fl.retarget(group, "report"))
    report.flags[:] = fl.dedupe(report.flags)
