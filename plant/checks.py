"""Argument checks for the pure modules (no Django): NaN, ±inf and out-of-domain values are refused with a
ValueError that names the argument, before any arithmetic can turn them into a crash elsewhere or a NaN out.

Used by calibration/ (the pure modules), maintenance/loop.py, maintenance/tasks.py and plant/risk.py.
"""
from __future__ import annotations

import math
import numbers


def number(name: str, value) -> float:
    """`value` as a finite float; ValueError naming `name` for NaN, ±inf, a bool, None or a non-number."""
    if isinstance(value, bool) or value is None:
        raise ValueError(f"{name} must be a finite number, not {value!r}")
    if not isinstance(value, numbers.Real):
        try:
            value = float(value)
        except (TypeError, ValueError):
            raise ValueError(f"{name} must be a finite number, not {value!r}") from None
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"{name} must be a finite number, not {value!r}")
    return v


def optional_number(name: str, value) -> float | None:
    """None stays None (not recorded); anything else as :func:`number`."""
    return None if value is None else number(name, value)


def positive(name: str, value) -> float:
    v = number(name, value)
    if v <= 0:
        raise ValueError(f"{name} must be greater than zero, not {value!r}")
    return v


def non_negative(name: str, value) -> float:
    v = number(name, value)
    if v < 0:
        raise ValueError(f"{name} cannot be negative, not {value!r}")
    return v


def fraction(name: str, value, *, include_one: bool = False) -> float:
    """Strictly between 0 and 1 (or in (0, 1] with include_one)."""
    v = number(name, value)
    if not (0 < v < 1 or (include_one and v == 1)):
        raise ValueError(f"{name} must lie between 0 and 1{' (1 allowed)' if include_one else ''}, not {value!r}")
    return v


def whole(name: str, value, minimum: int | None = None) -> int:
    """A whole number (an int, or a float with no fraction), at least `minimum` when given."""
    v = number(name, value)
    if v != math.floor(v):
        raise ValueError(f"{name} must be a whole number, not {value!r}")
    if minimum is not None and v < minimum:
        raise ValueError(f"{name} must be at least {minimum}, not {value!r}")
    return int(v)


def numbers_in(name: str, values, check=number) -> list[float]:
    """Every value of a sequence through `check`, the message naming `name[i]`."""
    try:
        items = list(values)
    except TypeError:
        raise ValueError(f"{name} must be a sequence of numbers, not {values!r}") from None
    return [check(f"{name}[{i}]", v) for i, v in enumerate(items)]
