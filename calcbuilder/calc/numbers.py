"""Strict reading of numbers typed by people, and plain formatting of numbers for messages.

A number typed at the bedside is read by one small grammar and nothing else::

    [sign] digits [separator digits]

* ``sign`` is ``+``, ``-`` or the Unicode minus sign (U+2212, common in pasted text);
* ``digits`` are ASCII ``0-9`` only (other scripts' digits are refused);
* the decimal ``separator`` is a point, or a comma when ``decimal_comma=True``
  was set explicitly; the other character is then refused, because it could be
  read as a thousands separator;
* surrounding white space is ignored.

Refused, each with a message saying what was entered and what to type instead:
empty text; ``nan``/``inf``; scientific notation (``1e3``: nobody measures a
patient value that way, and a stray ``e`` is more likely a typo); digit
grouping (``1,000``, ``1 000``, ``1'000``); a naked decimal separator (``.5``,
``5.``: a digit may have been lost); text after the number (``72kg``); a bound
(``<10``); anything too large to be a finite float.

``decimal_comma=None`` (not stated) behaves like ``False``: the point is the
decimal separator and a comma is refused as ambiguous.
"""

from __future__ import annotations

import math
import re
from decimal import ROUND_CEILING, ROUND_FLOOR, ROUND_HALF_EVEN, Decimal
from typing import Literal

from ..errors import InputValueError

__all__ = [
    "REASONS",
    "NumberTextError",
    "format_number",
    "format_significant",
    "parse_number",
    "shown_text",
]

REASONS = (
    "empty",
    "not_finite",
    "too_large",
    "wrong_separator",
    "several_separators",
    "leading_separator",
    "trailing_separator",
    "scientific",
    "grouped",
    "text_after",
    "bound",
    "not_a_number",
)
"""The ``reason`` codes a :class:`NumberTextError` carries."""

UNICODE_MINUS = "\u2212"
MAX_SHOWN = 24
_GROUP_CHARS = " '_\u00a0\u202f\u2009\u2019"
_NONFINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)
_DIGITS_AND_SEPARATORS = re.compile(r"[+-]?[0-9.,]+")
_SCIENTIFIC = re.compile(r"([+-]?(?:[0-9]+(?:[.,][0-9]*)?|[.,][0-9]+))[eE]([+-]?[0-9]{1,4})")
_GROUPED = re.compile(rf"[+-]?[0-9]+(?:[{_GROUP_CHARS}][0-9]+)+(?:[.,][0-9]+)?")
_TEXT_AFTER = re.compile(r"[+-]?[0-9]+(?:[.,][0-9]+)?\s*[^\s0-9.,+-].*", re.DOTALL)
_BOUND_CHARS = "<>≤≥~≈"


class NumberTextError(InputValueError, ValueError):
    """Text that is not accepted as a number.

    Parameters
    ----------
    message : str
        What was entered and what to type instead (no input label: the caller adds it).
    text : str
        The text as received.
    reason : str
        One of :data:`REASONS`.
    """

    def __init__(self, message: str, *, text: str, reason: str) -> None:
        super().__init__(message)
        self.text = text
        self.reason = reason


def _plain_pattern(sep: str) -> re.Pattern[str]:
    return re.compile(rf"[+-]?[0-9]+(?:{re.escape(sep)}[0-9]+)?")


_PLAIN = {".": _plain_pattern("."), ",": _plain_pattern(",")}


def parse_number(text: str, *, decimal_comma: bool | None = None) -> float:
    """Read one number typed by a person, strictly (see the module notes for the grammar).

    Parameters
    ----------
    text : str
        The text as typed.
    decimal_comma : bool or None
        ``True``: the comma is the decimal separator and a point is refused.
        ``False`` or ``None`` (not stated): the point is the decimal separator
        and a comma is refused.

    Returns
    -------
    float
        A finite float, equal to ``float()`` of the text with surrounding space
        removed, the Unicode minus replaced by ``-`` and a decimal comma by a point.

    Raises
    ------
    NumberTextError
        With a message naming the text and what to type instead; ``reason`` says why.
    TypeError
        If ``text`` is not a ``str``.
    """
    if not isinstance(text, str):
        raise TypeError(f"parse_number expects text; got {type(text).__name__}")
    sep = "," if decimal_comma else "."
    t = text.strip().replace(UNICODE_MINUS, "-")
    if not _PLAIN[sep].fullmatch(t):
        raise _diagnose(text, t, sep)
    value = float(t.replace(",", "."))
    if math.isinf(value):
        raise NumberTextError(
            f"{_q(t)} is too large to be a measured value; check the number",
            text=text,
            reason="too_large",
        )
    return value


