"""Check one patient value against its input specification (the rules of the clinic form).

What is accepted (decisions recorded here; see also :mod:`calcbuilder.calc.numbers`):

* **Missing** is ``None``, empty or blank text, or a float NaN (the missing
  marker of numeric columns). A missing required value is an error; a missing
  optional value has value ``None`` and no message.
* **number**: text read strictly by :func:`~calcbuilder.calc.numbers.parse_number`,
  or an ``int``/``float`` (numpy scalars too). Booleans are refused. The value is
  converted to the canonical unit (``canonical = entered * factor + offset``) and
  then compared with the hard limits (inclusive: outside = error) and the
  developed range (inclusive: outside = warning). When a value outside the limits
  would be possible in another unit of the input, the error asks whether that
  unit was meant; it never changes the unit itself.
* **yes_no**: ``True``/``False``; the numbers 1 and 0; the texts ``yes``, ``y``,
  ``true``, ``1`` and ``no``, ``n``, ``false``, ``0`` (any case, surrounding space
  ignored). Nothing else.
* **choice**: text equal to one of the choice *values* (surrounding space
  ignored; case matters). Labels are not accepted: a label could equal another
  choice's value, and the form offers the values itself.
* A unit is only for number inputs; unit names are matched after NFKC
  normalisation (micro sign = Greek mu); ``None`` or ``""`` mean the canonical unit.

Every problem of the value is reported (an unknown unit and an unreadable
number give two messages), never only the first.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Literal

import numpy as np

from . import messages as say
from .inputs import AltUnit, InputSpec, Range
from .messages import Message
from .numbers import NumberTextError, format_number, format_significant, parse_number, shown_text

__all__ = ["CheckedValue", "Status", "Value", "check_value", "is_missing"]

Value = float | bool | str | None
Status = Literal["ok", "warning", "missing", "error"]
_YES = frozenset({"yes", "y", "true", "1", "1.0"})  # "1.0": CSV files written by pandas
_NO = frozenset({"no", "n", "false", "0", "0.0"})
_NUMBER_TYPES = (int, float, np.integer, np.floating)
_BOOL_TYPES = (bool, np.bool_)


@dataclass(frozen=True)
class CheckedValue:
    """The result of checking one value.

    Attributes
    ----------
    input_id : str
        The input checked.
    value : float, bool, str or None
        The canonical value (number in the canonical unit, ``True``/``False``,
        or the choice value); ``None`` when missing or refused.
    unit : str or None
        The unit the number was entered in, spelled as in the calculator file;
        ``None`` for other kinds, for inputs without unit and for an unknown unit.
    messages : tuple of Message
        Errors (which block the risk) and warnings, in a fixed order.
    """

    input_id: str
    value: Value
    unit: str | None = None
    messages: tuple[Message, ...] = ()

    @property
    def ok(self) -> bool:
        """True when no message blocks the risk."""
        return not any(m.blocking for m in self.messages)

    @property
    def extrapolated(self) -> bool:
        """True when the value lies outside the range the model was developed on."""
        return any(m.code == "extrapolation" for m in self.messages)

    @property
    def status(self) -> Status:
        """``error``, ``missing`` (optional and empty), ``warning`` or ``ok``."""
        if not self.ok:
            return "error"
        if self.value is None:
            return "missing"
        return "warning" if self.messages else "ok"


def check_value(
    spec: InputSpec,
    raw: object,
    *,
    unit: str | None = None,
    decimal_comma: bool | None = None,
) -> CheckedValue:
    """Check one entered value and convert it to the canonical unit.

    Parameters
    ----------
    spec : InputSpec
        The input.
    raw : str, int, float, bool or None
        The value as entered (see the module notes for what each kind accepts).
    unit : str or None
        The unit the number was entered in; ``None`` or ``""``: the canonical unit.
    decimal_comma : bool or None
        ``True`` when the user's locale writes decimals with a comma (stated
        explicitly; ``None`` reads a point).

    Returns
    -------
    CheckedValue
        The canonical value and every message.

    Raises
    ------
    TypeError
        For a Python type no form or file produces (a list, bytes, ...).
    """
    found: list[Message] = []
    if spec.kind == "number":
        return _check_number(spec, raw, unit, decimal_comma)
    if unit is not None and unit.strip():
        text = say.unit_not_applicable(spec.label, shown_text(unit), spec.kind)
        found.append(Message.of(spec.id, "unit_not_applicable", text))
    if spec.kind == "yes_no":
        value: Value = _read_yes_no(spec, raw, found, decimal_comma)
    else:
        value = _read_choice(spec, raw, found, decimal_comma)
    return _result(spec, value, None, found)


def is_missing(raw: object) -> bool:
    """True for ``None``, blank text and a float NaN."""
    if raw is None:
        return True
    if isinstance(raw, str):
        return not raw.strip()
    return isinstance(raw, float | np.floating) and math.isnan(raw)


def _result(spec: InputSpec, value: Value, unit: str | None, found: list[Message]) -> CheckedValue:
    blocked = any(m.blocking for m in found)
    return CheckedValue(spec.id, None if blocked else value, unit or None, tuple(found))


def _shown(raw: object, comma: bool | None) -> str:
    """An entered value as echoed in a message."""
    if isinstance(raw, _BOOL_TYPES):
        return "yes" if raw else "no"
    if isinstance(raw, _NUMBER_TYPES):
        return format_number(_as_float(raw), decimal_comma=comma)
    return f"'{shown_text(str(raw))}'"


def _as_float(raw: int | float | np.integer | np.floating) -> float:
    try:
        return float(raw)
    except OverflowError:
        return math.inf if raw > 0 else -math.inf


def _missing(spec: InputSpec, found: list[Message]) -> None:
    if spec.required:
        found.append(Message.of(spec.id, "missing", say.missing(spec.label)))


def _unsupported(spec: InputSpec, raw: object) -> TypeError:
    return TypeError(f"{spec.id}: cannot check a value of type {type(raw).__name__}")


def _check_number(
    spec: InputSpec, raw: object, unit: str | None, comma: bool | None
) -> CheckedValue:
    found: list[Message] = []
    conv = spec.unit_named(unit)
    if conv is None:
        accepted = [u.unit for u in spec.units if u.unit]
        text = say.unknown_unit(spec.label, shown_text(unit or ""), accepted)
        found.append(Message.of(spec.id, "unknown_unit", text))
    entered = _read_number(spec, raw, comma, found)
    if conv is None or entered is None or found:
        return _result(spec, None, conv.unit if conv else None, found)
    canonical = conv.to_canonical(entered)
    found.extend(_range_messages(spec, entered, canonical, conv, comma))
    return _result(spec, canonical, conv.unit, found)


def _read_number(
    spec: InputSpec, raw: object, comma: bool | None, found: list[Message]
) -> float | None:
    if is_missing(raw):
        _missing(spec, found)
        return None
    if isinstance(raw, _BOOL_TYPES):
        text = say.number_expected(spec.label, _shown(raw, comma))
        found.append(Message.of(spec.id, "number_expected", text))
        return None
    if isinstance(raw, str):
        try:
            return parse_number(raw, decimal_comma=comma)
        except NumberTextError as exc:
            text = say.not_a_number(spec.label, str(exc))
            found.append(Message.of(spec.id, "not_a_number", text))
            return None
    if not isinstance(raw, _NUMBER_TYPES):
        raise _unsupported(spec, raw)
    value = _as_float(raw)
    if not math.isfinite(value):
        reason = f"{_shown(raw, comma)} is not a usable number; enter a measured value"
        found.append(Message.of(spec.id, "not_a_number", say.not_a_number(spec.label, reason)))
        return None
    return value


def _range_messages(
    spec: InputSpec, entered: float, canonical: float, conv: AltUnit, comma: bool | None
) -> list[Message]:
    shown = format_number(entered, decimal_comma=comma)
    unit = conv.unit or None
    limits, developed = spec.limits, spec.developed
    if limits is not None and not limits.contains(canonical):
        direction = "below" if canonical < limits.low else "above"
        shown_limits = _range_in(limits, conv, comma)
        ideas = _other_units(spec, entered, conv, comma)
        if ideas:
            text = say.check_unit(
                spec.label, shown, unit, direction=direction, limits=shown_limits, ideas=ideas
            )
            return [Message.of(spec.id, "check_unit", text)]
        text = say.outside_limits(
            spec.label, shown, unit, direction=direction, limits=shown_limits
        )
        return [Message.of(spec.id, f"{direction}_limits", text)]
    if developed is not None and not developed.contains(canonical):
        shown_range = _range_in(developed, conv, comma)
        text = say.extrapolation(spec.label, shown, unit, developed=shown_range)
        return [Message.of(spec.id, "extrapolation", text)]
    return []


@lru_cache(maxsize=256)
def _range_in(rng: Range, conv: AltUnit, comma: bool | None) -> tuple[str, str]:
    """A canonical range written in the chosen unit.

    In the canonical unit the bounds are written exactly. In another unit they
    are rounded inward to 4 significant digits, so every value shown as inside
    the range is accepted and every value refused lies outside the range shown.
    """
    if conv.is_identity:
        return (
            format_number(rng.low, decimal_comma=comma),
            format_number(rng.high, decimal_comma=comma),
        )
    low, high = sorted((conv.from_canonical(rng.low), conv.from_canonical(rng.high)))
    return (
        format_significant(low, rounding="up", decimal_comma=comma),
        format_significant(high, rounding="down", decimal_comma=comma),
    )


def _other_units(
    spec: InputSpec, entered: float, conv: AltUnit, comma: bool | None
) -> list[tuple[str, str]]:
    """The other units in which ``entered`` would lie within the hard limits."""
    assert spec.limits is not None
    ideas = []
    for k, other in enumerate(spec.units):
        canonical = other.to_canonical(entered)
        if other == conv or not spec.limits.contains(canonical):
            continue
        reading = say.with_unit(format_number(entered, decimal_comma=comma), other.unit)
        if k > 0:
            reading += f" ({say.with_unit(_canonical_text(spec, canonical, comma), spec.unit)})"
        ideas.append((reading, other.unit))
    return ideas


def _canonical_text(spec: InputSpec, value: float, comma: bool | None) -> str:
    if spec.decimals is not None:
        return format_number(value, decimals=spec.decimals, decimal_comma=comma)
    return format_significant(value, decimal_comma=comma)


def _read_yes_no(
    spec: InputSpec, raw: object, found: list[Message], comma: bool | None
) -> bool | None:
    if is_missing(raw):
        _missing(spec, found)
        return None
    if isinstance(raw, _BOOL_TYPES):
        return bool(raw)
    if isinstance(raw, str):
        word = raw.strip().lower()
        if word in _YES or word in _NO:
            return word in _YES
    elif isinstance(raw, _NUMBER_TYPES):
        if raw in (0, 1):
            return bool(raw == 1)
    else:
        raise _unsupported(spec, raw)
    found.append(Message.of(spec.id, "not_yes_no", say.not_yes_no(spec.label, _shown(raw, comma))))
    return None


def _read_choice(
    spec: InputSpec, raw: object, found: list[Message], comma: bool | None
) -> str | None:
    if is_missing(raw):
        _missing(spec, found)
        return None
    if isinstance(raw, str):
        choice = spec.choice(raw.strip())
        if choice is not None:
            return choice.value
    elif not isinstance(raw, _NUMBER_TYPES + _BOOL_TYPES):
        raise _unsupported(spec, raw)
    pairs = [(c.value, c.label) for c in spec.choices]
    text = say.not_a_choice(spec.label, _shown(raw, comma), pairs)
    found.append(Message.of(spec.id, "not_a_choice", text))
    return None
