"""The wording of every message about a patient value, in one place.

Each function returns one sentence (or two) that names the input by its label,
says what was entered and what to do. The wording is ours; tests pin each one
exactly (``tests/calc/test_checking.py``). Numbers arrive already formatted.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

__all__ = [
    "CODES",
    "Message",
    "Severity",
    "check_unit",
    "extrapolation",
    "missing",
    "not_a_choice",
    "not_a_number",
    "not_yes_no",
    "number_expected",
    "outside_limits",
    "unit_not_applicable",
    "unknown_input",
    "unknown_unit",
    "with_unit",
]

Severity = Literal["error", "warning"]

CODES: dict[str, Severity] = {
    "missing": "error",
    "not_a_number": "error",
    "number_expected": "error",
    "below_limits": "error",
    "above_limits": "error",
    "check_unit": "error",
    "unknown_unit": "error",
    "unit_not_applicable": "error",
    "not_yes_no": "error",
    "not_a_choice": "error",
    "unknown_input": "error",
    "extrapolation": "warning",
}
"""Every message code and its severity: ``error`` blocks the risk, ``warning`` travels with it."""


@dataclass(frozen=True)
class Message:
    """One message about one input.

    Attributes
    ----------
    input_id : str
        The input it is about (for ``unknown_input``: the key that was given).
    severity : {"error", "warning"}
        ``error`` blocks the risk; ``warning`` is shown and printed with it.
    code : str
        One of :data:`CODES`.
    text : str
        The sentence shown to the user.
    """

    input_id: str
    severity: Severity
    code: str
    text: str

    @classmethod
    def of(cls, input_id: str, code: str, text: str) -> Message:
        """A message whose severity follows from its code."""
        return cls(input_id, CODES[code], code, text)

    @property
    def blocking(self) -> bool:
        """True for errors: no risk may be computed while this message stands."""
        return self.severity == "error"

    def __str__(self) -> str:
        return self.text


def with_unit(number: str, unit: str | None) -> str:
    """``"106 µmol/L"``; the number alone when the input has no unit."""
    return f"{number} {unit}" if unit else number


def _span(low: str, high: str, unit: str | None) -> str:
    return f"{low} to {with_unit(high, unit)}"


def missing(label: str) -> str:
    """A required value was left empty."""
    return f"{label}: no value was entered; this input is required, so enter a value."


def not_a_number(label: str, reason: str) -> str:
    """Text that is not a number; ``reason`` is the :class:`~.numbers.NumberTextError` text."""
    return f"{label}: {reason}."


def number_expected(label: str, shown: str) -> str:
    """A yes/no answer was given where a number is needed."""
    return (
        f"{label}: a yes/no answer ({shown}) was given, but this input takes a number; "
        "enter a number."
    )


def outside_limits(
    label: str, shown: str, unit: str | None, *, direction: str, limits: tuple[str, str]
) -> str:
    """Outside the hard limits (``direction`` is ``"below"`` or ``"above"``)."""
    return (
        f"{label}: {with_unit(shown, unit)} is {direction} the possible range "
        f"({_span(*limits, unit)}); check the value and the unit."
    )


def check_unit(
    label: str,
    shown: str,
    unit: str | None,
    *,
    direction: str,
    limits: tuple[str, str],
    ideas: Sequence[tuple[str, str]],
) -> str:
    """Outside the hard limits in the chosen unit, but possible in another unit.

    ``ideas`` holds ``(reading, unit)`` pairs such as ``("1.2 mg/dL (106 µmol/L)", "mg/dL")``.
    """
    readings = " or ".join(reading for reading, _ in ideas)
    action = f"change the unit to {ideas[0][1]}" if len(ideas) == 1 else "change the unit"
    return (
        f"{label}: {with_unit(shown, unit)} is {direction} the possible range "
        f"({_span(*limits, unit)}); did you mean {readings}? If so, {action}."
    )


def extrapolation(
    label: str, shown: str, unit: str | None, *, developed: tuple[str, str]
) -> str:
    """Possible, but outside the range of the development data (a warning)."""
    return (
        f"{label}: {with_unit(shown, unit)} is outside the range the model was developed on "
        f"({_span(*developed, unit)}); the estimate is an extrapolation, so treat it with "
        "extra caution."
    )


def unknown_unit(label: str, unit: str, accepted: Sequence[str]) -> str:
    """A unit the input does not accept."""
    if not accepted:
        return (
            f"{label}: the unit '{unit}' is not accepted; this input has no unit, "
            "so leave the unit empty."
        )
    return f"{label}: the unit '{unit}' is not accepted here; use one of: {', '.join(accepted)}."


def unit_not_applicable(label: str, unit: str, kind: str) -> str:
    """A unit given for a yes/no or choice input."""
    what = "a yes/no answer" if kind == "yes_no" else "a choice"
    return (
        f"{label}: a unit ('{unit}') was given, but this input is {what} and takes no unit; "
        "leave the unit empty."
    )


def not_yes_no(label: str, shown: str) -> str:
    """An answer to a yes/no input that is not yes or no."""
    return f"{label}: {shown} is not a yes/no answer; enter yes or no."


def not_a_choice(label: str, shown: str, choices: Sequence[tuple[str, str]]) -> str:
    """A value that is none of the choice values (``choices``: ``(value, label)`` pairs)."""
    listed = ", ".join(value if value == text else f"{value} ({text})" for value, text in choices)
    return f"{label}: {shown} is not one of the choices; use one of: {listed}."


def unknown_input(key: str, ids: Sequence[str]) -> str:
    """A value or unit given under a name that is not an input of the calculator."""
    return f"'{key}' is not an input of this calculator; the inputs are: {', '.join(ids)}."
