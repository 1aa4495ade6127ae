"""Small value readers for the model checks: each records a problem instead of raising (private)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from itertools import pairwise
from typing import Any

from .problems import Problems, join

__all__ = ["fmt", "number", "numbers", "strictly_increasing", "string"]


def fmt(value: float) -> str:
    """Format a number for a message: ``70`` not ``70.0``, full precision otherwise."""
    value = float(value)
    if value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(value)


def number(value: Any, path: str, problems: Problems) -> float | None:
    """A finite JSON number as float, or None after recording why not."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        problems.add(path, f"expected a number (got {value!r})")
        return None
    try:
        result = float(value)
    except OverflowError:  # an integer beyond the float range
        problems.add(path, f"must be a finite number (got an integer of {len(str(value))} digits)")
        return None
    if not math.isfinite(result):
        problems.add(path, f"must be a finite number (got {value!r})")
        return None
    return result


def numbers(value: Any, path: str, problems: Problems) -> tuple[float, ...] | None:
    """A list of finite numbers as a tuple of floats, or None after recording each bad entry."""
    if not isinstance(value, list):
        problems.add(path, f"expected a list of numbers (got {value!r})")
        return None
    out = [number(item, join(path, i), problems) for i, item in enumerate(value)]
    if any(v is None for v in out):
        return None
    return tuple(float(v) for v in out if v is not None)


def string(value: Any, path: str, problems: Problems) -> str | None:
    """A non-empty string, or None after recording why not."""
    if not isinstance(value, str) or not value:
        problems.add(path, f"expected a non-empty string (got {value!r})")
        return None
    return value


def strictly_increasing(values: Sequence[float], path: str, problems: Problems) -> None:
    """Record the first pair that is not strictly increasing."""
    for a, b in pairwise(values):
        if not a < b:
            problems.add(path, f"must be strictly increasing (got {fmt(a)} >= {fmt(b)})")
            return
