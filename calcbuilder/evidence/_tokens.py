"""One reading of a single data cell or recipe value, shared by the recipe and the data checks.

* Missing: ``None``, NaN, an empty cell, or the texts ``NA``, ``N/A``, ``NaN``,
  ``NULL`` (any case, surrounding spaces ignored). Nothing else is missing.
* A number, or text that is a plain decimal number (``72``, ``-1.5``, ``1e3``),
  reads as a float; ``true``/``false`` values read as the texts ``"true"``/``"false"``.
* Other text reads as itself with surrounding spaces removed.

Text is compared without regard to case for outcome and yes/no values
(:func:`match_key`), exactly for choice values.
"""

from __future__ import annotations

import math
import re
from typing import Any

import numpy as np

from ..calc.numbers import format_number, shown_text

__all__ = ["MISSING_TEXTS", "NUMBER_TEXT", "Token", "match_key", "show", "token"]

Token = float | str
MISSING_TEXTS = frozenset({"", "na", "n/a", "nan", "null"})
"""Cell texts read as missing (compared in lower case, after removing surrounding spaces)."""

NUMBER_TEXT = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
"""Text read as a number: optional sign, ASCII digits, a decimal point, an optional exponent."""


def token(value: Any) -> Token | None:
    """The reading of one cell: None (missing), a float, or text.

    Parameters
    ----------
    value : object
        A cell as it came from the file or the recipe.

    Returns
    -------
    float, str or None
    """
    if value is None:
        return None
    if isinstance(value, bool | np.bool_):
        return "true" if value else "false"
    if isinstance(value, int | float | np.integer | np.floating):
        number = float(value)
        return None if math.isnan(number) else number
    text = str(value).strip()
    if text.lower() in MISSING_TEXTS:
        return None
    if NUMBER_TEXT.fullmatch(text):
        return float(text)
    return text


def match_key(tok: Token) -> Token:
    """The key under which two readings count as the same value (text ignores case)."""
    return tok.casefold() if isinstance(tok, str) else tok


def show(tok: Token | None) -> str:
    """A reading as written in messages: numbers plain, text quoted, missing as (missing)."""
    if tok is None:
        return "(missing)"
    if isinstance(tok, float):
        return format_number(tok)
    return f"'{shown_text(tok)}'"
