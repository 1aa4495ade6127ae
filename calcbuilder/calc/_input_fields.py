"""Field readers for the ``inputs`` section (private): each records a problem and returns None.

They keep :mod:`calcbuilder.calc.inputs` safe on data that did not pass the
JSON Schema; their messages follow the ``"json.path: must ..."`` shape.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from .numbers import format_number
from .problems import Problems, join

__all__ = [
    "MAX_DECIMALS",
    "check_unit_name",
    "fmt",
    "read_decimals",
    "read_number",
    "read_optional_text",
    "read_text",
]

MAX_DECIMALS = 6


def fmt(value: float) -> str:
    """A number as written in problem messages (``200.0`` -> ``"200"``)."""
    return format_number(value)


def check_unit_name(name: str, where: str, problems: Problems) -> None:
    """A unit name has no surrounding space and no brackets (used in ``id[unit]`` headers)."""
    if name != name.strip() or not name.strip() or "[" in name or "]" in name:
        problems.add(
            where,
            f"must be a unit name without surrounding spaces or brackets (got {name!r})",
        )


def read_decimals(raw: Any, where: str, problems: Problems) -> int | None:
    """``decimals``: absent (None) or a whole number from 0 to :data:`MAX_DECIMALS`."""
    if raw is None:
        return None
    whole = isinstance(raw, int) or (isinstance(raw, float) and raw.is_integer())
    if isinstance(raw, bool) or not whole or not 0 <= raw <= MAX_DECIMALS:
        problems.add(where, f"must be a whole number from 0 to {MAX_DECIMALS} (got {raw!r})")
        return None
    return int(raw)


def read_text(raw: Any, where: str, problems: Problems) -> str | None:
    """Non-empty text (not only white space)."""
    if not isinstance(raw, str) or not raw.strip():
        problems.add(where, f"must be non-empty text (got {raw!r})")
        return None
    return raw


def read_optional_text(
    raw: Mapping[str, Any], key: str, where: str, problems: Problems
) -> str | None:
    """``raw[key]`` as non-empty text, or None when the key is absent."""
    if key not in raw:
        return None
    return read_text(raw[key], join(where, key), problems)


def read_number(
    raw: Any, where: str, problems: Problems, rule: str = "must be a finite number"
) -> float | None:
    """A finite JSON number (booleans refused); ``rule`` words the non-finite problem."""
    if isinstance(raw, bool) or not isinstance(raw, int | float):
        problems.add(where, f"must be a number (got {raw!r})")
        return None
    try:
        value = float(raw)
    except OverflowError:
        value = math.inf
    if not math.isfinite(value):
        problems.add(where, f"{rule} (got {fmt(value)})")
        return None
    return value
