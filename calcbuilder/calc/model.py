"""The ``model`` section of a calculator file as frozen dataclasses.

A model is a list of terms; each term turns one input (or, for a product, two
earlier terms) into one or more columns with a transform from a closed set, and
carries one coefficient per column (FORMAT.md, "model"). Nothing in the file is
ever executed: every transform is one of the dataclasses below and is
interpreted by :mod:`calcbuilder.calc.transforms`.

:meth:`ModelSpec.from_dict` performs the semantic checks (the JSON Schema in
``schema/model.defs.json`` has already checked the structure) and records every
problem with its JSON path; :meth:`ModelSpec.to_dict` writes the file form.

Decisions where FORMAT.md is silent (documented here and in the schema):

* ``levels`` must cover every choice of its input: each choice is either the
  reference or listed, so that no value is silently scored as the reference.
* ``product`` may only combine earlier terms that read an input (no products of
  products), so "half to each of its two inputs" is always defined.
* ``hinges`` knots must be strictly increasing; ``power`` exponent must not be 0.
* A recalibration slope must be positive, and exactly 1 for method ``intercept``;
  ``dataset`` (where it was estimated) is required, ``n`` and ``events`` optional.
* A survival model's ``linear_predictor`` is the centred ``(X - centre) beta``.
* When the inputs' hard limits are known, ``log``, ``sqrt`` and ``power`` terms
  must be defined over the whole allowed range (after truncation).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, Any, ClassVar

if TYPE_CHECKING:
    from .problems import Problems

__all__ = [
    "FAMILIES",
    "HORIZON_UNITS",
    "Hinges",
    "Indicator",
    "InputInfo",
    "Levels",
    "Linear",
    "Log",
    "ModelSpec",
    "Power",
    "Product",
    "Rcs",
    "Recalibration",
    "Sqrt",
    "SurvivalSpec",
    "TermSpec",
    "Transform",
    "Truncate",
]

FAMILIES = ("logistic", "survival_at_horizon")
HORIZON_UNITS = ("days", "weeks", "months", "years")


@dataclass(frozen=True)
class InputInfo:
    """What the model section needs to know about one input.

    ``input_kinds`` passed to :meth:`ModelSpec.from_dict` maps an input id to an
    ``InputInfo``, to a kind string (``"number"`` or ``"yes_no"``) or to a
    ``(kind, choice_values)`` tuple. ``limits`` (the hard limits, canonical unit)
    is optional; when given, transforms are checked over the whole allowed range.
    """

    kind: str
    choices: tuple[str, ...] = ()
    limits: tuple[float, float] | None = None


@dataclass(frozen=True)
class Linear:
    """``x``: one column."""

    type_name: ClassVar[str] = "linear"

    def n_columns(self) -> int:
        """Number of columns this transform makes."""
        return 1

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {"type": self.type_name}


@dataclass(frozen=True)
class Log:
    """``ln(x + shift)``: one column; ``x + shift`` must be > 0."""

    shift: float = 0.0
    type_name: ClassVar[str] = "log"

    def n_columns(self) -> int:
        """Number of columns this transform makes."""
        return 1

    def to_dict(self) -> dict[str, Any]:
        """File form (``shift`` always written)."""
        return {"type": self.type_name, "shift": self.shift}


@dataclass(frozen=True)
class Sqrt:
    """``sqrt(x)``: one column; ``x`` must be >= 0."""

    type_name: ClassVar[str] = "sqrt"

    def n_columns(self) -> int:
        """Number of columns this transform makes."""
        return 1

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {"type": self.type_name}


@dataclass(frozen=True)
class Power:
    """``x ** exponent``: one column."""

    exponent: float
    type_name: ClassVar[str] = "power"

    def n_columns(self) -> int:
        """Number of columns this transform makes."""
        return 1

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {"type": self.type_name, "exponent": self.exponent}


@dataclass(frozen=True)
class Rcs:
    """Harrell's restricted cubic spline: ``x`` then ``k - 2`` non-linear columns."""

    knots: tuple[float, ...]
    type_name: ClassVar[str] = "rcs"

    def n_columns(self) -> int:
        """Number of columns this transform makes (``k - 1``)."""
        return len(self.knots) - 1

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {"type": self.type_name, "knots": list(self.knots)}


@dataclass(frozen=True)
class Hinges:
    """Linear spline: ``x, (x - k1)+, (x - k2)+, ...``."""

    knots: tuple[float, ...]
    type_name: ClassVar[str] = "hinges"

    def n_columns(self) -> int:
        """Number of columns this transform makes (``1 + k``)."""
        return 1 + len(self.knots)

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {"type": self.type_name, "knots": list(self.knots)}


@dataclass(frozen=True)
class Indicator:
    """1 if yes (yes_no input, ``level`` None) or if the choice equals ``level``."""

    level: str | None = None
    type_name: ClassVar[str] = "indicator"

    def n_columns(self) -> int:
        """Number of columns this transform makes."""
        return 1

    def to_dict(self) -> dict[str, Any]:
        """File form (``level`` only for a choice input)."""
        out: dict[str, Any] = {"type": self.type_name}
        if self.level is not None:
            out["level"] = self.level
        return out


@dataclass(frozen=True)
class Levels:
    """One 0/1 column per non-reference choice, in the order of ``levels``."""

    reference: str
    levels: tuple[str, ...]
    type_name: ClassVar[str] = "levels"

    def n_columns(self) -> int:
        """Number of columns this transform makes."""
        return len(self.levels)

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {"type": self.type_name, "reference": self.reference, "levels": list(self.levels)}


