"""The small, frozen result types every analysis returns.

An auditor needs, for every figure: what was estimated, on how many
observations, by which method, with which interval, what the diagnostics said
and which caveats apply. These types carry exactly that; ``to_dict()`` gives a
JSON-ready, deterministic dictionary (sorted keys are the report's job).

Caveat codes are a closed vocabulary (:data:`CAVEAT_CODES`) so the report can
flag them automatically and tests can look for them.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, fields, is_dataclass
from typing import Any, Callable, Literal

import numpy as np
import pandas as pd

from procmetrics.errors import ProcmetricsWarning

Verdict = Literal["pass", "warn", "fail", "n/a"]
Severity = Literal["info", "warn", "fail"]

CAVEAT_CODES: dict[str, str] = {
    "too_few_observations": "too few observations for the method",
    "diagnostic_failed": "a model diagnostic failed",
    "extrapolation": "a value lies outside the observed range",
    "truncation_bias": "lifetimes are right-truncated at the end of the history",
    "heuristic_classification": "classification by a heuristic, not by an explicit link",
    "shallow_history": "the clone is shallow: history and fix targets are cut",
    "rewritten_history": "the history was rewritten between mining runs",
    "unresolved_fix_references": "many fix references could not be resolved",
    "multiple_comparisons": "many comparisons; see the correction applied",
    "tuning_sensitive": "the result moves with a tuning choice",
    "negligible_effect": "statistically significant but negligible in size",
    "absence_of_evidence": "no evidence of a change is not evidence of no change",
    "tag_adoption_rising": "use of the Fixes: trailer is still rising in the window",
    "review_adoption_unsettled": "the window starts before review trailers had settled "
                                 "into use",
    "clock_skew": "some dates are inconsistent (clock skew, rebases)",
    "not_identifiable": "the quantity cannot be identified from this data",
    "model_refused": "the model was not fitted or its prediction was refused",
    "link_era_sensitive": "the figure moves beyond its interval when the link era starts later",
}


@dataclass(frozen=True)
class Diagnostic:
    """One model check: its value, the threshold used and the verdict."""

    name: str
    value: float | None
    threshold: str
    verdict: Verdict
    method: str
    note: str = ""

    def to_dict(self) -> dict[str, Any]:
        return _plain(self)


@dataclass(frozen=True)
class Caveat:
    """A limitation of a result, in plain words, with a code from CAVEAT_CODES."""

    code: str
    message: str
    severity: Severity = "warn"

    def __post_init__(self) -> None:
        if self.code not in CAVEAT_CODES:
            raise ValueError(f"unknown caveat code {self.code!r}")

    def to_dict(self) -> dict[str, Any]:
        return _plain(self)


@dataclass(frozen=True)
class Estimate:
    """A point estimate with its interval, level, method and sample size."""

    name: str
    value: float | None
    low: float | None
    high: float | None
    level: float
    method: str
    n: int
    unit: str = ""
    extrapolated: bool = False

    def to_dict(self) -> dict[str, Any]:
        return _plain(self)


def caveat(code: str, message: str, severity: Severity = "warn", *,
           emit: bool = False) -> Caveat:
    """Build a caveat; with ``emit`` also raise it as a :class:`ProcmetricsWarning`."""
    cv = Caveat(code, message, severity)
    if emit:
        warnings.warn(message, ProcmetricsWarning, stacklevel=2)
    return cv


def _plain(obj: Any, floats: Callable[[float], float] | None = None) -> Any:
    """Convert dataclasses, numpy and pandas values into JSON-ready Python values;
    ``floats`` (optional) maps every finite float (the report's rounding)."""
    if is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: _plain(getattr(obj, f.name), floats) for f in fields(obj)
                if f.metadata.get("json", True)}
    if isinstance(obj, pd.DataFrame):
        return _plain_rows(obj, floats)
    if isinstance(obj, pd.Series):
        return [_plain(v, floats) for v in obj.tolist()]
    if isinstance(obj, dict):
        return {str(k): _plain(v, floats) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v, floats) for v in obj]
    if isinstance(obj, (pd.Timestamp,)):
        return None if pd.isna(obj) else obj.isoformat()
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        if math.isnan(x) or math.isinf(x):
            return None
        return x if floats is None else floats(x)
    if obj is pd.NA or obj is pd.NaT:
        return None
    return obj


def _plain_rows(df: pd.DataFrame, floats: Callable[[float], float] | None = None
                ) -> list[dict[str, Any]]:
    """A DataFrame as a list of row dicts, the values as :func:`_plain` makes them.

    Converted a column at a time: numbers and booleans of numpy columns through
    ``tolist`` (Python's own int, float and bool; NaN and infinities then None), UTC
    and naive times of whole seconds through numpy's ISO text (:func:`iso_seconds`),
    text as it is, other values one by one through :func:`_plain`. A cell at a time,
    the rows of a lifetime-curves table at a million commits took twenty seconds. The
    rows equal the per-cell conversion of ``to_dict(orient="records")`` (the test keeps
    that as its reference)."""
    keys = [str(k) for k in df.columns]
    if len(set(keys)) != len(keys):       # duplicate names: one key each, as to_dict keeps
        return [{str(k): _plain(v, floats) for k, v in row.items()}
                for row in df.to_dict(orient="records")]
    columns = []
    for i in range(df.shape[1]):
        col = df.iloc[:, i]
        kind = col.dtype.kind if isinstance(col.dtype, np.dtype) else "x"
        if kind in "iub":
            columns.append(col.to_numpy().tolist())
            continue
        if kind == "f":
            values = col.to_numpy()
            cells = values.tolist()
            if floats is not None:
                cells = [floats(x) for x in cells]     # NaN and infinities: set below
            for j in np.flatnonzero(~np.isfinite(values)).tolist():
                cells[j] = None
            columns.append(cells)
            continue
        text = iso_seconds(col)
        if text is not None:
            columns.append(text)
            continue
        columns.append([v if type(v) is str else _plain(v, floats) for v in col.tolist()])
    return [dict(zip(keys, cells)) for cells in zip(*columns)]   # no columns: no rows


def iso_seconds(col: pd.Series) -> list[str | None] | None:
    """``Timestamp.isoformat()`` of every value of a UTC or naive time column of whole
    seconds (None for NaT), in numpy: ``datetime_as_string`` to the second, plus
    ``+00:00`` for UTC, is then the same text (``isoformat`` adds digits only for a
    sub-second part). None for any other column."""
    dt = col.dtype
    utc = isinstance(dt, pd.DatetimeTZDtype) and str(dt.tz) == "UTC" and dt.unit == "ns"
    if not (utc or (isinstance(dt, np.dtype) and dt == np.dtype("datetime64[ns]"))):
        return None
    ns = col.array.asi8
    na = col.isna().to_numpy()
    if (ns[~na] % 1_000_000_000).any():
        return None
    naive = col.dt.tz_localize(None) if utc else col
    text = np.datetime_as_string(naive.to_numpy(), unit="s").astype(object)
    if utc:
        text = text + "+00:00"
    text[na] = None
    return text.tolist()


def to_plain(obj: Any, floats: Callable[[float], float] | None = None) -> Any:
    """JSON-ready Python values (see :func:`_plain`); ``floats`` maps every finite float."""
    return _plain(obj, floats)


__all__ = ["Diagnostic", "Caveat", "Estimate", "caveat", "to_plain", "CAVEAT_CODES",
           "Verdict", "Severity", "field"]
