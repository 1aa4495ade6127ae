"""Write a recipe (or an inputs description) as TOML text that :mod:`tomllib` reads back unchanged.

The authoring workspace writes the recipe it fits with next to the project file,
so the same model can be fitted again from the command line
(``calcbuilder fit DATA --recipe NAME.recipe.toml``). Only what a recipe holds
is supported: text, numbers, true/false, dates, lists and tables. Top-level
tables become ``[name]`` sections, lists of tables ``[[name]]`` sections, and
anything nested deeper is written inline.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

__all__ = ["dumps_toml"]

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")


def _key(name: str) -> str:
    return name if _BARE_KEY.fullmatch(name) else json.dumps(name, ensure_ascii=False)


def _value(value: Any) -> str:  # noqa: PLR0911 - one return per TOML type
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError(f"TOML text cannot hold the number {value!r} in a recipe")
        return repr(value)
    if isinstance(value, str):
        # JSON string escapes (\" \\ \n \t \uXXXX ...) are valid TOML basic-string escapes.
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, dt.datetime):
        raise ValueError("recipes hold dates, not times")
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, Mapping):
        inner = ", ".join(f"{_key(str(k))} = {_value(v)}" for k, v in value.items())
        return "{ " + inner + " }" if inner else "{}"
    if isinstance(value, Sequence):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    raise ValueError(f"TOML text cannot hold a {type(value).__name__}")


def _is_table_list(value: Any) -> bool:
    return (isinstance(value, Sequence) and not isinstance(value, str) and bool(value)
            and all(isinstance(v, Mapping) for v in value))


def _body(table: Mapping[str, Any]) -> list[str]:
    return [f"{_key(str(k))} = {_value(v)}" for k, v in table.items()]


def dumps_toml(document: Mapping[str, Any], *, header: Sequence[str] = ()) -> str:
    """The TOML text of ``document`` (a recipe dict), with optional ``# comment`` lines first.

    Parameters
    ----------
    document : mapping
        Plain values only (see the module notes).
    header : sequence of str
        Comment lines written at the top (without the ``#``).

    Returns
    -------
    str
        UTF-8 text ending with a newline; ``tomllib.loads`` gives ``document`` back.
    """
    lines = [f"# {line}".rstrip() for line in header]
    scalars = {k: v for k, v in document.items()
               if not isinstance(v, Mapping) and not _is_table_list(v)}
    if lines:
        lines.append("")
    lines += _body(scalars)
    for key, value in document.items():
        if isinstance(value, Mapping):
            lines += ["", f"[{_key(str(key))}]", *_body(value)]
        elif _is_table_list(value):
            for item in value:
                lines += ["", f"[[{_key(str(key))}]]", *_body(item)]
    return "\n".join(lines).lstrip("\n") + "\n"
