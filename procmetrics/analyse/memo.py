"""Results of costly, pure analysis steps, kept while one report or claims check runs.

A report asks for the same per-commit flags, period metrics and defect table many
times: once for its own figures, again for each claim and each alternative choice of
the claims' robustness panels, mostly with the same tables and options. Inside
:func:`kept_results` a function decorated with :func:`memoised` computes each distinct
call once and hands every caller its own deep copy of that one result (so a caller
that changes what it got cannot change what the next caller gets). Outside it, the
functions run as written: a notebook user calling them gets no hidden state.

Calls are told apart by the *identity* of their table arguments (the tables a report
or check loaded; they are not changed while it runs) and by the value of every other
argument that the function reads; the tables of a cached call are held by the cache,
so their identities cannot be reused by other tables while it lives. A call whose
key function returns None is not kept.
"""
from __future__ import annotations

import contextlib
import contextvars
import copy
import functools
import inspect
from collections.abc import Callable, Iterator
from typing import Any, TypeVar

F = TypeVar("F", bound=Callable[..., Any])

_KEPT: contextvars.ContextVar[dict[Any, tuple[Any, Any]] | None] = contextvars.ContextVar(
    "procmetrics_kept_results", default=None)


@contextlib.contextmanager
def kept_results() -> Iterator[None]:
    """Keep results of :func:`memoised` functions until the block ends (nested blocks
    share the outermost one's results)."""
    if _KEPT.get() is not None:
        yield
        return
    token = _KEPT.set({})
    try:
        yield
    finally:
        _KEPT.reset(token)


def table_id(x: Any) -> Any:
    """A table's part of a key: its identity (None stays None)."""
    return None if x is None else ("table", id(x))


def _part(v: Any) -> Any:
    import pandas as pd

    if isinstance(v, (pd.DataFrame, pd.Series, pd.Index)):
        return table_id(v)
    if isinstance(v, (list, tuple)):
        return ("seq", tuple(_part(x) for x in v))
    if isinstance(v, dict):
        return ("map", tuple(sorted((str(k), _part(x)) for k, x in v.items())))
    return v


def memoised(key: Callable[..., Any] | None = None) -> Callable[[F], F]:
    """Decorator: inside :func:`kept_results`, compute once per ``key(*args, **kwargs)``.

    ``key`` takes the function's arguments and returns a hashable value that differs
    whenever the result could differ (tables by :func:`table_id`), or None to skip.
    Without ``key`` every argument counts, bound to the signature with its defaults
    (tables by identity, lists as tuples). An unhashable key skips the cache."""
    def wrap(fn: F) -> F:
        sig = inspect.signature(fn)

        def every_argument(*args: Any, **kwargs: Any) -> Any:
            bound = sig.bind(*args, **kwargs)
            bound.apply_defaults()
            return tuple((name, _part(v)) for name, v in bound.arguments.items())

        key_of = key or every_argument

        @functools.wraps(fn)
        def call(*args: Any, **kwargs: Any) -> Any:
            kept = _KEPT.get()
            if kept is None:
                return fn(*args, **kwargs)
            k = key_of(*args, **kwargs)
            try:
                hash(k)
            except TypeError:
                k = None
            if k is None:
                return fn(*args, **kwargs)
            k = (fn.__module__, fn.__qualname__, k)
            if k not in kept:
                # the arguments are held so that the identities in the key stay theirs
                kept[k] = ((args, kwargs), fn(*args, **kwargs))
            return copy.deepcopy(kept[k][1])
        call.uncached = fn  # type: ignore[attr-defined]
        return call  # type: ignore[return-value]
    return wrap
