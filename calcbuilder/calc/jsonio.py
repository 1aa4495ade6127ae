"""Strict reading and pretty writing of calculator JSON.

Reading refuses what ``json`` would silently accept: NaN/Infinity literals,
duplicate keys (the last one would win unseen), numbers too large for a float,
and absurd nesting. Every refusal is a :class:`CalcFileError` with a plain
message; nothing from the file is ever executed.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from ..errors import CalcFileError
from .atomic import atomic_write_text

__all__ = ["MAX_BYTES", "dumps_pretty", "parse_json", "read_json_file", "write_json_file"]

MAX_BYTES = 50 * 1024 * 1024
MAX_DEPTH = 64


def _no_constants(name: str) -> Any:
    raise CalcFileError(f"invalid JSON: {name} is not a number; write a finite number")


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise CalcFileError(f"invalid JSON: the number {text[:40]} is too large for a float")
    return value


def _bounded_int(text: str) -> int:
    if len(text.lstrip("-")) > 300:
        raise CalcFileError(f"invalid JSON: the integer {text[:40]}... has too many digits")
    return int(text)


def _unique_keys(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in pairs:
        if key in out:
            raise CalcFileError(f"invalid JSON: the key {key!r} appears twice in one object")
        out[key] = value
    return out


def _depth(value: Any, limit: int = MAX_DEPTH) -> int:
    """Nesting depth, iteratively (no recursion limit surprises)."""
    deepest = 0
    stack: list[tuple[Any, int]] = [(value, 1)]
    while stack:
        item, d = stack.pop()
        if d > limit:
            return d
        deepest = max(deepest, d)
        if isinstance(item, dict):
            stack.extend((v, d + 1) for v in item.values())
        elif isinstance(item, list):
            stack.extend((v, d + 1) for v in item)
    return deepest


def parse_json(data: bytes | str, *, source: str = "calculator file") -> Any:
    """Parse JSON text strictly (see module docstring)."""
    if isinstance(data, bytes):
        if len(data) > MAX_BYTES:
            raise CalcFileError(f"{source} is {len(data)} bytes; the limit is {MAX_BYTES}")
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise CalcFileError(
                f"{source} is not UTF-8 text (byte {exc.start}); save it as UTF-8"
            ) from None
    else:
        text = data
    try:
        value = json.loads(
            text,
            parse_constant=_no_constants,
            parse_float=_finite_float,
            parse_int=_bounded_int,
            object_pairs_hook=_unique_keys,
        )
    except json.JSONDecodeError as exc:
        raise CalcFileError(
            f"{source} is not valid JSON: {exc.msg} at line {exc.lineno}, column {exc.colno}"
        ) from None
    except RecursionError:
        raise CalcFileError(f"{source} is nested too deeply (limit {MAX_DEPTH} levels)") from None
    except ValueError as exc:  # int/float conversion limits
        raise CalcFileError(f"{source} is not valid JSON: {exc}") from None
    if _depth(value) > MAX_DEPTH:
        raise CalcFileError(f"{source} is nested too deeply (limit {MAX_DEPTH} levels)")
    return value


def read_json_file(path: str | Path, *, source: str | None = None) -> Any:
    """Read and strictly parse a JSON file; a missing or unreadable file is a clear error."""
    p = Path(path)
    label = source or f"calculator file {p}"
    try:
        size = p.stat().st_size
        if size > MAX_BYTES:
            raise CalcFileError(f"{label} is {size} bytes; the limit is {MAX_BYTES}")
        data = p.read_bytes()
    except FileNotFoundError:
        raise CalcFileError(f"{label} does not exist") from None
    except IsADirectoryError:
        raise CalcFileError(f"{label} is a folder, not a file") from None
    except PermissionError:
        raise CalcFileError(f"{label} cannot be read (permission denied)") from None
    return parse_json(data, source=label)


def dumps_pretty(value: Any) -> str:
    """Human-readable JSON (UTF-8 characters kept, two-space indent, trailing newline)."""
    return json.dumps(value, ensure_ascii=False, indent=2, allow_nan=False) + "\n"


def write_json_file(path: str | Path, value: Any) -> None:
    """Write pretty JSON atomically (temporary file in the same folder, fsync, rename)."""
    atomic_write_text(path, dumps_pretty(value))
