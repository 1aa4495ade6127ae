"""Check a data table against a recipe and prepare it for fitting.

:func:`prepare` reads the outcome as 0/1 and each input as the recipe says, and
reports every problem at once in one :class:`DataError` (missing columns, an
outcome without exactly two values, text in number columns, values outside the
hard limits with a unit hint, unknown yes/no or choice values, missing values,
predictors with one value, too few events). Rows in messages are numbered as in
the file: the header is row 1, so table row ``i`` (from 0) is row ``i + 2``.

Decisions (see also ``docs/recipe.md``):

* Missing values are refused, naming the columns, counts and rows, unless
  ``complete_case=True``, which leaves out every row with a missing value in a
  column the recipe reads and records how many and why. Completely empty rows
  are skipped and counted (``blank_rows``).
* Developed ranges: ``fit.developed_range = "observed"`` (default) takes the
  smallest and largest value of the rows used; ``"p01-p99"`` the 1st and 99th
  percentiles (numpy's default linear interpolation). A ``developed`` range in
  the recipe wins.
* Choices read from the data are sorted as text; a levels term with no
  reference named takes the most frequent choice as reference.
* Events per parameter counts the smaller outcome class.
* Sample size: Riley et al.'s criteria (:func:`calcbuilder.stats.sample_size_binary`)
  at the observed prevalence, with the recipe's anticipated R2_CS or, when it
  gives none, 15% of the largest possible R2_CS (Riley et al.'s conservative
  suggestion); a shortfall is a warning.
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from ..calc.numbers import format_number
from ._checks import collinearity_warnings, constant_checks, event_checks
from ._convert import Converted, listing, read_column, read_outcome
from ._datafit import SampleSizeCheck, consistency_check, sample_size_check
from ._terms import ResolvedTerm, design_matrix, resolve_terms
from .dataset import ROW_NOTE, empty_rows, file_row
from .errors import DataError
from .recipe import Recipe

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["DataSummary", "Prepared", "ResolvedTerm", "SampleSizeCheck", "prepare"]


@dataclass(frozen=True)
class DataSummary:
    """Counts of the data before fitting.

    Attributes
    ----------
    rows_read : int
        Data rows in the table (header not counted).
    blank_rows : int
        Completely empty rows, skipped.
    rows_used : int
        Rows the model is fitted on.
    events, non_events : int
        Outcome counts among the rows used.
    missing : dict
        Column -> number of missing values (non-blank rows, before leaving any out),
        for every column the recipe reads.
    rows_dropped : int
        Rows left out because of a missing value (complete-case only).
    dropped_for : tuple of str
        The columns whose missing values made rows be left out.
    complete_case : bool
        Whether rows with missing values were left out.
    """

    rows_read: int
    blank_rows: int
    rows_used: int
    events: int
    non_events: int
    missing: dict[str, int]
    rows_dropped: int = 0
    dropped_for: tuple[str, ...] = ()
    complete_case: bool = False

    @property
    def prevalence(self) -> float:
        """Events / rows used."""
        return self.events / self.rows_used


@dataclass(frozen=True, eq=False)
class Prepared:
    """Data ready for fitting, with everything the calculator file needs from the data.

    Attributes
    ----------
    recipe : Recipe
    y : ndarray (n,)
        Outcome, 1.0 = event.
    values : dict
        Input id -> values of the rows used (canonical floats; 0/1 for yes/no;
        text for choices).
    rows : ndarray (n,)
        File row numbers of the rows used (header = row 1).
    choices : dict
        Choice input id -> its choice values, in order.
    terms : tuple of ResolvedTerm
        The model terms with knots and levels fixed.
    inputs : list of dict
        The calculator file's ``inputs`` section.
    developed : dict
        Number input id -> (low, high) developed range.
    summary : DataSummary
    sample_size : SampleSizeCheck
    warnings : tuple of str
    """

    recipe: Recipe
    y: NDArray[np.float64]
    values: dict[str, NDArray[Any]]
    rows: NDArray[np.int64]
    choices: dict[str, tuple[str, ...]]
    terms: tuple[ResolvedTerm, ...]
    inputs: list[dict[str, Any]]
    developed: dict[str, tuple[float, float]]
    summary: DataSummary
    sample_size: SampleSizeCheck
    warnings: tuple[str, ...]

    @property
    def n_parameters(self) -> int:
        """Number of model coefficients besides the intercept."""
        return sum(t.n_columns for t in self.terms)

    @property
    def events_per_parameter(self) -> float:
        """Rows in the smaller outcome class per model parameter."""
        return self.sample_size.events_per_parameter

    def design_matrix(self) -> tuple[NDArray[np.float64], list[str]]:
        """The design columns (no intercept) and their names, in coefficient order."""
        return design_matrix(self.terms, self.values, self.choices)

    def model_terms(self, coefficients: Sequence[float]) -> list[dict[str, Any]]:
        """The calculator file's ``model.terms`` for coefficients in design-column order."""
        coefs = [float(c) for c in coefficients]
        if len(coefs) != self.n_parameters:
            raise ValueError(f"expected {self.n_parameters} coefficients; got {len(coefs)}")
        out, start = [], 0
        for term in self.terms:
            out.append(term.to_dict(coefs[start:start + term.n_columns]))
            start += term.n_columns
        return out


