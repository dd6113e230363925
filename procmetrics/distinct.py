"""Distinct values of a text column, exactly: codes and uniques as ``pandas.factorize``
gives them, without its one trap.

``pandas.factorize`` compares the strings of an all-text column as C strings, so two
values that differ only after a NUL character (``""`` and ``"\\x00"``) become one
value. Text from a repository can hold a NUL (git itself refuses one in a message made
by ``git commit``, not in one written by ``git hash-object``), and a reader that shares
equal strings or an analysis that folds e-mails per distinct value must never merge two
different values. Such a column is factorized in Python instead (a dict; slower, and
only for the column that needs it).
"""
from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd


def _has_nul(items: list[Any]) -> bool:
    try:            # all text: one join in C (a million values in milliseconds)
        return "\x00" in "".join(items)
    except TypeError:
        return any(type(v) is str and "\x00" in v for v in items)


def factorize(values: Any) -> tuple[np.ndarray, np.ndarray]:
    """``(codes, uniques)``: ``uniques`` the distinct values in order of first
    appearance (each the first object seen), ``codes`` their positions, -1 for a
    missing value (None, NaN, NA), as ``pandas.factorize``."""
    arr = values.to_numpy() if isinstance(values, (pd.Series, pd.Index)) else np.asarray(
        values, dtype=object)
    if arr.dtype != object or not _has_nul(arr.tolist()):
        codes, uniques = pd.factorize(arr)
        return codes, np.asarray(uniques, dtype=object)
    seen: dict[Any, int] = {}
    firsts: list[Any] = []
    codes = np.empty(len(arr), dtype=np.int64)
    for i, v in enumerate(arr.tolist()):
        if v is None or v is pd.NA or (isinstance(v, float) and v != v):
            codes[i] = -1
            continue
        at = seen.get(v)
        if at is None:
            at = seen[v] = len(firsts)
            firsts.append(v)
        codes[i] = at
    return codes, np.asarray(firsts, dtype=object).reshape(len(firsts))


class ExactIndex:
    """Distinct values to look others up in: ``get_indexer(values)`` is where each value
    sits in ``keys``, -1 where it is not there, as ``pandas.Index(keys).get_indexer``
    gives it, exactly (a dict when a text value of either holds a NUL, which pandas'
    hash table would match to its prefix). Built once, looked up many times."""

    def __init__(self, keys: Any) -> None:
        k = keys.to_numpy() if isinstance(keys, (pd.Series, pd.Index)) else np.asarray(
            keys, dtype=object)
        self._index = pd.Index(k)
        if not self._index.is_unique:
            raise ValueError("ExactIndex needs distinct keys")
        self._nul = k.dtype == object and _has_nul(k.tolist())
        self._dict: dict[Any, int] | None = None
        self._keys = k

    def get_indexer(self, values: Any) -> np.ndarray:
        v = values.to_numpy() if isinstance(values, (pd.Series, pd.Index)) else np.asarray(
            values, dtype=object)
        if not (self._nul or (v.dtype == object and _has_nul(v.tolist()))):
            return self._index.get_indexer(v)
        if self._dict is None:
            self._dict = {key: i for i, key in enumerate(self._keys.tolist())}
        at = self._dict
        return np.array([at.get(x, -1) for x in v.tolist()], dtype=np.int64)
