"""Planned terms made concrete from the data: knots placed, reference levels chosen (private).

A resolved term holds a transform of the calculator file (:mod:`calcbuilder.calc.model`),
so the columns the model is fitted on are computed by the same code that scores
the published calculator (:mod:`calcbuilder.calc.transforms`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..calc.model import (
    Hinges,
    Indicator,
    Levels,
    Linear,
    Log,
    Power,
    Product,
    Rcs,
    Sqrt,
    TermSpec,
    Transform,
    Truncate,
)
from ..calc.numbers import format_number
from ..calc.transforms import ChoiceCodes, product_columns, term_columns
from ..stats import StatsInputError, rcs_knots
from ._recipe_transform import PlannedTerm

__all__ = ["ResolvedTerm", "design_matrix", "resolve_terms"]


@dataclass(frozen=True)
class ResolvedTerm:
    """A model term with every setting known: ready to fit and to write.

    Attributes
    ----------
    name : str
        Term name.
    input : str or None
        Input id read (None for a product).
    transform : Transform
        The calculator file's transform (``Rcs`` with its knots, ``Levels`` with
        reference and levels, ...).
    n_columns : int
        Number of design columns (coefficients) the term makes.
    truncate : Truncate or None
        Clipping before the transform.
    """

    name: str
    input: str | None
    transform: Transform
    n_columns: int
    truncate: Truncate | None = None

    def spec(self, coefficients: Sequence[float] | None = None) -> TermSpec:
        """The calculator term with these coefficients (zeros when None)."""
        coefs = tuple(float(c) for c in coefficients) if coefficients is not None else \
            (0.0,) * self.n_columns
        if len(coefs) != self.n_columns:
            raise ValueError(f"term {self.name!r} has {self.n_columns} columns; got "
                             f"{len(coefs)} coefficients")
        return TermSpec(self.name, self.transform, coefs, self.input, self.truncate)

    def to_dict(self, coefficients: Sequence[float]) -> dict[str, Any]:
        """The term in the calculator file's form (FORMAT.md "terms")."""
        return self.spec(coefficients).to_dict()

    def column_names(self, names: Mapping[str, list[str]] | None = None) -> list[str]:
        """Readable names of the term's columns (``age``, ``age'``, ``asa[III]``, ...).

        ``names`` maps earlier term names to their column names (needed by products).
        """
        t, base = self.transform, self.name
        if isinstance(t, Rcs):
            return [base] + [base + "'" * k for k in range(1, len(t.knots) - 1)]
        if isinstance(t, Hinges):
            return [base] + [f"({base} - {format_number(k)})+" for k in t.knots]
        if isinstance(t, Levels):
            return [f"{base}[{level}]" for level in t.levels]
        if isinstance(t, Indicator) and t.level is not None:
            return [f"{base}[{t.level}]"]
        if isinstance(t, Product):
            known = names or {}
            return [f"{a}*{b}" for a in known[t.of[0]] for b in known[t.of[1]]]
        return [base]


def _level_columns(settings: Mapping[str, Any], choices: Sequence[str],
                   codes: NDArray[np.int64]) -> Levels:
    reference = settings.get("reference")
    if reference is None:  # choices read from the data: the most frequent value
        counts = np.bincount(codes, minlength=len(choices))
        reference = choices[int(np.argmax(counts))]
    return Levels(str(reference), tuple(c for c in choices if c != reference))


def _number_transform(plan: PlannedTerm, x: NDArray[np.float64]) -> Transform:
    s = plan.settings
    if plan.type == "log":
        return Log(float(s.get("shift", 0.0)))
    if plan.type == "sqrt":
        return Sqrt()
    if plan.type == "power":
        return Power(float(s["exponent"]))
    if plan.type == "hinges":
        return Hinges(tuple(s["knots"]))
    if plan.type == "rcs":
        knots = s["knots"]
        if isinstance(knots, int):
            if plan.truncate is not None:
                x = np.clip(x, plan.truncate.low, plan.truncate.high)
            knots = tuple(float(k) for k in rcs_knots(x, knots))
        return Rcs(tuple(knots))
    return Linear()