def prepare(df: pd.DataFrame, recipe: Recipe, *, complete_case: bool = False) -> Prepared:
    """Check a data table against a recipe and prepare it for fitting.

    Parameters
    ----------
    df : pandas.DataFrame
        The data, e.g. from :func:`calcbuilder.evidence.dataset.read_table`.
    recipe : Recipe
        The checked recipe.
    complete_case : bool, optional
        Leave out rows with a missing value in any column the recipe reads
        (default: refuse missing values).

    Returns
    -------
    Prepared

    Raises
    ------
    DataError
        Listing every problem found.
    RecipeError
        When the term plan cannot be written as a valid calculator model (a
        defect of calcbuilder; should not happen).
    """
    df = df.set_axis([str(c) for c in df.columns], axis=1)
    _raise_if(_duplicate_columns(df, recipe))
    problems: list[str] = _missing_columns(df, recipe)
    blank = np.array(empty_rows(df), dtype=bool) if len(df.columns) else np.zeros(len(df), bool)
    outcome, columns = _convert(df, recipe, problems)
    missing = {name: conv.missing & ~blank for name, conv in columns.items()}
    if outcome is not None:
        missing[recipe.outcome.column] = outcome.missing & ~blank
    dropped = np.zeros(len(df), dtype=bool)
    for mask in missing.values():
        dropped |= mask
    if dropped.any() and not complete_case:
        problems.append(_missing_message(missing))
    _raise_if(problems)
    assert outcome is not None
    keep = ~blank & ~dropped
    if not keep.any():
        _raise_if([f"no rows left to fit: all {int((~blank).sum())} rows have a missing value"])
    values = {e.id: columns[e.column].values[keep] for e in recipe.inputs}
    y = outcome.values[keep]
    summary = DataSummary(
        rows_read=len(df), blank_rows=int(blank.sum()), rows_used=int(keep.sum()),
        events=int(y.sum()), non_events=int((1 - y).sum()),
        missing={k: int(v.sum()) for k, v in missing.items()},
        rows_dropped=int(dropped.sum()),
        dropped_for=tuple(k for k, v in missing.items() if v.any()),
        complete_case=complete_case,
    )
    rows = np.array([file_row(int(p)) for p in np.flatnonzero(keep)], dtype=np.int64)
    return _finish(recipe, y, values, rows, summary)


def _finish(recipe: Recipe, y: NDArray[np.float64], values: dict[str, NDArray[Any]],
            rows: NDArray[np.int64], summary: DataSummary) -> Prepared:
    """Choices, checks, terms and the sample-size numbers from the rows used."""
    choices = _choices(recipe, values)
    problems, warnings = constant_checks(recipe.inputs, values, choices)
    terms = resolve_terms(recipe.term_plan, values, choices, problems) if not problems else None
    n_parameters = sum(t.n_columns for t in terms) if terms else 0
    if terms:
        too_few, epp = event_checks(summary.events, summary.non_events, n_parameters)
        problems += too_few
        warnings += epp
    _raise_if(problems)
    assert terms is not None
    developed, notes = _developed(recipe, values)
    inputs = recipe.input_dicts(developed, {k: v for k, v in choices.items()
                                            if recipe.input(k).choices_from_data})
    consistency_check(inputs, terms)
    size = sample_size_check(summary.rows_used, summary.events, summary.non_events,
                             n_parameters, recipe.fit.anticipated_r2_cs)
    warnings = [*_dropped_notes(summary), *notes, *warnings,
                *collinearity_warnings(recipe.inputs, values), *_knot_notes(terms, values),
                *size.warnings]
    return Prepared(recipe, y, values, rows, choices, terms, inputs, developed, summary,
                    size.check, tuple(warnings))


def _raise_if(problems: list[str]) -> None:
    if problems:
        n = len(problems)
        raise DataError(f"the data cannot be used to fit the model: {n} problem"
                        f"{'s' if n != 1 else ''}", problems)


