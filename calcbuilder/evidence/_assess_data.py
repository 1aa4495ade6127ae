"""Reading outcome, input and risk columns for ``calcbuilder assess`` (private to assess).

Inputs are checked by the calculator's own rules
(:func:`calcbuilder.calc.checking.check_columns`), exactly as the clinic form
checks one patient; the outcome is read as ``calcbuilder fit`` reads it
(:func:`calcbuilder.evidence._convert.read_outcome`). Completely empty rows are
skipped and counted. Rows with a refused value or a missing outcome stop the
run with their count and first rows, unless ``drop`` leaves them out.
"""

from __future__ import annotations

import difflib
import json
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from ..calc.checking import check_columns
from ._convert import read_outcome
from ._recipe_sections import Outcome
from ._tokens import token
from .dataset import ROW_NOTE, empty_rows, file_row
from .errors import DataError
from .recipe import Recipe

if TYPE_CHECKING:
    import pandas as pd

    from ..calc.document import Calculator

__all__ = [
    "DataRows",
    "outcome_for",
    "read_outcome_and_inputs",
    "read_predictions",
    "recipe_columns",
    "stored_recipe",
    "stored_settings",
]

SHOWN_ROWS = 5


@dataclass(frozen=True)
class DataRows:
    """Row counts of one assess run.

    Attributes
    ----------
    read : int
        Data rows in the file (header not counted).
    used : int
        Rows the evidence is computed on.
    dropped : int
        Rows left out for a refused value or a missing outcome.
    blank : int
        Completely empty rows, skipped.
    extrapolated : int
        Rows used with a value outside the calculator's developed range.
    """

    read: int
    used: int
    dropped: int
    blank: int = 0
    extrapolated: int = 0


def _column_problem(name: str, what: str, have: list[str], fix: str) -> str:
    close = difflib.get_close_matches(name, have, n=1, cutoff=0.6)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    return (f"the data have no column '{name}' for {what}{hint}; {fix}; the data columns are: "
            f"{', '.join(have)}")


def _outcome(table: pd.DataFrame, outcome: Outcome) -> tuple[NDArray[np.float64],
                                                              NDArray[np.bool_]]:
    have = [str(c) for c in table.columns]
    if outcome.column not in have:
        raise DataError(_column_problem(outcome.column, "the outcome", have,
                                        "name the outcome column with --outcome COLUMN"))
    conv = read_outcome(table[outcome.column], outcome)
    if conv.problems:
        text = conv.problems[0].replace("(outcome.event)", "(--event)")
        text = text.replace("set outcome.event to", "use --event with")
        raise DataError(f"cannot use the outcome: {text}")
    return np.asarray(conv.values, dtype=float), np.asarray(conv.missing, dtype=bool)


def _cells(series: pd.Series, kind: str) -> NDArray[Any]:
    """A column for input checking: numbers as floats when every cell reads as a number.

    Number and yes/no columns whose every non-missing cell reads as a plain
    number (``72``, ``0.0``) are passed as numbers (NaN = missing), so a data
    file written with ``1.0``/``0.0`` for yes/no is read as 1/0; any other
    column is passed cell by cell, so its messages show the cells as written.
    """
    import pandas as pd

    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series):
        return series.to_numpy(dtype=float)
    if kind != "choice":
        toks = [token(v) for v in series.tolist()]
        if all(t is None or isinstance(t, float) for t in toks):
            return np.array([np.nan if t is None else t for t in toks], dtype=float)
    return series.to_numpy(dtype=object)


def _input_columns(calc: Calculator, table: pd.DataFrame, columns: Mapping[str, str]
                   ) -> dict[str, NDArray[Any]]:
    have = [str(c) for c in table.columns]
    out, problems = {}, []
    for spec in calc.inputs:
        header = spec.id if spec.id in have else columns.get(spec.id)
        if header is not None and header in have:
            out[spec.id] = _cells(table[header], spec.kind)
        elif spec.required:
            problems.append(_column_problem(spec.id, f"input '{spec.label}'", have,
                                            "columns are matched by input id"))
    if problems:
        raise DataError(f"the data lack {len(problems)} input column"
                        f"{'s' if len(problems) != 1 else ''}", problems)
    return out


def _refused(bad: Mapping[str, NDArray[np.bool_]], texts: Mapping[int, str], n: int,
             hint: str) -> DataError:
    rows = np.zeros(n, dtype=bool)
    for mask in bad.values():
        rows |= mask
    counts = "; ".join(f"{int(m.sum())} {what}" for what, m in bad.items() if m.any())
    shown = [f"row {file_row(int(r))}: {texts.get(int(r), 'outcome missing')}"
             for r in np.flatnonzero(rows)[:SHOWN_ROWS]]
    more = f" (and {int(rows.sum()) - SHOWN_ROWS} more)" if rows.sum() > SHOWN_ROWS else ""
    return DataError(
        f"{int(rows.sum())} of {n} rows cannot be used ({counts}); fix them, or use "
        f"--drop-refused to leave them out (the number left out is recorded). {hint}First rows "
        f"({ROW_NOTE}){more}:", shown)


def _blank(table: pd.DataFrame) -> NDArray[np.bool_]:
    return np.array(empty_rows(table), dtype=bool) if len(table.columns) else \
        np.zeros(len(table), dtype=bool)


