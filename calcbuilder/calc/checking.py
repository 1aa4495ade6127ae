"""Input checking shared by the clinic form (one patient) and batch scoring (columns).

* :func:`check_value` checks one value (rules in :mod:`calcbuilder.calc.valuecheck`);
* :func:`check_patient` checks every input of one patient at once;
* :func:`check_columns` checks whole columns for batch scoring, vectorised, with
  exactly the results :func:`check_value` gives row by row;
* :func:`parse_column_header` reads batch headers ``id`` or ``id[unit]``.

Only the standard library, numpy and our own modules are imported (start-up path).
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from ..errors import InputValueError
from . import messages as say
from ._columns import ColumnCheck, check_columns
from .inputs import InputSpec
from .messages import Message
from .numbers import shown_text
from .valuecheck import CheckedValue, Value, check_value

__all__ = [
    "CheckedValue",
    "ColumnCheck",
    "Message",
    "PatientCheck",
    "Value",
    "check_columns",
    "check_patient",
    "check_value",
    "parse_column_header",
]

_HEADER = re.compile(r"\s*([^\[\]]*?)\s*(?:\[([^\[\]]*)\])?\s*")


@dataclass(frozen=True)
class PatientCheck:
    """Every input of one patient, checked.

    Attributes
    ----------
    checked : dict of str to CheckedValue
        One result per input, in the calculator's order.
    unknown : tuple of Message
        Values or units given under names that are not inputs (errors).
    """

    checked: dict[str, CheckedValue]
    unknown: tuple[Message, ...] = ()

    @property
    def values(self) -> dict[str, Value]:
        """Canonical values by input id (``None`` where missing or refused)."""
        return {key: result.value for key, result in self.checked.items()}

    @property
    def messages(self) -> dict[str, tuple[Message, ...]]:
        """Messages by input id (every input present; unknown names added at the end)."""
        out = {key: result.messages for key, result in self.checked.items()}
        for message in self.unknown:
            out[message.input_id] = (*out.get(message.input_id, ()), message)
        return out

    @property
    def all_messages(self) -> tuple[Message, ...]:
        """Every message, in the calculator's input order, unknown names last."""
        return tuple(m for ms in self.messages.values() for m in ms)

    @property
    def ok(self) -> bool:
        """True when no message blocks the risk (the risk may be computed)."""
        return not self.unknown and all(result.ok for result in self.checked.values())

    @property
    def extrapolated(self) -> tuple[str, ...]:
        """Ids of the inputs outside the range the model was developed on."""
        return tuple(key for key, result in self.checked.items() if result.extrapolated)


def check_patient(
    specs: Sequence[InputSpec],
    raw_values: Mapping[str, object],
    *,
    units: Mapping[str, str | None] | None = None,
    decimal_comma: bool | None = None,
) -> PatientCheck:
    """Check every input of one patient; all messages at once.

    Parameters
    ----------
    specs : sequence of InputSpec
        The calculator's inputs.
    raw_values : mapping of str to value
        Entered values by input id; an absent id counts as missing.
    units : mapping of str to str, optional
        The unit chosen for a number input, by id (absent: the canonical unit).
    decimal_comma : bool or None
        ``True`` when numbers are typed with a decimal comma.

    Returns
    -------
    PatientCheck
        ``values`` ready for scoring when ``ok``.
    """
    units = units or {}
    ids = [spec.id for spec in specs]
    strangers = dict.fromkeys(key for key in (*raw_values, *units) if key not in ids)
    unknown = tuple(
        Message.of(key, "unknown_input", say.unknown_input(shown_text(str(key)), ids))
        for key in strangers
    )
    checked = {
        spec.id: check_value(
            spec, raw_values.get(spec.id), unit=units.get(spec.id), decimal_comma=decimal_comma
        )
        for spec in specs
    }
    return PatientCheck(checked, unknown)


def parse_column_header(header: str) -> tuple[str, str | None]:
    """Split a batch column header ``"creatinine[mg/dL]"`` into ``("creatinine", "mg/dL")``.

    A header without brackets gives ``(header, None)`` (the canonical unit).
    Surrounding space is ignored. Headers that are not inputs pass through; the
    caller decides which columns are inputs.

    Raises
    ------
    InputValueError
        For unbalanced or nested brackets, text after ``]``, empty brackets or
        an empty name.
    """
    match = _HEADER.fullmatch(header)
    shown = shown_text(header)
    if match is None or not match.group(1):
        raise InputValueError(
            f"column header '{shown}' is not of the form id or id[unit], "
            "e.g. creatinine or creatinine[mg/dL]"
        )
    unit = match.group(2)
    if unit is not None and not unit.strip():
        raise InputValueError(
            f"column header '{shown}' has empty brackets; write the unit inside them, "
            "e.g. creatinine[mg/dL], or leave them out for the calculator's own unit"
        )
    return match.group(1), None if unit is None else unit.strip()
