"""Truncation-aware curves with bootstrap bands, drawn group by group from one random
stream, here or in a second process (:mod:`procmetrics.background`), and the groups
:func:`~procmetrics.analyse.lifetimes.analysis.analyse_lifetimes` estimates.

The bands are the part of the lifetime analysis that uses the generator; drawn apart
and handed back with the generator's state, they give the same analysis.

References
----------
Lynden-Bell (1971); Efron & Petrosian (1999), JASA 94; Efron & Tibshirani (1993), ch. 13.
"""
from __future__ import annotations

from typing import Any, Literal

import numpy as np
import pandas as pd

from procmetrics.analyse.lifetimes.defects import DefectTable, lifetimes_for_estimation
from procmetrics.analyse.lifetimes.double import NotIdentifiable
from procmetrics.analyse.lifetimes.estimators import (
    kaplan_meier, quantile_estimates, truncated_product_limit,
)

ALL = "(all)"


def _group_keys(d: pd.DataFrame, by: str | None) -> list[tuple[str, pd.DataFrame]]:
    """``(all)`` first, then the groups; periods in time order, subsystems by name."""
    out = [(ALL, d)]
    if by:
        parts = [(str(k), g) for k, g in d.groupby(by, sort=True)]
        if by == "period" and len(d):
            first = d.groupby(by)["intro_date"].min()
            parts.sort(key=lambda kv: first[kv[0]])
        out += parts
    return out


#: defects in a group from which its band is worth a second process (the interpreter and
#: its imports take about 3 s; the band of 13,000 defects about 6 s)
ASIDE_MIN_DEFECTS = 5000


def _band_curve(L: np.ndarray, U: np.ndarray | None, W: np.ndarray, *, level: float,
                      n_boot: int, min_at_risk: int, rng: np.random.Generator
                      ) -> tuple[Any, NotIdentifiable | None]:
    """One group's truncation-aware curve with its bootstrap band from ``rng``, or why it
    is refused (the draws made before the refusal stay drawn, as in one process)."""
    try:
        if U is not None:
            from procmetrics.analyse.lifetimes.double import doubly_truncated_curve

            curve = doubly_truncated_curve(L, U, W, level=level, n_boot=n_boot,
                                           min_at_risk=min_at_risk, rng=rng)
        else:
            curve = truncated_product_limit(L, W, level=level, n_boot=n_boot,
                                            min_at_risk=min_at_risk, rng=rng)
    except NotIdentifiable as exc:
        return None, exc
    return curve, None


def _is_double(d: pd.DataFrame) -> bool:
    """Whether some defects are truncated from below too (introduced before linking)."""
    return bool((d.get("window_low", pd.Series(0.0, index=d.index)) > 0).any())


def _estimation_groups(d: pd.DataFrame, by: str | None, min_group_size: int, double: bool
                       ) -> tuple[list[tuple[str, np.ndarray, np.ndarray, np.ndarray | None]],
                                  list[str]]:
    """The groups estimated, in order, as (group, lifetimes, windows, lower bounds), and
    the groups left out for their size."""
    used, skipped = [], []
    for group, g in _group_keys(d, by):
        if len(g) < min_group_size:
            skipped.append(f"{group} (n={len(g)})")
            continue
        used.append((group, g["lifetime"].to_numpy(float), g["window"].to_numpy(float),
                     g["window_low"].to_numpy(float) if double else None))
    return used, skipped


def truncation_aware_bands(table: DefectTable, *, by: Literal["subsystem", "period"] | None
                           = None, level: float = 0.95, min_at_risk: int = 10,
                           n_boot: int = 2000, min_group_size: int = 10,
                           rng: np.random.Generator | None = None
                           ) -> tuple[list[tuple[str, int, Any, NotIdentifiable | None]],
                                      dict[str, Any]]:
    """The truncation-aware curves with bootstrap bands that :func:`analyse_lifetimes`
    draws from ``rng`` for the same table and arguments, group by group in its order:
    ``([(group, n, curve or None, refusal or None), ...], state of rng afterwards)``.

    The bands are the part of the analysis that depends on the generator; the rest
    (quantile intervals keyed by the data, the horizon figures) does not. Computed
    apart, in a second process (:mod:`procmetrics.background`), and handed to
    :func:`analyse_lifetimes` as ``bands``, they give the same analysis.
    """
    rng = rng if rng is not None else np.random.default_rng(DEFAULT_SEED)
    d, _ = lifetimes_for_estimation(table.defects)
    groups, _ = _estimation_groups(d, by, min_group_size, _is_double(d))
    out = []
    for group, L, W, U in groups:
        curve, refused = _band_curve(L, U, W, level=level, n_boot=n_boot,
                                              min_at_risk=min_at_risk, rng=rng)
        out.append((group, len(L), curve, refused))
    return out, rng.bit_generator.state


#: the generator's seed when none is given
DEFAULT_SEED = 20240601


def _with_bands_drawn_apart(groups: list[tuple[str, np.ndarray, np.ndarray, np.ndarray | None]],
                            bands: Any, rng: np.random.Generator, q: Any, add_curve: Any,
                            add_q: Any, add_aware: Any, refused_note: Any, *,
                            quantiles: tuple[float, ...], level: float, unit: str,
                            min_at_risk: int, band_args: dict[str, Any]) -> Any:
    """:func:`analyse_lifetimes`' groups with the bands drawn elsewhere (``bands``): the
    quantiles are drawn here meanwhile, then everything is added in the one-process
    order. A quantile's warnings count only where its band was not refused (in one
    process it would not have run). Returns the truncation-aware median of all defects."""
    import warnings

    from procmetrics.background import recorded, replay

    pending = []
    try:
        for group, L, W, U in groups:
            km = kaplan_meier(L, level=level, min_at_risk=min_at_risk)
            naive = quantile_estimates(L, quantiles=quantiles, level=level, unit=unit,
                                       min_at_risk=min_at_risk)
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    qe, q_refused = q(L, W, U), None
                except NotIdentifiable as exc:
                    qe, q_refused = None, exc
            pending.append((group, len(L), km, naive, qe, q_refused, recorded(caught)))
        drawn, state = bands.result() if hasattr(bands, "result") else bands
    except BaseException:
        if hasattr(bands, "close"):
            bands.close()
        raise
    if [(g, n) for g, n, *_ in drawn] == [(g, n) for g, n, *_ in pending]:
        rng.bit_generator.state = state
    else:                            # drawn for another table: draw them here, in order
        drawn = [(group, len(L), *_band_curve(L, U, W, rng=rng, **band_args))
                 for group, L, W, U in groups]
    lb_all = None
    registries: dict[str, dict[Any, Any]] = {}
    for (group, _, km, naive, qe, q_refused, notes), (_, _, curve, refused) in zip(pending,
                                                                                  drawn):
        add_curve(group, "naive", km, "none")
        add_q(group, "naive", naive)
        if refused is not None:
            refused_note(group, refused)
            continue
        replay(notes, registries)
        if q_refused is not None:
            refused_note(group, q_refused)
            continue
        lb_all = add_aware(group, curve, qe, lb_all)
    return lb_all