def resolve_terms(
    plan: Sequence[PlannedTerm],
    values: Mapping[str, NDArray[Any]],
    choices: Mapping[str, Sequence[str]],
    problems: list[str],
) -> tuple[ResolvedTerm, ...] | None:
    """Make every planned term concrete from the rows used.

    Parameters
    ----------
    plan : sequence of PlannedTerm
        :attr:`Recipe.term_plan`.
    values : mapping
        Input id -> values of the rows used (floats; texts for choices).
    choices : mapping
        Choice input id -> its choice values (recipe or data), in order.
    problems : list of str
        Knots that cannot be placed are reported here.

    Returns
    -------
    tuple of ResolvedTerm, or None when a problem was found.
    """
    out: list[ResolvedTerm] = []
    counts: dict[str, int] = {}
    for term in plan:
        transform = _transform(term, values, choices, problems)
        if transform is None:
            continue
        if isinstance(transform, Product):
            n = counts[transform.of[0]] * counts[transform.of[1]]
        else:
            n = transform.n_columns()
        counts[term.name] = n
        out.append(ResolvedTerm(term.name, term.input, transform, n, term.truncate))
    return tuple(out) if len(out) == len(plan) else None


def _transform(term: PlannedTerm, values: Mapping[str, NDArray[Any]],
               choices: Mapping[str, Sequence[str]], problems: list[str]) -> Transform | None:
    if term.type == "product":
        a, b = term.settings["of"]
        return Product((a, b))
    assert term.input is not None
    x = values[term.input]
    if term.type in ("indicator", "levels") and not _named_choices_occur(term, choices, problems):
        return None
    if term.type == "indicator":
        return Indicator(term.settings.get("level"))
    if term.type == "levels":
        options = list(choices[term.input])
        codes = np.array([options.index(v) for v in x], dtype=np.int64)
        return _level_columns(term.settings, options, codes)
    try:
        return _number_transform(term, np.asarray(x, dtype=float))
    except StatsInputError as exc:
        problems.append(f"{term.path}.knots: cannot place {term.settings['knots']} knots from "
                        f"the data ({exc}); use fewer knots or list them explicitly")
        return None


def _named_choices_occur(term: PlannedTerm, choices: Mapping[str, Sequence[str]],
                        problems: list[str]) -> bool:
    """A level or reference named in the recipe must be a choice (read from the data or not)."""
    options = choices.get(str(term.input))
    if options is None:  # a yes/no indicator
        return True
    key = "level" if term.type == "indicator" else "reference"
    named = term.settings.get(key)
    if named is None or named in options:
        return True
    problems.append(f"{term.path}.{key}: '{named}' is not among the choices found in the data "
                    f"({', '.join(options)})")
    return False


def design_matrix(
    terms: Sequence[ResolvedTerm],
    values: Mapping[str, NDArray[Any]],
    choices: Mapping[str, Sequence[str]],
) -> tuple[NDArray[np.float64], list[str]]:
    """The design columns of every term (no intercept) and their names, in coefficient order."""
    blocks: dict[str, NDArray[np.float64]] = {}
    names: dict[str, list[str]] = {}
    for term in terms:
        t = term.transform
        if isinstance(t, Product):
            block = product_columns(blocks[t.of[0]], blocks[t.of[1]])
        else:
            assert term.input is not None
            value: Any = values[term.input]
            if term.input in choices:
                options = tuple(choices[term.input])
                value = ChoiceCodes(np.array([options.index(v) for v in value]), options)
            block = term_columns(term.spec(), value)
        blocks[term.name] = np.asarray(block, dtype=np.float64)
        names[term.name] = term.column_names(names)
    matrix = np.hstack([blocks[t.name] for t in terms]) if terms else np.empty((0, 0))
    return matrix, [n for t in terms for n in names[t.name]]
