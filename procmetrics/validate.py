"""One validator for the numbers a user gives (options, values read back from a manifest).

Each ``check_*`` takes the raw value (a string from the command line, or whatever a
JSON manifest holds), returns it as the right type, or raises
:class:`~procmetrics.errors.ConfigError` (exit 2) naming the option or key:

* ``check_level``: an interval/confidence level, a finite number strictly between 0 and 1;
* ``check_seed``: a non-negative integer (numpy's generators take no negative seed);
* ``check_count``: a positive integer (resamples, bootstrap replicates, jobs, depth);
  ``check_nonnegative_int`` where 0 means "none" (``changes --boot 0``);
* ``check_positive`` / ``check_nonnegative``: a finite number > 0 / >= 0.

:func:`arg` turns a check into an ``argparse`` ``type=``, so a bad option value ends
in argparse's usage line and exit 2 like every other bad option.
"""
from __future__ import annotations

import argparse
import math
from typing import Any, Callable

from procmetrics.errors import ConfigError


def _number(value: Any, what: str) -> float:
    if isinstance(value, bool):
        raise ConfigError(f"{what} must be a number, got {value!r}")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ConfigError(f"{what} must be a number, got {value!r}") from None
    if not math.isfinite(x):
        raise ConfigError(f"{what} must be a finite number, got {value!r}")
    return x


def _integer(value: Any, what: str) -> int:
    if isinstance(value, bool):
        raise ConfigError(f"{what} must be a whole number, got {value!r}")
    if isinstance(value, int):
        return value
    if isinstance(value, float) and value.is_integer():
        return int(value)
    if isinstance(value, str):
        try:
            return int(value.strip(), 10)
        except ValueError:
            pass
    raise ConfigError(f"{what} must be a whole number, got {value!r}")


def check_level(value: Any, what: str = "level") -> float:
    x = _number(value, what)
    if not 0.0 < x < 1.0:
        raise ConfigError(f"{what} must lie strictly between 0 and 1 (e.g. 0.95), got {value!r}")
    return x


def check_seed(value: Any, what: str = "seed") -> int:
    n = _integer(value, what)
    if n < 0:
        raise ConfigError(f"{what} must be a non-negative whole number, got {value!r}")
    return n


def check_count(value: Any, what: str = "count") -> int:
    n = _integer(value, what)
    if n < 1:
        raise ConfigError(f"{what} must be a positive whole number, got {value!r}")
    return n


def check_nonnegative_int(value: Any, what: str = "count") -> int:
    n = _integer(value, what)
    if n < 0:
        raise ConfigError(f"{what} must be 0 or a positive whole number, got {value!r}")
    return n


def check_positive(value: Any, what: str = "value") -> float:
    x = _number(value, what)
    if x <= 0:
        raise ConfigError(f"{what} must be greater than 0, got {value!r}")
    return x


def check_nonnegative(value: Any, what: str = "value") -> float:
    x = _number(value, what)
    if x < 0:
        raise ConfigError(f"{what} must be 0 or more, got {value!r}")
    return x


def arg(check: Callable[[Any, str], Any], what: str = "value") -> Callable[[str], Any]:
    """An ``argparse`` ``type=`` running ``check`` (its message becomes argparse's)."""
    def convert(text: str) -> Any:
        try:
            return check(text, what)
        except ConfigError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None
    convert.__name__ = check.__name__.replace("check_", "")   # argparse names it on error
    return convert