@dataclass(frozen=True)
class Product:
    """Every product of the columns of two earlier terms, row-major."""

    of: tuple[str, str]
    type_name: ClassVar[str] = "product"

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {"type": self.type_name, "of": list(self.of)}


Transform = Linear | Log | Sqrt | Power | Rcs | Hinges | Indicator | Levels | Product


@dataclass(frozen=True)
class Truncate:
    """Clip the input to ``[low, high]`` before transforming (either may be None)."""

    low: float | None = None
    high: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """File form (only the bounds that are set)."""
        return {k: v for k, v in (("low", self.low), ("high", self.high)) if v is not None}


@dataclass(frozen=True)
class TermSpec:
    """One term: a transform of one input (or a product of two terms) and its coefficients."""

    name: str
    transform: Transform
    coefficients: tuple[float, ...]
    input: str | None = None
    truncate: Truncate | None = None

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        out: dict[str, Any] = {"name": self.name}
        if self.input is not None:
            out["input"] = self.input
        out["transform"] = self.transform.to_dict()
        if self.truncate is not None:
            out["truncate"] = self.truncate.to_dict()
        out["coefficients"] = list(self.coefficients)
        return out


@dataclass(frozen=True)
class SurvivalSpec:
    """Baseline survival at the horizon, at the centring values (one per column)."""

    horizon: float
    horizon_unit: str
    baseline_survival: float
    centre: tuple[float, ...]

    def to_dict(self) -> dict[str, Any]:
        """File form."""
        return {
            "horizon": self.horizon,
            "horizon_unit": self.horizon_unit,
            "baseline_survival": self.baseline_survival,
            "centre": list(self.centre),
        }


@dataclass(frozen=True)
class Recalibration:
    """``eta' = intercept + slope * eta``, with where it was estimated (``dataset``, required
    in the file; ``n`` and ``events`` optional)."""

    method: str
    intercept: float
    slope: float = 1.0
    dataset: str | None = None
    n: int | None = None
    events: int | None = None

    def to_dict(self) -> dict[str, Any]:
        """File form (unset provenance fields omitted)."""
        out: dict[str, Any] = {
            "method": self.method,
            "intercept": self.intercept,
            "slope": self.slope,
        }
        for key in ("dataset", "n", "events"):
            value = getattr(self, key)
            if value is not None:
                out[key] = value
        return out


@dataclass(frozen=True)
class ModelSpec:
    """The whole ``model`` section.

    ``input_choices`` holds, for each choice input the model reads, its full
    list of choice values (from the inputs section, not written by
    :meth:`to_dict`); scoring uses it to refuse unknown values.
    """

    family: str
    terms: tuple[TermSpec, ...]
    intercept: float | None = None
    covariance: tuple[tuple[float, ...], ...] | None = None
    survival: SurvivalSpec | None = None
    recalibration: Recalibration | None = None
    input_choices: tuple[tuple[str, tuple[str, ...]], ...] = ()

    @cached_property
    def column_counts(self) -> tuple[int, ...]:
        """Number of columns of each term, in term order."""
        counts: dict[str, int] = {}
        for term in self.terms:
            t = term.transform
            counts[term.name] = (
                counts[t.of[0]] * counts[t.of[1]] if isinstance(t, Product) else t.n_columns()
            )
        return tuple(counts[term.name] for term in self.terms)

    @property
    def n_columns(self) -> int:
        """Total number of columns (coefficients), without the intercept."""
        return sum(self.column_counts)

    @cached_property
    def column_slices(self) -> tuple[slice, ...]:
        """The columns of each term in the design matrix, in term order."""
        out, start = [], 0
        for count in self.column_counts:
            out.append(slice(start, start + count))
            start += count
        return tuple(out)

    @cached_property
    def inputs_read(self) -> tuple[str, ...]:
        """Input ids read by the terms, in order of first use."""
        return tuple(dict.fromkeys(t.input for t in self.terms if t.input is not None))

    def to_dict(self) -> dict[str, Any]:
        """The file form of the section (JSON-ready plain types)."""
        out: dict[str, Any] = {"family": self.family}
        if self.intercept is not None:
            out["intercept"] = self.intercept
        out["terms"] = [t.to_dict() for t in self.terms]
        if self.covariance is not None:
            out["covariance"] = [list(row) for row in self.covariance]
        if self.survival is not None:
            out["survival"] = self.survival.to_dict()
        if self.recalibration is not None:
            out["recalibration"] = self.recalibration.to_dict()
        return out

    @classmethod
    def from_dict(
        cls,
        raw: Mapping[str, Any],
        path: str,
        problems: Problems,
        input_kinds: Mapping[str, InputInfo | str | tuple[str, Sequence[str]]],
    ) -> ModelSpec | None:
        """Build the section from its file form, recording every semantic problem.

        Parameters
        ----------
        raw : mapping
            The ``model`` object, already structurally valid against the schema.
        path : str
            Its JSON path (normally ``"model"``), prefixed to every problem.
        problems : Problems
            Collector; every problem found is added with its JSON path.
        input_kinds : mapping
            Input id -> :class:`InputInfo`, or ``"number"`` / ``"yes_no"``, or
            ``(kind, choice_values)``; a choice input needs its choice values.

        Returns
        -------
        ModelSpec or None
            None when this call recorded any problem.

        Raises
        ------
        ValueError
            If ``input_kinds`` itself is malformed (a programming error).
        """
        from ._model_parse import parse_model

        return parse_model(raw, path, problems, input_kinds)