def _duplicate_columns(df: pd.DataFrame, recipe: Recipe) -> list[str]:
    have = list(df.columns)
    return [f"the data have more than one column named '{column}' ({path}); column names must "
            "be unique" for column, path in recipe.columns.items() if have.count(column) > 1]


def _missing_columns(df: pd.DataFrame, recipe: Recipe) -> list[str]:
    have = [str(c) for c in df.columns]
    out = []
    for column, path in recipe.columns.items():
        if column in have:
            continue
        close = difflib.get_close_matches(column, have, n=1, cutoff=0.6)
        hint = f" (did you mean '{close[0]}'?)" if close else ""
        out.append(f"the recipe names column '{column}' ({path}) but the data have no such "
                   f"column{hint}; the data columns are: {', '.join(have)}")
    return out


def _convert(df: pd.DataFrame, recipe: Recipe, problems: list[str]
             ) -> tuple[Converted | None, dict[str, Converted]]:
    have = {str(c) for c in df.columns}
    outcome = None
    if recipe.outcome.column in have:
        outcome = read_outcome(df[recipe.outcome.column], recipe.outcome)
        problems += outcome.problems
    columns = {}
    for entry in recipe.inputs:
        if entry.column in have:
            columns[entry.column] = read_column(df[entry.column], entry)
            problems += columns[entry.column].problems
    return outcome, columns


def _missing_message(missing: Mapping[str, NDArray[np.bool_]]) -> str:
    parts = []
    for name, mask in missing.items():
        if mask.any():
            pos = np.flatnonzero(mask).tolist()
            parts.append(f"'{name}' {len(pos)} ({listing(pos)})")
    n_rows = int(np.logical_or.reduce(list(missing.values())).sum())
    return (f"missing values in {len(parts)} column{'s' if len(parts) != 1 else ''} "
            f"({ROW_NOTE}): {'; '.join(parts)}; fill them in, or use the complete-case option "
            f"(calcbuilder fit --complete-case) to leave out the {n_rows} row"
            f"{'s' if n_rows != 1 else ''} with a missing value (the number left out is recorded)")


def _choices(recipe: Recipe, values: Mapping[str, NDArray[Any]]) -> dict[str, tuple[str, ...]]:
    out = {}
    for entry in recipe.inputs:
        if entry.kind != "choice":
            continue
        if entry.choices_from_data:
            out[entry.id] = tuple(sorted({str(v) for v in values[entry.id]}))
        else:
            out[entry.id] = tuple(c.value for c in entry.spec.choices)
    return out


def _developed(recipe: Recipe, values: Mapping[str, NDArray[Any]]
               ) -> tuple[dict[str, tuple[float, float]], list[str]]:
    out: dict[str, tuple[float, float]] = {}
    notes = []
    for entry in recipe.inputs:
        if entry.kind != "number":
            continue
        x = np.asarray(values[entry.id], dtype=float)
        low, high = float(x.min()), float(x.max())
        if recipe.fit.developed_range == "p01-p99":
            p01, p99 = (float(q) for q in np.quantile(x, [0.01, 0.99]))
            if p01 < p99:
                low, high = p01, p99
            else:
                notes.append(f"column '{entry.column}': the 1st and 99th percentiles are equal "
                             f"({format_number(p01)}); the observed range is used as the "
                             "developed range")
        out[entry.id] = (low, high)
    return out, notes


def _dropped_notes(summary: DataSummary) -> list[str]:
    notes = []
    if summary.blank_rows:
        notes.append(f"skipped {summary.blank_rows} completely empty row"
                     f"{'s' if summary.blank_rows != 1 else ''}")
    if summary.rows_dropped:
        counts = ", ".join(f"'{k}' {summary.missing[k]}" for k in summary.dropped_for)
        notes.append(f"complete-case: left out {summary.rows_dropped} of "
                     f"{summary.rows_read - summary.blank_rows} rows with a missing value "
                     f"({counts}); the estimates assume these rows differ from the others only "
                     "by chance")
    return notes


def _knot_notes(terms: Sequence[ResolvedTerm], values: Mapping[str, NDArray[Any]]) -> list[str]:
    notes = []
    for term in terms:
        knots = getattr(term.transform, "knots", None)
        if knots is None or term.input is None:
            continue
        x = np.asarray(values[term.input], dtype=float)
        outside = [k for k in knots if not x.min() <= k <= x.max()]
        if outside:
            notes.append(f"term '{term.name}': knot{'s' if len(outside) > 1 else ''} "
                         f"{', '.join(map(format_number, outside))} outside the observed range "
                         f"{format_number(x.min())} to {format_number(x.max())}")
    return notes