def shown_text(text: str) -> str:
    """Text as echoed in a message: stripped, control characters replaced, long text cut."""
    t = "".join(ch if ch.isprintable() else "\ufffd" for ch in text.strip())
    return t if len(t) <= MAX_SHOWN else t[: MAX_SHOWN - 1] + "…"


def _q(text: str) -> str:
    return f"'{shown_text(text)}'"


def _diagnose(text: str, t: str, sep: str) -> NumberTextError:
    """The most specific reason why ``t`` (``text`` stripped) is not a number."""
    reason, advice = _reason(t, sep)
    return NumberTextError(advice, text=text, reason=reason)


def _reason(t: str, sep: str) -> tuple[str, str]:
    if not t:
        return "empty", "nothing was entered; type a number"
    for check in (_nonfinite, _separator_reason, _scientific, _grouped, _text_after, _bound):
        found = check(t, sep)
        if found is not None:
            return found
    name = _separator_name(sep)
    example = "72,5" if sep == "," else "72.5"
    return "not_a_number", (
        f"{_q(t)} is not a number; type digits with at most one {name}, e.g. {example}"
    )


def _separator_name(sep: str) -> str:
    return "decimal comma" if sep == "," else "decimal point"


def _nonfinite(t: str, _sep: str) -> tuple[str, str] | None:
    if not _NONFINITE.fullmatch(t):
        return None
    return "not_finite", f"{_q(t)} is not a usable number; enter a measured value"


def _scientific(t: str, sep: str) -> tuple[str, str] | None:
    match = _SCIENTIFIC.fullmatch(t)
    return None if match is None else ("scientific", _scientific_advice(t, match, sep))


def _grouped(t: str, _sep: str) -> tuple[str, str] | None:
    return ("grouped", _grouped_advice(t)) if _GROUPED.fullmatch(t) else None


def _text_after(t: str, _sep: str) -> tuple[str, str] | None:
    if not _TEXT_AFTER.fullmatch(t):
        return None
    return "text_after", (
        f"{_q(t)} has text after the number; type the number alone and set the unit separately"
    )


def _bound(t: str, _sep: str) -> tuple[str, str] | None:
    if t[0] not in _BOUND_CHARS:
        return None
    return "bound", f"{_q(t)} is a bound, not a value; enter the measured value"


def _separator_reason(t: str, sep: str) -> tuple[str, str] | None:
    """Text made only of digits and separators: which separator rule it breaks."""
    if not _DIGITS_AND_SEPARATORS.fullmatch(t):
        return None
    name = _separator_name(sep)
    other = "." if sep == "," else ","
    sign, body = _split_sign(t)
    if other in body:
        return "wrong_separator", _wrong_separator_advice(t, sign, body, sep, other)
    if body.count(sep) > 1:
        return "several_separators", (
            f"{_q(t)} has more than one {name}; type a single number with one {name} at most"
        )
    if body.startswith(sep):
        return "leading_separator", (
            f"{_q(t)} has no digit before the {name}; type {sign}0{body}"
        )
    if body.endswith(sep):
        return "trailing_separator", (
            f"{_q(t)} ends with a {name}; type {sign}{body[:-1]}, or add the missing decimals"
        )
    return "not_a_number", f"{_q(t)} is not a number; type digits with at most one {name}"


def _split_sign(t: str) -> tuple[str, str]:
    if t[:1] in "+-":
        return t[0], t[1:]
    return "", t


