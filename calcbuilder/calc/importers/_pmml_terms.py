"""From PMML model columns to calculator terms (private to the PMML importer).

Both supported PMML models reduce to columns, each a product of one or two
*atoms* with a coefficient: a numeric atom is a field raised to an exponent
(RegressionModel ``NumericPredictor``, GeneralRegressionModel covariate
``PPCell``), a category atom is 1 when a field equals a value
(``CategoricalPredictor``, factor ``PPCell``). This module groups them:

* numeric atoms of one field and exponent -> one term: ``linear``, ``power``
  (exponent other than 1), the field's own transform for a supported
  ``DerivedField`` (``log``, ``sqrt``), or ``indicator`` for a yes/no input
  (the PMML field then holds 1 for yes and 0 for no);
* category atoms of one field -> one ``levels`` term of a choice input, whose
  reference is the one choice without a coefficient (or, when every choice has
  one, the first choice whose coefficient is exactly 0);
* two-atom columns -> the ``product`` of the two terms above (which must exist
  as terms of their own), every combination of their columns present once.

Anything else is refused with the element named.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from ..inputs import InputSpec
from ..problems import Problems
from ._common import Column, PlannedTerm
from .inputs_toml import InputsDescription

__all__ = ["Atom", "FieldInfo", "SourceColumn", "build_terms"]


@dataclass(frozen=True)
class FieldInfo:
    """A PMML field: a DataField, or a supported DerivedField of one DataField."""

    name: str
    optype: str
    values: tuple[str, ...] = ()
    base: str = ""
    transform: Mapping[str, Any] | None = None

    @property
    def data_field(self) -> str:
        """The DataField the value is read from."""
        return self.base or self.name


@dataclass(frozen=True)
class Atom:
    """``field ** exponent`` (``value`` None) or ``field == value``."""

    field: str
    value: str | None = None
    exponent: float = 1.0

    def key(self) -> tuple[str, str]:
        """The term this atom belongs to."""
        if self.value is not None:
            return (self.field, "levels")
        return (self.field, f"{self.exponent!r}")


@dataclass(frozen=True)
class SourceColumn:
    """A model column of the PMML document: atoms, coefficient, covariance index, element."""

    atoms: tuple[Atom, ...]
    coefficient: float
    source: int | None
    where: str


@dataclass
class _Term:
    planned: PlannedTerm
    levels: list[str] = field(default_factory=list)  # levels terms only

    def index(self, atom: Atom) -> int | None:
        if atom.value is None:
            return 0
        return self.levels.index(atom.value) if atom.value in self.levels else None


def _fmt(value: float) -> str:
    return str(int(value)) if float(value).is_integer() else repr(value)


def _input(info: FieldInfo, desc: InputsDescription, where: str,
           problems: Problems) -> InputSpec | None:
    spec = desc.input_named(info.data_field)
    if spec is None:
        problems.add(where, f"field {info.data_field!r} is not an input of {desc.source}: add "
                     f"an [[inputs]] entry with id or column = {info.data_field!r}")
    return spec


def _numeric_term(atom: Atom, col: SourceColumn, info: FieldInfo, desc: InputsDescription,
                  problems: Problems) -> _Term | None:
    spec = _input(info, desc, col.where, problems)
    if spec is None:
        return None
    name = atom.field if atom.exponent == 1 else f"{atom.field}^{_fmt(atom.exponent)}"
    transform: Mapping[str, Any]
    if spec.kind == "choice":
        problems.add(col.where, f"input {spec.id!r} is a choice input; it can only enter "
                     "through categories (CategoricalPredictor or a factor)")
        return None
    if info.transform is not None:
        if atom.exponent != 1 or spec.kind != "number":
            problems.add(col.where, f"derived field {atom.field!r} must enter with exponent 1 "
                         "and read a number input")
            return None
        transform = info.transform
    elif spec.kind == "yes_no":
        if atom.exponent != 1:
            problems.add(col.where, f"yes/no input {spec.id!r} cannot enter with exponent "
                         f"{_fmt(atom.exponent)}")
            return None
        transform = {"type": "indicator"}
    else:
        transform = ({"type": "linear"} if atom.exponent == 1
                     else {"type": "power", "exponent": atom.exponent})
    return _Term(PlannedTerm(name, spec.id, dict(transform), [Column(col.coefficient,
                                                                     col.source)]))


def _levels_term(cols: Sequence[SourceColumn], info: FieldInfo, desc: InputsDescription,
                 problems: Problems) -> _Term | None:
    first = cols[0]
    spec = _input(info, desc, first.where, problems)
    if spec is None:
        return None
    if spec.kind != "choice" or info.transform is not None:
        problems.add(first.where, f"categories of field {info.name!r} need a choice input "
                     f"(input {spec.id!r} is {spec.kind}); code a yes/no input as a 0/1 "
                     "numeric field")
        return None
    choices = [c.value for c in spec.choices]
    by_value: dict[str, SourceColumn] = {}
    for col in cols:
        value = str(col.atoms[0].value)
        if value not in choices:
            problems.add(col.where, f"value {value!r} is not a choice of input {spec.id!r} "
                         f"(choices: {', '.join(choices)})")
        elif value in by_value:
            problems.add(col.where, f"a second coefficient for {info.name} = {value!r}")
        by_value.setdefault(value, col)
    unlisted = [c for c in choices if info.values and c not in info.values]
    if unlisted:
        problems.add(first.where, f"choices {', '.join(unlisted)} of input {spec.id!r} are not "
                     f"values of PMML field {info.name!r}")
    reference = _reference(spec, choices, by_value, first.where, problems)
    if reference is None or unlisted or len(by_value) < len(cols):
        return None
    levels = [c for c in choices if c != reference]
    columns = [Column(by_value[v].coefficient, by_value[v].source) for v in levels]
    transform = {"type": "levels", "reference": reference, "levels": levels}
    return _Term(PlannedTerm(info.name, spec.id, transform, columns), levels)


def _reference(spec: InputSpec, choices: list[str], by_value: Mapping[str, SourceColumn],
               where: str, problems: Problems) -> str | None:
    missing = [c for c in choices if c not in by_value]
    if len(missing) == 1:
        return missing[0]
    if missing:
        problems.add(where, f"choices {', '.join(missing)} of input {spec.id!r} have no "
                     "coefficient; exactly one (the reference level) may have none")
        return None
    zero = [c for c in choices if by_value[c].coefficient == 0 and by_value[c].source is None]
    if not zero:
        problems.add(where, f"every choice of input {spec.id!r} has a coefficient; one must "
                     "be the reference level: without a coefficient, or (in a model without "
                     "covariance) with a coefficient of exactly 0")
        return None
    return zero[0]


def _single_terms(cols: Sequence[SourceColumn], fields: Mapping[str, FieldInfo],
                  desc: InputsDescription, problems: Problems,
                  ) -> dict[tuple[str, str], _Term | None]:
    """Terms by atom key; None for a term that failed (its problem is recorded)."""
    groups: dict[tuple[str, str], list[SourceColumn]] = {}
    for col in cols:
        groups.setdefault(col.atoms[0].key(), []).append(col)
    terms: dict[tuple[str, str], _Term | None] = {}
    for key, group in groups.items():
        atom = group[0].atoms[0]
        info = fields[atom.field]
        if atom.value is not None:
            term = _levels_term(group, info, desc, problems)
        else:
            for extra in group[1:]:
                problems.add(extra.where, f"a second coefficient for {atom.field} "
                             f"(exponent {_fmt(atom.exponent)})")
            term = _numeric_term(atom, group[0], info, desc, problems)
        terms[key] = term
    return terms


def _product_terms(cols: Sequence[SourceColumn],
                   singles: Mapping[tuple[str, str], _Term | None],
                   problems: Problems) -> list[PlannedTerm]:
    pairs: dict[tuple[tuple[str, str], tuple[str, str]], dict[int, SourceColumn]] = {}
    for col in cols:
        a, b = col.atoms
        if (b.key(), a.key()) in pairs:
            a, b = b, a
        ta, tb = singles.get(a.key()), singles.get(b.key())
        if ta is None or tb is None:
            lone = a if ta is None else b
            if lone.key() in singles:
                continue  # that term failed; its problem is already recorded
            problems.add(col.where, f"the product needs {lone.field} as a term of its own "
                         "(a main effect; a coefficient of 0 is fine)")
            continue
        i, j = ta.index(a), tb.index(b)
        if i is None or j is None:
            ref = a if i is None else b
            problems.add(col.where, f"the product uses the reference level {ref.value!r} of "
                         f"{ref.field}, which has no column")
            continue
        slot = pairs.setdefault((a.key(), b.key()), {})
        position = i * len(tb.planned.columns) + j
        if position in slot:
            problems.add(col.where, f"a second coefficient for the same product (first: "
                         f"{slot[position].where})")
        slot[position] = col
    return [t for t in (_product(k, s, singles, problems) for k, s in pairs.items())
            if t is not None]


def _product(key: tuple[tuple[str, str], tuple[str, str]], slot: Mapping[int, SourceColumn],
             singles: Mapping[tuple[str, str], _Term | None],
             problems: Problems) -> PlannedTerm | None:
    a, b = singles[key[0]], singles[key[1]]
    assert a is not None  # only pairs of built terms get a slot
    assert b is not None
    ta, tb = a.planned, b.planned
    size = len(ta.columns) * len(tb.columns)
    missing = [p for p in range(size) if p not in slot]
    if missing:
        problems.add(next(iter(slot.values())).where, f"the product of {ta.name} and {tb.name} "
                     f"lacks {len(missing)} of its {size} combinations of columns; give each "
                     "one a coefficient (0 if it is not in the model)")
        return None
    columns = [Column(slot[p].coefficient, slot[p].source) for p in range(size)]
    return PlannedTerm(f"{ta.name}:{tb.name}", None,
                       {"type": "product", "of": [ta.name, tb.name]}, columns)


def build_terms(columns: Sequence[SourceColumn], fields: Mapping[str, FieldInfo],
                desc: InputsDescription, problems: Problems) -> list[PlannedTerm]:
    """Group PMML model columns into planned terms (module docstring); problems are recorded.

    Every atom's field must be in ``fields`` (the caller checks field references).
    """
    singles = [c for c in columns if len(c.atoms) == 1]
    pairs = [c for c in columns if len(c.atoms) == 2]
    for col in columns:
        if len(col.atoms) > 2:
            problems.add(col.where, f"a product of {len(col.atoms)} fields; calcbuilder "
                         "products combine two terms")
    terms = _single_terms(singles, fields, desc, problems)
    products = _product_terms(pairs, terms, problems)
    return [t.planned for t in terms.values() if t is not None] + products