def read_outcome_and_inputs(calc: Calculator, table: pd.DataFrame, outcome: Outcome,
                            drop: bool, columns: Mapping[str, str]
                            ) -> tuple[NDArray[np.float64], dict[str, NDArray[Any]], DataRows]:
    """Outcome and checked canonical input values of the usable rows.

    Parameters
    ----------
    calc : Calculator
    table : pandas.DataFrame
        The data as read by :func:`calcbuilder.evidence.read_table`.
    outcome : Outcome
        Outcome column and event value.
    drop : bool
        Leave out rows with a refused value or a missing outcome.
    columns : mapping
        Input id -> data column, tried when no column is named by the id.

    Returns
    -------
    (y, values, rows)

    Raises
    ------
    DataError
        Missing columns, an unusable outcome, or refused rows without ``drop``.
    """
    y, missing = _outcome(table, outcome)
    checked = check_columns(calc.inputs, _input_columns(calc, table, columns))
    blank = _blank(table)
    refused = checked.blocked & ~blank
    bad = {"with a refused input value": refused, "with a missing outcome": missing & ~blank}
    texts = {row: " ".join(m.text for m in msgs if m.severity == "error")
             for row, msgs in checked.messages.items() if refused[row]}
    dropped = bad["with a refused input value"] | bad["with a missing outcome"]
    if dropped.any() and not drop:
        raise _refused(bad, texts, len(table), "")
    keep = ~dropped & ~blank
    values = {k: v[keep] for k, v in checked.values.items()}
    rows = DataRows(len(table), int(keep.sum()), int(dropped.sum()), int(blank.sum()),
                    int((checked.extrapolated & keep).sum()))
    return y[keep], values, rows


def _risks(cells: pd.Series) -> tuple[NDArray[np.float64], NDArray[np.bool_], dict[int, str]]:
    risk = np.full(len(cells), np.nan)
    texts: dict[int, str] = {}
    for k, cell in enumerate(cells.tolist()):
        tok = token(cell)
        if tok is None:
            texts[k] = "risk missing"
        elif isinstance(tok, str) or not 0 <= tok <= 1:
            texts[k] = f"risk {tok!r} is not a number from 0 to 1"
        else:
            risk[k] = tok
    return risk, np.isnan(risk), texts


def read_predictions(table: pd.DataFrame, outcome: Outcome, risk_column: str, drop: bool
                     ) -> tuple[NDArray[np.float64], NDArray[np.float64], DataRows]:
    """Outcome and predicted risk (proportions from 0 to 1) of the usable rows.

    Raises
    ------
    DataError
        Missing columns, an unusable outcome, or refused rows without ``drop``.
    """
    have = [str(c) for c in table.columns]
    if risk_column not in have:
        raise DataError(_column_problem(risk_column, "the predicted risks", have,
                                        "name it with --risk-column COLUMN"))
    y, missing = _outcome(table, outcome)
    risk, bad_risk, texts = _risks(table[risk_column])
    blank = _blank(table)
    bad = {"with a missing or unusable risk": bad_risk & ~blank,
           "with a missing outcome": missing & ~blank}
    dropped = bad["with a missing or unusable risk"] | bad["with a missing outcome"]
    hint = ("The risks look like percentages: give them as proportions (0.12, not 12). "
            if _percent_like(table[risk_column]) else "")
    if dropped.any() and not drop:
        raise _refused(bad, texts, len(table), hint)
    keep = ~dropped & ~blank
    rows = DataRows(len(table), int(keep.sum()), int(dropped.sum()), int(blank.sum()))
    return y[keep], risk[keep], rows


def _percent_like(cells: pd.Series) -> bool:
    numbers = np.array([t for t in (token(c) for c in cells.tolist()) if isinstance(t, float)])
    return bool(numbers.size) and numbers.max() <= 100 and (numbers > 1).mean() >= 0.5


def stored_settings(calc: Calculator) -> dict[str, Any]:
    """Settings of the latest evidence set that records an outcome column (else empty)."""
    for e in reversed(calc.evidence):
        settings = e.raw.get("settings") or {}
        if settings.get("outcome_column"):
            return dict(settings)
    return {}


def outcome_for(calc: Calculator, column: str | None, event: Any) -> Outcome:
    stored = stored_settings(calc)
    name = column or stored.get("outcome_column")
    if not name:
        raise DataError("this calculator does not record its outcome column (it was not made "
                        "by calcbuilder fit); name the column with --outcome COLUMN")
    value = event if event is not None else stored.get("outcome_event", 1)
    read = token(value)
    if read is None:
        raise DataError(f"the event value {value!r} reads as missing; give the value that "
                        "means the event happened (--event)")
    return Outcome(str(name), read)


def recipe_columns(calc: Calculator, recipe: Recipe | None = None) -> dict[str, str]:
    """Input id -> the recipe's data column, for inputs whose column differs from the id."""
    if recipe is None:
        raw = stored_settings(calc).get("recipe")
        recipe = stored_recipe(raw) if raw else None
    if recipe is None:
        return {}
    return {e.id: e.column for e in recipe.inputs if e.column != e.id}


def stored_recipe(raw: str) -> Recipe:
    try:
        return Recipe.from_dict(json.loads(raw))
    except (ValueError, TypeError) as exc:
        raise DataError(f"the recipe stored in the calculator cannot be read back ({exc}); "
                        "give the recipe file with --recipe") from None