def _wrong_separator_advice(t: str, sign: str, body: str, sep: str, other: str) -> str:
    readings = []
    if body.count(other) == 1 and sep not in body and body[0] != other and body[-1] != other:
        readings.append(sign + body.replace(other, sep))
    grouped = rf"[0-9]{{1,3}}(?:{re.escape(other)}[0-9]{{3}})+(?:{re.escape(sep)}[0-9]+)?"
    if re.fullmatch(grouped, body):
        readings.append(sign + body.replace(other, ""))
    if sep == ".":
        head = (
            f"{_q(t)} contains a comma, which could be a decimal comma or a thousands "
            "separator; type the number with a decimal point and no separators"
        )
    else:
        head = (
            f"{_q(t)} contains a point, but this form uses a decimal comma, so the point "
            "could be a thousands separator; type the number with a decimal comma and no "
            "separators"
        )
    if len(readings) == 2:
        return f"{head}: {readings[0]} or {readings[1]}, whichever you meant"
    if readings:
        return f"{head}: {readings[0]}"
    return head


def _scientific_advice(t: str, match: re.Match[str], sep: str) -> str:
    head = f"{_q(t)} is in scientific notation, which is not accepted here; type the number in full"
    mantissa, exponent = match.group(1), int(match.group(2))
    other = "." if sep == "," else ","
    if other in mantissa or abs(exponent) > 12:
        return head
    full = Decimal(mantissa.replace(",", ".")).scaleb(exponent)
    written = _positional(full)
    return f"{head}: {written.replace('.', ',') if sep == ',' else written}"


def _grouped_advice(t: str) -> str:
    head = f"{_q(t)} has a space or separator between digits; type the number without separators"
    sign, body = _split_sign(t)
    integer = re.split(r"[.,]", body)[0]
    groups = re.split(f"[{_GROUP_CHARS}]", integer)
    if len(groups[0]) <= 3 and all(len(g) == 3 for g in groups[1:]):
        joined = sign + re.sub(f"[{_GROUP_CHARS}]", "", body)
        return f"{head}: {joined}"
    return head


def _positional(value: Decimal) -> str:
    """A Decimal written without exponent and without trailing zeros."""
    text = format(value.normalize(), "f")
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def format_number(
    value: float, *, decimals: int | None = None, decimal_comma: bool | None = False
) -> str:
    """Write a number for a person: no exponent, no ``-0``, the chosen decimal separator.

    Parameters
    ----------
    value : float
        The number.
    decimals : int or None
        Fixed number of decimals; ``None`` writes the shortest text that reads
        back as the same float (``2000.0`` -> ``"2000"``, ``1e-05`` -> ``"0.00001"``).
    decimal_comma : bool or None
        Write a comma instead of the point.

    Returns
    -------
    str
        The text; ``"inf"``, ``"-inf"`` or ``"nan"`` for non-finite values.
    """
    value = float(value)
    if not math.isfinite(value):
        return repr(value)
    if decimals is None:
        text = repr(value)
        if "e" in text:
            text = _positional(Decimal(text))
        elif text.endswith(".0"):
            text = "0" if text == "-0.0" else text[:-2]
    else:
        text = f"{value:.{decimals}f}"
        if float(text) == 0:
            text = text.lstrip("-")
    return text.replace(".", ",") if decimal_comma else text


def format_significant(
    value: float,
    digits: int = 4,
    *,
    rounding: Literal["nearest", "up", "down"] = "nearest",
    decimal_comma: bool | None = False,
) -> str:
    """Write a number rounded to ``digits`` significant digits, without exponent.

    ``rounding="up"`` rounds toward +infinity and ``"down"`` toward -infinity,
    so that a range shown as (low rounded up, high rounded down) lies inside the
    true range. Floating-point noise below 12 significant digits is removed
    first, so 76.99999999999999 is written ``77`` even when rounding up.

    Parameters
    ----------
    value : float
        A finite number.
    digits : int
        Significant digits kept (at least 1).
    rounding : {"nearest", "up", "down"}
        Direction of the rounding.
    decimal_comma : bool or None
        Write a comma instead of the point.

    Returns
    -------
    str
        The rounded number as text.
    """
    value = float(value)
    if not math.isfinite(value) or value == 0:
        return format_number(value, decimal_comma=decimal_comma)
    exact = Decimal(repr(value))
    clean = exact.quantize(Decimal(1).scaleb(exact.adjusted() - 11), rounding=ROUND_HALF_EVEN)
    mode = {"nearest": ROUND_HALF_EVEN, "up": ROUND_CEILING, "down": ROUND_FLOOR}[rounding]
    rounded = clean.quantize(Decimal(1).scaleb(clean.adjusted() - (digits - 1)), rounding=mode)
    text = _positional(rounded)
    return text.replace(".", ",") if decimal_comma else text
