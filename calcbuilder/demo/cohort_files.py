"""Cohort files of the demo: writing the synthetic columns as CSV, and cleaning them.

SYNTHETIC, NOT FOR CLINICAL USE. :func:`write_csv` writes a cohort as the
biostatistician would receive it (missing values as empty cells);
:func:`clean_columns` makes the cleaned copy the demo fits on, doing what the
fit's refusal messages advise for values outside an input's hard limits.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..calc.atomic import atomic_write_text
from ..calc.inputs import InputSpec, Range
from ..evidence import Recipe
from .scenario import COLUMNS

__all__ = ["clean_columns", "write_csv"]


def _cell(value: Any) -> str:
    if isinstance(value, float | np.floating):
        v = float(value)
        if math.isnan(v):
            return ""
        return str(int(v)) if v.is_integer() else repr(v)
    return str(value)


def write_csv(path: str | Path, columns: dict[str, NDArray[Any]]) -> None:
    """Write cohort columns as CSV (UTF-8, header row; missing values as empty cells)."""
    names = [c for c in COLUMNS if c in columns]
    n = len(columns[names[0]])
    lines = [",".join(names)]
    lines += [",".join(_cell(columns[c][i]) for c in names) for i in range(n)]
    atomic_write_text(path, "\n".join(lines) + "\n")


def clean_columns(raw: dict[str, NDArray[Any]], recipe: Recipe
                  ) -> tuple[dict[str, NDArray[Any]], list[str]]:
    """Fix values outside their input's hard limits, as the refusal messages advise.

    A value that is plausible in one of the input's alternative units is
    converted to the canonical unit (rounded to the input's decimals); any other
    value outside the limits is emptied (its true value is unknown), so that the
    complete-case fit leaves its row out.

    Returns
    -------
    (dict, list of str)
        The cleaned columns and one sentence per change (file rows: header = row 1).
    """
    out = {k: v.copy() for k, v in raw.items()}
    notes: list[str] = []
    for entry in recipe.inputs:
        spec, limits = entry.spec, entry.spec.limits
        if spec.kind != "number" or limits is None:
            continue
        values = out[entry.column].astype(float)
        for i in np.flatnonzero(~np.isnan(values) & ((values < limits.low)
                                                     | (values > limits.high))):
            notes.append(_fix(values, int(i), spec, limits))
        out[entry.column] = values
    return out, notes


def _fix(values: NDArray[np.float64], i: int, spec: InputSpec, limits: Range) -> str:
    """Convert or empty value ``i`` in place; the sentence saying which."""
    old = float(values[i])
    digits = spec.decimals if spec.decimals is not None else 3
    for alt in spec.alt_units:
        new = round(old * alt.factor + alt.offset, digits)
        if limits.contains(new):
            values[i] = new
            return (f"row {i + 2}, {spec.id}: {old:g} read as {alt.unit} and converted to "
                    f"{new:g} {spec.unit}")
    values[i] = np.nan
    return (f"row {i + 2}, {spec.id}: {old:g} is implausible in every unit; emptied (the "
            "complete-case fit leaves the row out)")
