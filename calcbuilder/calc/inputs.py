"""The ``inputs`` section: the patient values a calculator asks for, and its semantic checks.

The raw section has passed the JSON Schema (``schema/inputs.defs.json``) before
:func:`parse_inputs` sees it; the few type checks here only keep this module safe
on unchecked data. Decisions recorded here (see also FORMAT.md):

* A ``number`` input must have hard ``limits``: they are how impossible values
  get refused at the bedside, so a number input without them is refused.
* ``developed`` (the development data range) is optional; without it the form
  cannot warn about extrapolation for that input.
* ``unit`` is optional (counts have none), but ``alt_units`` need a canonical ``unit``.
* Unit names are compared after Unicode NFKC normalisation, so the micro sign
  (U+00B5) and the Greek mu (U+03BC) name the same unit.
* Input labels must differ, because every user-facing message names an input by
  its label; choice values and choice labels must differ within an input.
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal, cast

from ._input_fields import (
    MAX_DECIMALS,
    check_unit_name,
    fmt,
    read_decimals,
    read_number,
    read_optional_text,
    read_text,
)
from .problems import Problems, join

__all__ = [
    "KINDS",
    "MAX_DECIMALS",
    "AltUnit",
    "Choice",
    "InputKind",
    "InputSpec",
    "Range",
    "normalise_unit",
    "parse_inputs",
]

InputKind = Literal["number", "yes_no", "choice"]
KINDS: tuple[str, ...] = ("number", "yes_no", "choice")
_ID = re.compile(r"[a-z][a-z0-9_]*")
_LABEL_REASON = "; messages name inputs by label, so labels must differ"
_NUMBER_ONLY = ("unit", "alt_units", "limits", "developed", "decimals")


def normalise_unit(name: str) -> str:
    """The form of a unit name used for comparisons (NFKC, surrounding space removed)."""
    return unicodedata.normalize("NFKC", name).strip()


@dataclass(frozen=True)
class Range:
    """A closed interval ``[low, high]`` in the canonical unit."""

    low: float
    high: float

    def contains(self, value: float) -> bool:
        """True when ``low <= value <= high``."""
        return self.low <= value <= self.high

    def to_dict(self) -> dict[str, float]:
        """The JSON form ``{"low": ..., "high": ...}``."""
        return {"low": self.low, "high": self.high}


@dataclass(frozen=True)
class AltUnit:
    """A unit a value may be entered in: ``canonical = entered * factor + offset``."""

    unit: str
    factor: float
    offset: float = 0.0

    @property
    def is_identity(self) -> bool:
        """True when the conversion changes nothing (the canonical unit itself)."""
        return self.factor == 1.0 and self.offset == 0.0

    def to_canonical(self, entered: float) -> float:
        """The value in the canonical unit."""
        return entered * self.factor + self.offset

    def from_canonical(self, canonical: float) -> float:
        """The value in this unit."""
        return (canonical - self.offset) / self.factor

    def to_dict(self) -> dict[str, Any]:
        """The JSON form ``{"unit", "factor", "offset"}``."""
        return {"unit": self.unit, "factor": self.factor, "offset": self.offset}


@dataclass(frozen=True)
class Choice:
    """One answer of a ``choice`` input: the stored ``value`` and the shown ``label``."""

    value: str
    label: str

    def to_dict(self) -> dict[str, str]:
        """The JSON form ``{"value", "label"}``."""
        return {"value": self.value, "label": self.label}


@dataclass(frozen=True)
class InputSpec:
    """One input of a calculator, as described in FORMAT.md (``inputs``).

    Build it with :func:`parse_inputs`, which checks the rules; constructing it
    directly checks nothing.
    """

    id: str
    label: str
    kind: InputKind
    unit: str | None = None
    alt_units: tuple[AltUnit, ...] = ()
    limits: Range | None = None
    developed: Range | None = None
    decimals: int | None = None
    required: bool = True
    group: str | None = None
    help: str | None = None
    choices: tuple[Choice, ...] = ()

    @property
    def units(self) -> tuple[AltUnit, ...]:
        """Every unit a number may be entered in, the canonical one first (``()`` otherwise)."""
        if self.kind != "number":
            return ()
        return (AltUnit(self.unit or "", 1.0, 0.0), *self.alt_units)

    def unit_named(self, name: str | None) -> AltUnit | None:
        """The unit called ``name`` (``None`` or ``""``: the canonical unit); None if unknown."""
        if self.kind != "number":
            return None
        wanted = normalise_unit(name or "")
        if not wanted:
            return self.units[0]
        for unit in self.units:
            if unit.unit and normalise_unit(unit.unit) == wanted:
                return unit
        return None

    def choice(self, value: str) -> Choice | None:
        """The choice whose value is exactly ``value``, or None."""
        return next((c for c in self.choices if c.value == value), None)

    def to_dict(self) -> dict[str, Any]:
        """The JSON form (defaults such as ``required: true`` and absent fields left out)."""
        out: dict[str, Any] = {"id": self.id, "label": self.label, "kind": self.kind}
        if self.unit is not None:
            out["unit"] = self.unit
        if self.alt_units:
            out["alt_units"] = [a.to_dict() for a in self.alt_units]
        for key in ("limits", "developed"):
            value = getattr(self, key)
            if value is not None:
                out[key] = value.to_dict()
        if self.decimals is not None:
            out["decimals"] = self.decimals
        if not self.required:
            out["required"] = False
        if self.group is not None:
            out["group"] = self.group
        if self.help is not None:
            out["help"] = self.help
        if self.choices:
            out["choices"] = [c.to_dict() for c in self.choices]
        return out


def parse_inputs(
    raw_list: Sequence[Mapping[str, Any]], path: str, problems: Problems
) -> tuple[InputSpec, ...] | None:
    """Check the meaning of the ``inputs`` section and build the input specifications.

    Parameters
    ----------
    raw_list : sequence of mappings
        The section as parsed from JSON (already checked against the schema).
    path : str
        JSON path of the section, normally ``"inputs"``.
    problems : Problems
        Every problem found is added here as ``"path: message"``.

    Returns
    -------
    tuple of InputSpec or None
        None when any problem was found in this section.
    """
    before = len(problems.items)
    if not isinstance(raw_list, Sequence) or isinstance(raw_list, str) or not raw_list:
        problems.add(path, "must list at least one input")
        return None
    specs: list[InputSpec] = []
    for i, raw in enumerate(raw_list):
        where = join(path, i)
        if not isinstance(raw, Mapping):
            problems.add(where, f"must be an object (got {type(raw).__name__})")
            continue
        spec = _parse_one(raw, where, problems)
        if spec is not None:
            specs.append(spec)
    _check_unique(raw_list, path, problems)
    return tuple(specs) if len(problems.items) == before else None


def _check_unique(raw_list: Sequence[Any], path: str, problems: Problems) -> None:
    """Ids must differ; labels too, because messages name inputs by their label."""
    for what in ("id", "label"):
        first: dict[str, int] = {}
        for i, raw in enumerate(raw_list):
            key = raw.get(what) if isinstance(raw, Mapping) else None
            if not isinstance(key, str):
                continue
            if key not in first:
                first[key] = i
                continue
            extra = _LABEL_REASON if what == "label" else ""
            problems.add(
                join(join(path, i), what),
                f"duplicate {what} {key!r} (first used at {join(path, first[key])}){extra}",
            )


def _parse_one(raw: Mapping[str, Any], where: str, problems: Problems) -> InputSpec | None:
    before = len(problems.items)
    input_id = read_text(raw.get("id"), join(where, "id"), problems)
    if input_id is not None and not _ID.fullmatch(input_id):
        problems.add(join(where, "id"), f"must match [a-z][a-z0-9_]* (got {input_id!r})")
    label = read_text(raw.get("label"), join(where, "label"), problems)
    kind = raw.get("kind")
    if kind not in KINDS:
        problems.add(join(where, "kind"), f"must be number, yes_no or choice (got {kind!r})")
        return None
    _fields_of_other_kinds(raw, str(kind), where, problems)
    spec = None
    if kind == "number":
        spec = _number_fields(raw, where, problems)
    choices = _choices(raw, where, problems) if kind == "choice" else ()
    required = raw.get("required", True)
    if not isinstance(required, bool):
        problems.add(join(where, "required"), f"must be true or false (got {required!r})")
    group = read_optional_text(raw, "group", where, problems)
    help_text = read_optional_text(raw, "help", where, problems)
    if len(problems.items) > before or input_id is None or label is None:
        return None
    return InputSpec(
        id=input_id,
        label=label,
        kind=cast(InputKind, kind),
        required=bool(required),
        group=group,
        help=help_text,
        choices=choices,
        **(spec or {}),
    )


def _fields_of_other_kinds(
    raw: Mapping[str, Any], kind: str, where: str, problems: Problems
) -> None:
    owners = dict.fromkeys(_NUMBER_ONLY, "number") | {"choices": "choice"}
    for key, owner in owners.items():
        if key in raw and kind != owner:
            problems.add(join(where, key), f"only {owner} inputs take {key} (this input is {kind})")


def _number_fields(raw: Mapping[str, Any], where: str, problems: Problems) -> dict[str, Any]:
    unit = read_optional_text(raw, "unit", where, problems)
    if unit is not None:
        check_unit_name(unit, join(where, "unit"), problems)
    alt_units = _alt_units(raw.get("alt_units"), unit, join(where, "alt_units"), problems)
    limits = _range(raw.get("limits"), join(where, "limits"), "limits", problems)
    if "limits" not in raw:
        problems.add(
            join(where, "limits"),
            "required for a number input; hard limits are how impossible values get refused",
        )
    developed = _range(raw.get("developed"), join(where, "developed"), "developed", problems)
    if limits is not None and developed is not None:
        _check_within(developed, limits, join(where, "developed"), problems)
    decimals = read_decimals(raw.get("decimals"), join(where, "decimals"), problems)
    return {
        "unit": unit,
        "alt_units": alt_units,
        "limits": limits,
        "developed": developed,
        "decimals": decimals,
    }


def _alt_units(raw: Any, unit: str | None, where: str, problems: Problems) -> tuple[AltUnit, ...]:
    if raw is None:
        return ()
    if not isinstance(raw, list):
        problems.add(where, f"must be a list (got {type(raw).__name__})")
        return ()
    if unit is None and raw:
        problems.add(where, "alternative units need a canonical unit (set unit)")
    seen: dict[str, int] = {}
    out = []
    for k, item in enumerate(raw):
        alt = _alt_unit(item, join(where, k), problems)
        if alt is not None:
            out.append(alt)
        name = item.get("unit") if isinstance(item, Mapping) else None
        if not isinstance(name, str):
            continue
        key, at = normalise_unit(name), join(join(where, k), "unit")
        if unit is not None and key == normalise_unit(unit):
            problems.add(at, f"must differ from the canonical unit {unit!r}")
        elif key in seen:
            problems.add(at, f"duplicate unit {name!r} (first at alt_units[{seen[key]}])")
        else:
            seen[key] = k
    return tuple(out)


def _alt_unit(item: Any, where: str, problems: Problems) -> AltUnit | None:
    if not isinstance(item, Mapping):
        problems.add(where, f"must be an object (got {type(item).__name__})")
        return None
    before = len(problems.items)
    name = read_text(item.get("unit"), join(where, "unit"), problems)
    if name is not None:
        check_unit_name(name, join(where, "unit"), problems)
    rule = "must be finite and non-zero"
    factor = read_number(item.get("factor"), join(where, "factor"), problems, rule)
    if factor == 0:
        problems.add(join(where, "factor"), "must be finite and non-zero (got 0)")
    offset = read_number(item.get("offset", 0.0), join(where, "offset"), problems)
    if len(problems.items) > before or name is None or factor is None or offset is None:
        return None
    return AltUnit(name, factor, offset)


def _range(raw: Any, where: str, name: str, problems: Problems) -> Range | None:
    if raw is None:
        return None
    if not isinstance(raw, Mapping):
        problems.add(where, f"must be an object with low and high (got {type(raw).__name__})")
        return None
    low = read_number(raw.get("low"), join(where, "low"), problems)
    high = read_number(raw.get("high"), join(where, "high"), problems)
    if low is None or high is None:
        return None
    if not low < high:
        sign = ">" if low > high else "="
        problems.add(
            join(where, "low"),
            f"must be below {name}.high (got {fmt(low)} {sign} {fmt(high)})",
        )
        return None
    return Range(low, high)


def _check_within(developed: Range, limits: Range, where: str, problems: Problems) -> None:
    if developed.low < limits.low:
        problems.add(
            join(where, "low"),
            f"must not be below limits.low (got {fmt(developed.low)} < {fmt(limits.low)})",
        )
    if developed.high > limits.high:
        problems.add(
            join(where, "high"),
            f"must not be above limits.high (got {fmt(developed.high)} > {fmt(limits.high)})",
        )


def _choices(raw: Mapping[str, Any], where: str, problems: Problems) -> tuple[Choice, ...]:
    items = raw.get("choices")
    where = join(where, "choices")
    if not isinstance(items, list) or len(items) < 2:
        got = len(items) if isinstance(items, list) else 0
        problems.add(where, f"a choice input needs at least two choices (got {got})")
        return ()
    out = []
    first: dict[tuple[str, str], int] = {}
    for k, item in enumerate(items):
        choice = _choice(item, join(where, k), problems)
        if choice is None:
            continue
        for field in ("value", "label"):
            key = (field, getattr(choice, field))
            if key in first:
                problems.add(
                    join(join(where, k), field),
                    f"duplicate choice {field} {key[1]!r} (first at choices[{first[key]}])",
                )
            else:
                first[key] = k
        out.append(choice)
    return tuple(out)


def _choice(item: Any, where: str, problems: Problems) -> Choice | None:
    if not isinstance(item, Mapping):
        problems.add(where, f"must be an object (got {type(item).__name__})")
        return None
    value = read_text(item.get("value"), join(where, "value"), problems)
    if value is not None and value != value.strip():
        problems.add(join(where, "value"), f"must not start or end with spaces (got {value!r})")
        value = None
    label = read_text(item.get("label"), join(where, "label"), problems)
    return None if value is None or label is None else Choice(value, label)
