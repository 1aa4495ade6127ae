"""The ``transform`` of a recipe input and the planned model term (private).

A transform is written as a type name (``transform = "linear"``) or a table
(``transform = { type = "rcs", knots = 4 }``). Which types fit which kind:

======== =====================================================
kind     transforms (first one is the default)
======== =====================================================
number   linear, log, sqrt, power, rcs, hinges
yes_no   indicator
choice   levels, indicator
======== =====================================================
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from ..calc.inputs import InputSpec
from ..calc.model import Truncate
from ..calc.problems import Problems
from ._recipe_read import at, check_keys, fmt, read_number, read_text, type_name

__all__ = [
    "DEFAULT_RCS_KNOTS",
    "KIND_TRANSFORMS",
    "PlannedTerm",
    "parse_transform",
    "parse_truncate",
]

KIND_TRANSFORMS: dict[str, tuple[str, ...]] = {
    "number": ("linear", "log", "sqrt", "power", "rcs", "hinges"),
    "yes_no": ("indicator",),
    "choice": ("levels", "indicator"),
}
SETTINGS: dict[str, tuple[str, ...]] = {
    "linear": (), "log": ("shift",), "sqrt": (), "power": ("exponent",),
    "rcs": ("knots",), "hinges": ("knots",), "indicator": ("level",), "levels": ("reference",),
}
DEFAULT_RCS_KNOTS = 4
RCS_COUNTS = (3, 7)  # default knot placement (Harrell's table) covers 3 to 7 knots
RCS_LIST = (3, 10)  # explicit knots: as many as the calculator file allows


@dataclass(frozen=True)
class PlannedTerm:
    """How one input (or a pair of inputs) enters the model, before the data are seen.

    Attributes
    ----------
    name : str
        Term name: the input id, or the interaction's name.
    input : str or None
        The input the term reads (None for a product).
    type : str
        Transform type (FORMAT.md "terms").
    settings : mapping
        The transform's settings with defaults filled in: ``shift``,
        ``exponent``, ``knots`` (a count to place from the data, or a tuple),
        ``level``, ``reference`` (None: chosen from the data), ``of``.
    truncate : Truncate or None
        Clip the input to these bounds before transforming.
    path : str
        Key path of the transform in the recipe, for messages.
    """

    name: str
    input: str | None
    type: str
    settings: Mapping[str, Any] = field(default_factory=dict)
    truncate: Truncate | None = None
    path: str = ""

    @property
    def knots_from_data(self) -> int | None:
        """For ``rcs`` with a knot count: the number of knots to place from the data."""
        knots = self.settings.get("knots")
        return knots if self.type == "rcs" and isinstance(knots, int) else None

    def transform_dict(self) -> dict[str, Any]:
        """The recipe form ``{"type": ..., <settings>}`` (unset settings left out)."""
        out: dict[str, Any] = {"type": self.type}
        for key, value in self.settings.items():
            if value is not None:
                out[key] = list(value) if isinstance(value, tuple) else value
        return out


def parse_truncate(raw: Any, path: str, problems: Problems) -> Truncate | None:
    """``truncate = { low = .., high = .. }`` (either may be left out, not both)."""
    if not isinstance(raw, Mapping):
        problems.add(path, f"must be a table with low and/or high (got {type_name(raw)})")
        return None
    check_keys(raw, ("low", "high"), path, problems)
    low = read_number(raw, "low", path, problems, required=False)
    high = read_number(raw, "high", path, problems, required=False)
    if "low" not in raw and "high" not in raw:
        problems.add(path, "give low, high or both")
        return None
    if low is not None and high is not None and not low < high:
        problems.add(at(path, "low"),
                     f"must be below truncate.high (got {fmt(low)} and {fmt(high)})")
        return None
    return Truncate(low, high)


def _type_name(raw: Any, kind: str, path: str, problems: Problems) -> str | None:
    """The type as written (the kind's default when the transform is left out)."""
    if raw is None:
        return KIND_TRANSFORMS[kind][0]
    if isinstance(raw, str):
        return raw
    if isinstance(raw, Mapping):
        return read_text(raw, "type", path, problems)
    problems.add(path, f"must be a transform name or a table with type (got {type_name(raw)})")
    return None


def _type_of(raw: Any, kind: str, path: str, problems: Problems) -> str | None:
    name = _type_name(raw, kind, path, problems)
    if name is None:
        return None
    if name == "product":
        problems.add(at(path, "type"), "products are written as [[interactions]] of = [a, b]")
        return None
    if name not in SETTINGS:
        problems.add(at(path, "type"), f"unknown transform '{name}'; use one of "
                     f"{', '.join(SETTINGS)}")
        return None
    if name not in KIND_TRANSFORMS[kind]:
        problems.add(at(path, "type"), f"transform '{name}' does not fit a {kind} input; a {kind} "
                     f"input takes {' or '.join(KIND_TRANSFORMS[kind])}")
        return None
    return name


def parse_transform(
    raw: Any,
    *,
    kind: str,
    input_id: str,
    spec: InputSpec | None,
    truncate: Truncate | None,
    entry_path: str,
    problems: Problems,
) -> PlannedTerm | None:
    """Check an input's ``transform`` against its kind, limits and choices.

    ``spec`` is None when the calculator fields of the entry were unusable; the
    checks that need the limits or choices are then left out.
    """
    path = at(entry_path, "transform")
    type_ = _type_of(raw, kind, path, problems)
    if type_ is None:
        return None
    table: Mapping[str, Any] = raw if isinstance(raw, Mapping) else {}
    check_keys(table, ("type", *SETTINGS[type_]), path, problems)
    before = len(problems.items)
    settings = _SETTINGS_READERS[type_](table, kind, spec, truncate, path, problems)
    if settings is None or len(problems.items) > before:
        return None
    return PlannedTerm(input_id, input_id, type_, settings, truncate, path)


def _allowed(spec: InputSpec | None, truncate: Truncate | None) -> tuple[float, float] | None:
    """Lowest and highest value reaching the transform (hard limits, then truncation)."""
    if spec is None or spec.limits is None:
        return None
    low, high = spec.limits.low, spec.limits.high
    if truncate is not None:
        low = low if truncate.low is None else max(low, truncate.low)
        high = high if truncate.high is None else min(high, truncate.high)
    return low, high


def _none(*_: Any) -> dict[str, Any]:
    return {}


def _log(t: Mapping[str, Any], _k: str, spec: InputSpec | None, tr: Truncate | None,
         path: str, problems: Problems) -> dict[str, Any] | None:
    shift = read_number(t, "shift", path, problems, required=False)
    shift = 0.0 if shift is None else shift
    allowed = _allowed(spec, tr)
    if allowed is not None and not allowed[0] + shift > 0:
        problems.add(path, f"log(x + shift) needs x + shift > 0 for every allowed value, but the "
                     f"lowest allowed value is {fmt(allowed[0])} and shift is {fmt(shift)}: set "
                     "shift, raise limits.low or truncate")
    return {"shift": shift}


def _sqrt(_t: Mapping[str, Any], _k: str, spec: InputSpec | None, tr: Truncate | None,
          path: str, problems: Problems) -> dict[str, Any] | None:
    allowed = _allowed(spec, tr)
    if allowed is not None and allowed[0] < 0:
        problems.add(path, f"sqrt(x) needs x >= 0 for every allowed value, but the lowest allowed "
                     f"value is {fmt(allowed[0])}: raise limits.low or truncate")
    return {}


def _power(t: Mapping[str, Any], _k: str, spec: InputSpec | None, tr: Truncate | None,
           path: str, problems: Problems) -> dict[str, Any] | None:
    exponent = read_number(t, "exponent", path, problems)
    if exponent is None:
        return None
    if exponent == 0:
        problems.add(at(path, "exponent"), "must not be 0 (x ** 0 is constant)")
        return None
    allowed = _allowed(spec, tr)
    if allowed is not None:
        low, high = allowed
        if not exponent.is_integer() and low < 0:
            problems.add(path, f"x ** {fmt(exponent)} needs x >= 0 (non-integer exponent), but "
                         f"the lowest allowed value is {fmt(low)}")
        elif exponent < 0 and low <= 0 <= high:
            problems.add(path, f"x ** {fmt(exponent)} is undefined at x = 0, which the hard limits "
                         "allow (a negative exponent needs 0 outside the limits)")
    return {"exponent": exponent}


def _knot_list(raw: Any, bounds: tuple[int, int], spec: InputSpec | None, path: str,
               problems: Problems) -> tuple[float, ...] | None:
    where = at(path, "knots")
    ok = isinstance(raw, list) and all(
        isinstance(k, int | float) and not isinstance(k, bool) and math.isfinite(k) for k in raw)
    if not ok or not bounds[0] <= len(raw) <= bounds[1]:
        problems.add(where, f"must be a list of {bounds[0]} to {bounds[1]} numbers (got {raw!r})")
        return None
    knots = tuple(float(k) for k in raw)
    if any(b <= a for a, b in itertools.pairwise(knots)):
        problems.add(where, f"must be strictly increasing (got {', '.join(map(fmt, knots))})")
        return None
    lim = spec.limits if spec is not None else None
    if lim is not None and not (lim.low < knots[0] and knots[-1] < lim.high):
        problems.add(where, f"must lie inside the hard limits {fmt(lim.low)} to {fmt(lim.high)} "
                     f"(got {', '.join(map(fmt, knots))})")
    return knots


def _rcs(t: Mapping[str, Any], _k: str, spec: InputSpec | None, _tr: Truncate | None,
         path: str, problems: Problems) -> dict[str, Any] | None:
    raw = t.get("knots", DEFAULT_RCS_KNOTS)
    if isinstance(raw, int) and not isinstance(raw, bool):
        if not RCS_COUNTS[0] <= raw <= RCS_COUNTS[1]:
            problems.add(at(path, "knots"), f"a knot count must be from {RCS_COUNTS[0]} to "
                         f"{RCS_COUNTS[1]} (got {raw}); for more knots list them explicitly")
            return None
        return {"knots": raw}
    knots = _knot_list(raw, RCS_LIST, spec, path, problems)
    return None if knots is None else {"knots": knots}


def _hinges(t: Mapping[str, Any], _k: str, spec: InputSpec | None, _tr: Truncate | None,
            path: str, problems: Problems) -> dict[str, Any] | None:
    if "knots" not in t:
        problems.add(at(path, "knots"), "required: the list of hinge points, e.g. knots = [75]")
        return None
    knots = _knot_list(t["knots"], (1, 20), spec, path, problems)
    return None if knots is None else {"knots": knots}


def _choice_named(t: Mapping[str, Any], key: str, spec: InputSpec | None, path: str,
                  problems: Problems, *, required: bool) -> str | None:
    value = read_text(t, key, path, problems, required=required)
    if value is None or spec is None or not spec.choices:
        return value
    values = [c.value for c in spec.choices]
    if value not in values:
        problems.add(at(path, key), f"'{value}' is not one of the choices "
                     f"({', '.join(values)})")
    return value


def _indicator(t: Mapping[str, Any], kind: str, spec: InputSpec | None, _tr: Truncate | None,
               path: str, problems: Problems) -> dict[str, Any] | None:
    if kind == "yes_no":
        if "level" in t:
            problems.add(at(path, "level"), "only for choice inputs (a yes_no indicator is 1 "
                         "for yes)")
        return {}
    return {"level": _choice_named(t, "level", spec, path, problems, required=True)}


def _levels(t: Mapping[str, Any], _k: str, spec: InputSpec | None, _tr: Truncate | None,
            path: str, problems: Problems) -> dict[str, Any] | None:
    reference = _choice_named(t, "reference", spec, path, problems, required=False)
    if reference is None and spec is not None and spec.choices:
        reference = spec.choices[0].value
    return {"reference": reference}


_SETTINGS_READERS: dict[str, Any] = {
    "linear": _none, "log": _log, "sqrt": _sqrt, "power": _power, "rcs": _rcs,
    "hinges": _hinges, "indicator": _indicator, "levels": _levels,
}
