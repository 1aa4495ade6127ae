"""Semantic checks of the ``model`` section; builds a :class:`ModelSpec` (private).

Every check records a ``"json.path: message"`` problem and carries on, so one
load reports everything. The structure (types, required fields, no unknown
fields) was checked by the JSON Schema first; the few type checks here only
keep this module safe when called on unchecked data.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from ._model_checks import (
    check_covariance,
    check_term_against_input,
    count_message,
    parse_recalibration,
    parse_survival,
)
from ._model_values import fmt, number, numbers, strictly_increasing, string
from .model import (
    FAMILIES,
    Hinges,
    Indicator,
    InputInfo,
    Levels,
    Linear,
    Log,
    ModelSpec,
    Power,
    Product,
    Rcs,
    Sqrt,
    TermSpec,
    Transform,
    Truncate,
)
from .problems import Problems, join

__all__ = ["parse_model"]

KINDS = ("number", "yes_no", "choice")
TRANSFORM_TYPES = (
    "linear",
    "log",
    "sqrt",
    "power",
    "rcs",
    "hinges",
    "indicator",
    "levels",
    "product",
)


def parse_model(
    raw: Mapping[str, Any],
    path: str,
    problems: Problems,
    input_kinds: Mapping[str, InputInfo | str | tuple[str, Sequence[str]]],
) -> ModelSpec | None:
    """Build a :class:`ModelSpec` or return None, recording every problem (see ModelSpec)."""
    infos = normalise_inputs(input_kinds)
    before = len(problems.items)
    family = raw.get("family")
    if family not in FAMILIES:
        problems.add(
            join(path, "family"), f"must be 'logistic' or 'survival_at_horizon' (got {family!r})"
        )
    intercept = _intercept(raw, path, problems, family)
    terms = _terms(raw.get("terms"), join(path, "terms"), problems, infos)
    n_columns = _n_columns(terms)
    covariance = None
    if raw.get("covariance") is not None and n_columns is not None and family in FAMILIES:
        covariance = check_covariance(
            raw["covariance"], join(path, "covariance"), problems, n_columns, family == "logistic"
        )
    survival = parse_survival(raw, path, problems, family, n_columns)
    recal = parse_recalibration(raw.get("recalibration"), join(path, "recalibration"), problems)
    if len(problems.items) > before or n_columns is None or family not in FAMILIES:
        return None
    used = dict.fromkeys(t.input for t in terms if t is not None and t.input is not None)
    choices = tuple((i, infos[i].choices) for i in used if infos[i].kind == "choice")
    return ModelSpec(
        family=str(family),
        terms=tuple(t for t in terms if t is not None),
        intercept=intercept,
        covariance=covariance,
        survival=survival,
        recalibration=recal,
        input_choices=choices,
    )


def normalise_inputs(input_kinds: Mapping[str, Any]) -> dict[str, InputInfo]:
    """Turn each ``input_kinds`` value into an :class:`InputInfo` (ValueError if malformed)."""
    out = {}
    for key, value in input_kinds.items():
        if isinstance(value, InputInfo):
            info = value
        elif isinstance(value, str):
            info = InputInfo(value)
        elif isinstance(value, tuple) and len(value) == 2:
            info = InputInfo(value[0], tuple(value[1]))
        else:
            raise ValueError(
                f"input_kinds[{key!r}]: expected InputInfo, a kind or (kind, choices) "
                f"(got {value!r})"
            )
        if info.kind not in KINDS:
            raise ValueError(
                f"input_kinds[{key!r}]: kind must be one of {KINDS} (got {info.kind!r})"
            )
        if info.kind == "choice" and not info.choices:
            raise ValueError(f"input_kinds[{key!r}]: a choice input needs its choice values")
        out[key] = info
    return out


def _intercept(raw: Mapping[str, Any], path: str, problems: Problems, family: Any) -> float | None:
    where = join(path, "intercept")
    if "intercept" not in raw:
        if family == "logistic":
            problems.add(where, "required for family 'logistic'")
        return None
    if family == "survival_at_horizon":
        problems.add(
            where,
            "not allowed for family 'survival_at_horizon' (the baseline survival takes its place)",
        )
        return None
    return number(raw["intercept"], where, problems)


@dataclass(frozen=True)
class _Draft:
    """What could be read of one term; ``ok`` when it had no problem at all."""

    name: str | None
    transform: Transform | None
    coefficients: tuple[float, ...] | None
    input: str | None
    truncate: Truncate | None
    ok: bool

    def spec(self) -> TermSpec | None:
        if not self.ok or self.name is None or self.transform is None or self.coefficients is None:
            return None
        return TermSpec(self.name, self.transform, self.coefficients, self.input, self.truncate)


def _terms(
    raw: Any, path: str, problems: Problems, infos: Mapping[str, InputInfo]
) -> list[TermSpec | None]:
    if not isinstance(raw, list) or not raw:
        problems.add(path, f"at least one term is required (got {raw!r})")
        return []
    drafts = [_term(item, join(path, i), problems, infos) for i, item in enumerate(raw)]
    first: dict[str, int] = {}
    for i, draft in enumerate(drafts):
        if draft.name is None:
            continue
        if draft.name in first:
            problems.add(
                join(join(path, i), "name"),
                f"duplicate term name {draft.name!r} (also at {join(path, first[draft.name])})",
            )
        else:
            first[draft.name] = i
    for i, draft in enumerate(drafts):
        if isinstance(draft.transform, Product):
            _check_product(draft.transform, i, path, problems, drafts=drafts, first=first)
    _check_counts(drafts, path, problems)
    return [d.spec() for d in drafts]


def _term(raw: Any, path: str, problems: Problems, infos: Mapping[str, InputInfo]) -> _Draft:
    if not isinstance(raw, Mapping):
        problems.add(path, f"expected an object (got {raw!r})")
        return _Draft(None, None, None, None, None, ok=False)
    before = len(problems.items)
    name = string(raw.get("name"), join(path, "name"), problems)
    transform = _transform(raw.get("transform"), join(path, "transform"), problems)
    truncate = _truncate(raw.get("truncate"), join(path, "truncate"), problems)
    coefficients = numbers(raw.get("coefficients"), join(path, "coefficients"), problems)
    input_id = _term_input(raw, path, problems, transform)
    info = None if input_id is None else infos.get(input_id)
    if input_id is not None and info is None:
        problems.add(join(path, "input"), f"no input named {input_id!r}")
    if input_id is not None and info is not None and transform is not None:
        check_term_against_input(
            path, problems, input_id=input_id, info=info, transform=transform, truncate=truncate
        )
    ok = len(problems.items) == before
    return _Draft(name, transform, coefficients, input_id, truncate, ok)


def _term_input(
    raw: Mapping[str, Any], path: str, problems: Problems, transform: Transform | None
) -> str | None:
    if isinstance(transform, Product):
        if "input" in raw:
            problems.add(
                join(path, "input"),
                "not allowed for a product term (it reads the terms named in 'of')",
            )
        if "truncate" in raw:
            problems.add(join(path, "truncate"), "not allowed for a product term")
        return None
    if "input" not in raw:
        if transform is not None:
            problems.add(join(path, "input"), f"required for a {transform.type_name!r} term")
        return None
    return string(raw["input"], join(path, "input"), problems)


def _transform(raw: Any, path: str, problems: Problems) -> Transform | None:
    kind = raw.get("type") if isinstance(raw, Mapping) else None
    if kind not in TRANSFORM_TYPES:
        allowed = ", ".join(repr(t) for t in TRANSFORM_TYPES)
        problems.add(join(path, "type"), f"unknown transform {kind!r} (allowed: {allowed})")
        return None
    assert isinstance(raw, Mapping)
    if kind in ("linear", "sqrt"):
        return Linear() if kind == "linear" else Sqrt()
    before = len(problems.items)
    result = _TRANSFORM_PARSERS[kind](raw, path, problems)
    return result if len(problems.items) == before else None


def _parse_log(raw: Mapping[str, Any], path: str, problems: Problems) -> Transform | None:
    shift = number(raw.get("shift", 0), join(path, "shift"), problems)
    return None if shift is None else Log(shift)


def _parse_power(raw: Mapping[str, Any], path: str, problems: Problems) -> Transform | None:
    exponent = number(raw.get("exponent"), join(path, "exponent"), problems)
    if exponent == 0:
        problems.add(join(path, "exponent"), "must not be 0 (x ** 0 is a constant column)")
    return None if exponent is None else Power(exponent)


def _parse_knots(raw: Mapping[str, Any], path: str, problems: Problems) -> Transform | None:
    where = join(path, "knots")
    knots = numbers(raw.get("knots"), where, problems)
    if knots is None:
        return None
    if raw["type"] == "rcs" and not 3 <= len(knots) <= 10:
        problems.add(where, f"an rcs term needs 3 to 10 knots (got {len(knots)})")
    if raw["type"] == "hinges" and not knots:
        problems.add(where, "a hinges term needs at least 1 knot (got 0)")
    strictly_increasing(knots, where, problems)
    return Rcs(knots) if raw["type"] == "rcs" else Hinges(knots)


def _parse_indicator(raw: Mapping[str, Any], path: str, problems: Problems) -> Transform | None:
    if "level" not in raw:
        return Indicator()
    level = string(raw["level"], join(path, "level"), problems)
    return None if level is None else Indicator(level)


def _parse_levels(raw: Mapping[str, Any], path: str, problems: Problems) -> Transform | None:
    reference = string(raw.get("reference"), join(path, "reference"), problems)
    raw_levels = raw.get("levels")
    if not isinstance(raw_levels, list) or not raw_levels:
        problems.add(
            join(path, "levels"),
            f"at least one non-reference level is required (got {raw_levels!r})",
        )
        return None
    levels = []
    for i, item in enumerate(raw_levels):
        where = join(join(path, "levels"), i)
        value = string(item, where, problems)
        if value is not None and value == reference:
            problems.add(where, f"{value!r} is the reference level")
        elif value is not None and value in levels:
            problems.add(where, f"duplicate level {value!r}")
        levels.append(value)
    if reference is None or any(v is None for v in levels):
        return None
    return Levels(reference, tuple(str(v) for v in levels))


def _parse_product(raw: Mapping[str, Any], path: str, problems: Problems) -> Transform | None:
    of = raw.get("of")
    if not isinstance(of, list) or len(of) != 2:
        problems.add(join(path, "of"), f"expected two term names (got {of!r})")
        return None
    names = [string(v, join(join(path, "of"), i), problems) for i, v in enumerate(of)]
    if names[0] is None or names[1] is None:
        return None
    return Product((names[0], names[1]))


_TRANSFORM_PARSERS: dict[str, Callable[[Mapping[str, Any], str, Problems], Transform | None]] = {
    "log": _parse_log,
    "power": _parse_power,
    "rcs": _parse_knots,
    "hinges": _parse_knots,
    "indicator": _parse_indicator,
    "levels": _parse_levels,
    "product": _parse_product,
}


def _truncate(raw: Any, path: str, problems: Problems) -> Truncate | None:
    if raw is None:
        return None
    if not isinstance(raw, Mapping) or not ({"low", "high"} & set(raw)):
        problems.add(path, f"expected an object with 'low' and/or 'high' (got {raw!r})")
        return None
    low = number(raw["low"], join(path, "low"), problems) if "low" in raw else None
    high = number(raw["high"], join(path, "high"), problems) if "high" in raw else None
    if low is not None and high is not None and low >= high:
        problems.add(path, f"low must be below high (got low {fmt(low)} >= high {fmt(high)})")
    return Truncate(low, high)


def _check_product(
    product: Product,
    index: int,
    terms_path: str,
    problems: Problems,
    *,
    drafts: Sequence[_Draft],
    first: Mapping[str, int],
) -> None:
    for k, name in enumerate(product.of):
        where = join(join(join(join(terms_path, index), "transform"), "of"), k)
        j = first.get(name)
        if j is None:
            problems.add(where, f"no term named {name!r}")
        elif j == index:
            problems.add(
                where, f"a product cannot use itself ({name!r}); it may only use earlier terms"
            )
        elif j > index:
            later = join(terms_path, j)
            problems.add(
                where,
                f"term {name!r} is defined later ({later}); a product may only use earlier terms",
            )
        elif isinstance(drafts[j].transform, Product):
            problems.add(
                where,
                f"term {name!r} is itself a product; "
                "a product may only combine terms that read an input",
            )


def _check_counts(drafts: Sequence[_Draft], path: str, problems: Problems) -> None:
    """Compare each term's coefficient count with its column count, where both are known."""
    counts: dict[str, int | None] = {}
    for i, draft in enumerate(drafts):
        t = draft.transform
        expected: int | None = None
        if isinstance(t, Product):
            a, b = counts.get(t.of[0]), counts.get(t.of[1])
            expected = None if a is None or b is None else a * b
        elif t is not None:
            expected = t.n_columns()
        if draft.name is not None:
            counts.setdefault(draft.name, expected)
        got = None if draft.coefficients is None else len(draft.coefficients)
        if t is not None and expected is not None and got is not None and expected != got:
            message = count_message(t, expected, got, counts)
            problems.add(join(join(path, i), "coefficients"), message)


def _n_columns(terms: Sequence[TermSpec | None]) -> int | None:
    """Total number of columns, or None if any term is broken."""
    if not terms or any(t is None for t in terms):
        return None
    return sum(len(t.coefficients) for t in terms if t is not None)
