"""Readers for recipe values (private): each records a problem at its key path and returns None.

A key path names where a value sits in the recipe: ``about.title``,
``inputs[age].transform.knots``; an ``[[inputs]]`` entry without a usable id is
named by its position counted from 1, ``inputs[#3]``.
"""

from __future__ import annotations

import datetime as dt
import difflib
import math
from collections.abc import Iterable, Mapping
from typing import Any

from ..calc.numbers import format_number
from ..calc.problems import Problems

__all__ = [
    "at",
    "check_keys",
    "fmt",
    "read_bool",
    "read_date",
    "read_number",
    "read_table",
    "read_text",
    "read_text_list",
    "type_name",
]


def at(path: str, key: str) -> str:
    """Extend a key path: ``at("about", "title") == "about.title"``."""
    return f"{path}.{key}" if path else key


def fmt(value: float) -> str:
    """A number as written in messages (``200.0`` -> ``"200"``)."""
    return format_number(value)


def type_name(value: Any) -> str:
    """The TOML name of a value's type, for messages."""
    names = {bool: "true/false", int: "integer", float: "number", str: "text",
             list: "list", dict: "table"}
    for kind, name in names.items():
        if isinstance(value, kind):
            return name
    return "date" if isinstance(value, dt.date) else type(value).__name__


def check_keys(
    table: Mapping[str, Any], allowed: Iterable[str], path: str, problems: Problems
) -> None:
    """Refuse every key of ``table`` not in ``allowed``, suggesting the closest allowed key."""
    allowed = tuple(allowed)
    for key in table:
        if key in allowed:
            continue
        close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
        hint = f" (did you mean '{close[0]}'?)" if close else ""
        problems.add(
            at(path, key),
            f"unknown key '{key}'{hint}; allowed here: {', '.join(sorted(allowed))}",
        )


def read_table(
    raw: Mapping[str, Any], key: str, path: str, problems: Problems, *, required: bool = False
) -> Mapping[str, Any] | None:
    """``raw[key]`` as a table (``None`` when absent and not required)."""
    if key not in raw:
        if required:
            problems.add(at(path, key), f"required: add a [{at(path, key)}] table")
        return None
    value = raw[key]
    if not isinstance(value, Mapping):
        problems.add(at(path, key), f"must be a table (got {type_name(value)})")
        return None
    return value


def read_text(
    raw: Mapping[str, Any], key: str, path: str, problems: Problems, *, required: bool = True
) -> str | None:
    """``raw[key]`` as non-empty text."""
    if key not in raw:
        if required:
            problems.add(at(path, key), "required")
        return None
    value = raw[key]
    if not isinstance(value, str) or not value.strip():
        problems.add(at(path, key), f"must be non-empty text (got {value!r})")
        return None
    return value


def read_bool(
    raw: Mapping[str, Any], key: str, path: str, problems: Problems, default: bool
) -> bool:
    """``raw[key]`` as true/false, ``default`` when absent (or wrong, after recording it)."""
    value = raw.get(key, default)
    if not isinstance(value, bool):
        problems.add(at(path, key), f"must be true or false (got {value!r})")
        return default
    return value


def read_number(
    raw: Mapping[str, Any], key: str, path: str, problems: Problems, *, required: bool = True
) -> float | None:
    """``raw[key]`` as a finite number (true/false refused)."""
    if key not in raw:
        if required:
            problems.add(at(path, key), "required")
        return None
    value = raw[key]
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        problems.add(at(path, key), f"must be a finite number (got {value!r})")
        return None
    return float(value)


def read_text_list(
    raw: Mapping[str, Any], key: str, path: str, problems: Problems
) -> tuple[str, ...] | None:
    """``raw[key]`` as a list of non-empty texts (``()`` when absent)."""
    value = raw.get(key, [])
    if not isinstance(value, list):
        problems.add(at(path, key), f"must be a list of texts (got {type_name(value)})")
        return None
    bad = [i for i, item in enumerate(value) if not isinstance(item, str) or not item.strip()]
    for i in bad:
        problems.add(f"{at(path, key)}[#{i + 1}]", f"must be non-empty text (got {value[i]!r})")
    return None if bad else tuple(value)


def read_date(
    raw: Mapping[str, Any], key: str, path: str, problems: Problems, *, required: bool = True
) -> dt.date | None:
    """``raw[key]`` as a date: a TOML date (``2026-12-01``) or the text ``"2026-12-01"``."""
    if key not in raw:
        if required:
            problems.add(at(path, key), "required (a date such as 2026-12-01)")
        return None
    value = raw[key]
    if isinstance(value, dt.date) and not isinstance(value, dt.datetime):
        return value
    if isinstance(value, str) and len(value.strip()) == 10:
        try:
            return dt.date.fromisoformat(value.strip())
        except ValueError:
            pass
    problems.add(at(path, key), f"must be a calendar date such as 2026-12-01 (got {value!r})")
    return None
