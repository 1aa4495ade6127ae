"""What every importer shares (private): planned terms, model assembly, validation, writing.

An importer reads its source (coefficient table, PMML, fitted result) into an
intercept and a list of :class:`PlannedTerm` whose columns carry their
coefficient and, when the source has a covariance matrix, their position in
it. :func:`assemble_model` turns them into the ``model`` section of FORMAT.md
(product terms placed after every term they combine, covariance permuted to
the file's column order); :func:`validate` runs the whole document through
:meth:`Calculator.from_dict`, which re-scores the test vectors, so a mis-mapped
term is refused before anything is written.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ...errors import CalcbuilderError, CalcFileError
from ..document import Calculator, save_calculator
from ..problems import Problems

__all__ = [
    "NO_COVARIANCE_CAUTION",
    "Column",
    "ModelImportError",
    "PlannedTerm",
    "assemble_model",
    "raise_problems",
    "validate",
    "write_calculator",
]

NO_COVARIANCE_CAUTION = (
    "Risks from this calculator are shown without an uncertainty interval: the source it "
    "was imported from ({source}) does not give the covariance of the coefficients."
)


class ModelImportError(CalcbuilderError):
    """A model source or inputs description cannot be imported; nothing was written.

    ``problems`` lists every problem found, each naming the element, term or row.
    """

    def __init__(self, message: str, problems: Sequence[str] | None = None) -> None:
        self.problems = list(problems or [])
        self.heading = message
        if self.problems:
            message = message + "\n" + "\n".join(f"  - {p}" for p in self.problems)
        super().__init__(message)


def raise_problems(problems: Problems, heading: str) -> None:
    """Raise :class:`ModelImportError` listing ``problems`` under ``heading``, if any."""
    if problems.items:
        n = len(problems.items)
        raise ModelImportError(f"{heading}: {n} problem{'s' if n != 1 else ''}", problems.items)


@dataclass(frozen=True)
class Column:
    """One model column: its coefficient and its index in the source covariance (if any)."""

    coefficient: float
    source: int | None = None


@dataclass
class PlannedTerm:
    """A term of the model being built (FORMAT.md ``model.terms`` plus column origins)."""

    name: str
    input: str | None
    transform: dict[str, Any]
    columns: list[Column] = field(default_factory=list)
    truncate: dict[str, Any] | None = None

    @property
    def is_product(self) -> bool:
        """True for a product of two earlier terms."""
        return self.transform.get("type") == "product"

    def to_dict(self) -> dict[str, Any]:
        """The file form of the term."""
        out: dict[str, Any] = {"name": self.name}
        if self.input is not None:
            out["input"] = self.input
        out["transform"] = dict(self.transform)
        if self.truncate is not None:
            out["truncate"] = dict(self.truncate)
        out["coefficients"] = [c.coefficient for c in self.columns]
        return out


def _ordered(terms: Sequence[PlannedTerm]) -> list[PlannedTerm]:
    """Products after every other term (FORMAT.md: ``of`` names terms defined earlier)."""
    return [t for t in terms if not t.is_product] + [t for t in terms if t.is_product]


def assemble_model(
    intercept: Column,
    terms: Sequence[PlannedTerm],
    covariance: Sequence[Sequence[float]] | None = None,
) -> dict[str, Any]:
    """The ``model`` section (family ``logistic``) from an intercept and planned terms.

    Parameters
    ----------
    intercept : Column
        The intercept and its position in ``covariance``.
    terms : sequence of PlannedTerm
        In source order; products are moved after the other terms.
    covariance : square matrix, optional
        The source's covariance of all its coefficients; every column (and the
        intercept) must then carry its ``source`` index. Rows and columns are
        permuted into the file's order (intercept first, then term columns).

    Returns
    -------
    dict
        The section in file form.
    """
    ordered = _ordered(terms)
    model: dict[str, Any] = {
        "family": "logistic",
        "intercept": intercept.coefficient,
        "terms": [t.to_dict() for t in ordered],
    }
    if covariance is not None:
        index = [intercept.source] + [c.source for t in ordered for c in t.columns]
        if any(i is None for i in index):  # pragma: no cover - importers set every index
            raise ValueError("covariance given but a column has no source index")
        model["covariance"] = [[float(covariance[i][j]) for j in index] for i in index]  # type: ignore[index]
    return model


def validate(document: dict[str, Any], source: str) -> Calculator:
    """Check the whole document (schema, meaning, test vectors re-scored).

    Raises
    ------
    ModelImportError
        Listing every problem, under a heading naming ``source``.
    """
    try:
        return Calculator.from_dict(document)
    except CalcFileError as exc:
        heading = str(exc).split("\n", 1)[0]
        raise ModelImportError(
            f"{source}: the imported calculator is refused ({heading})", exc.problems
        ) from None


def write_calculator(calc: Calculator, output: str | Path) -> Path:
    """Write the calculator atomically (nothing is left behind on failure)."""
    save_calculator(calc, output)
    return Path(output)
