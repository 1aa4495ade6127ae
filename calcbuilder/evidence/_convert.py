"""Reading one data column as the recipe says (private to :mod:`calcbuilder.evidence.datacheck`).

Each reader returns the values (missing entries: NaN for numbers and yes/no,
None for choices), the missing mask and the problems found, in words that name
the column, the rows (``header = row 1``) and the values seen.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from ..calc.numbers import format_number
from ._recipe_inputs import InputEntry
from ._recipe_sections import Outcome
from ._tokens import Token, match_key, show, token
from .dataset import ROW_NOTE, file_row

if TYPE_CHECKING:
    import pandas as pd

__all__ = [
    "MAX_DATA_CHOICES",
    "MAX_LISTED",
    "Converted",
    "listing",
    "read_column",
    "read_outcome",
    "tokens",
]

MAX_LISTED = 5
"""At most this many rows are listed in one message (then "and N more")."""

MAX_DATA_CHOICES = 20
"""A choice input read from the data may have at most this many different values."""


@dataclass
class Converted:
    """One column read as the recipe says."""

    values: NDArray[Any]
    missing: NDArray[np.bool_]
    problems: list[str] = field(default_factory=list)


def tokens(series: pd.Series) -> list[Token | None]:
    """Every cell of a column read by :func:`calcbuilder.evidence._tokens.token`.

    Each distinct cell is read once when the column holds one type only (text,
    numbers or true/false); a column of mixed types is read cell by cell, so that
    ``True`` and ``1`` (equal in Python) keep their own readings.
    """
    import pandas as pd

    cells = series.astype(object).where(series.notna(), None)
    kind = pd.api.types.infer_dtype(cells, skipna=True)
    if kind not in ("string", "floating", "integer", "boolean", "empty"):
        return [token(v) for v in cells.tolist()]
    codes, uniques = pd.factorize(cells, use_na_sentinel=True)
    read = [token(v) for v in uniques.tolist()]
    return [None if c < 0 else read[c] for c in codes.tolist()]


def listing(positions: Sequence[int], shown: Sequence[str] | None = None) -> str:
    """``row 6 '7O', row 19 'n.a.' and 3 more``, or ``rows 6, 19`` without values.

    Rows are numbered as in the file (header = row 1); at most :data:`MAX_LISTED`
    are listed.
    """
    first = [file_row(int(p)) for p in positions[:MAX_LISTED]]
    extra = len(positions) - MAX_LISTED
    more = f" and {extra} more" if extra > 0 else ""
    if shown is None:
        return f"row{'s' if len(positions) > 1 else ''} {', '.join(map(str, first))}{more}"
    return ", ".join(f"row {r} {v}" for r, v in zip(first, shown, strict=False)) + more


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}{'' if n == 1 else 's'}"


def read_column(series: pd.Series, entry: InputEntry) -> Converted:
    """Read an input column: numbers, yes/no or choices, as the entry's kind says."""
    if entry.kind == "number":
        return _numbers(series, entry)
    if entry.kind == "yes_no":
        return _yes_no(series, entry)
    return _choices(series, entry)


def _numbers(series: pd.Series, entry: InputEntry) -> Converted:
    import pandas as pd

    name = entry.column
    if pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series):
        values = series.to_numpy(dtype=float, na_value=np.nan)
        missing = np.isnan(values)
        toks: list[Token | None] | None = None
    else:
        toks = tokens(series)
        missing = np.array([t is None for t in toks], dtype=bool)
        values = np.array([t if isinstance(t, float) else np.nan for t in toks], dtype=float)
    out = Converted(values, missing)
    bad = ~missing & (np.isnan(values) | np.isinf(values))
    if bad.any():
        pos = np.flatnonzero(bad).tolist()
        seen = [show(toks[p]) if toks is not None else format_number(values[p]) for p in pos]
        hint = ""
        if any("," in s for s in seen):
            hint = "; write decimals with a point (72.5), without thousands separators"
        out.problems.append(
            f"column '{name}': {_count(len(pos), 'value')} where a number is expected: "
            f"{listing(pos, seen)} ({ROW_NOTE}){hint}; correct them or leave the cells empty "
            "(missing)"
        )
        values[bad] = np.nan
    _limits(out, entry)
    return out


def _limits(out: Converted, entry: InputEntry) -> None:
    limits = entry.spec.limits
    if limits is None:
        return
    values = out.values
    with np.errstate(invalid="ignore"):
        outside = ~np.isnan(values) & ((values < limits.low) | (values > limits.high))
    if not outside.any():
        return
    pos = np.flatnonzero(outside).tolist()
    unit = f" {entry.spec.unit}" if entry.spec.unit else ""
    text = (
        f"column '{entry.column}': {_count(len(pos), 'value')} outside the hard limits "
        f"{format_number(limits.low)} to {format_number(limits.high)}{unit}: "
        f"{listing(pos, [format_number(values[p]) for p in pos])} ({ROW_NOTE})"
    )
    out.problems.append(text + _unit_hint(values[pos], entry))


def _unit_hint(bad: NDArray[np.float64], entry: InputEntry) -> str:
    """``; check the unit: ...`` when the values would be plausible in an alternative unit."""
    limits = entry.spec.limits
    assert limits is not None
    for alt in entry.spec.alt_units:
        with np.errstate(over="ignore", invalid="ignore"):
            canonical = bad * alt.factor + alt.offset
            fits = (canonical >= limits.low) & (canonical <= limits.high)
        if fits.any():
            shown = ", ".join(format_number(v) for v in bad[fits][:MAX_LISTED])
            return (f"; check the unit: {shown} would be plausible in {alt.unit} — the data must "
                    f"hold {entry.spec.unit}, so convert those values "
                    f"({entry.spec.unit} = {alt.unit} × {format_number(alt.factor)}"
                    f"{_offset(alt.offset)})")
    return "; correct them, or leave the cells empty if the true value is unknown"


def _offset(offset: float) -> str:
    if offset == 0:
        return ""
    return f" {'+' if offset > 0 else '-'} {format_number(abs(offset))}"


def _yes_no(series: pd.Series, entry: InputEntry) -> Converted:
    toks = tokens(series)
    yes = {match_key(t) for t in entry.yes}
    no = {match_key(t) for t in entry.no}
    missing = np.array([t is None for t in toks], dtype=bool)
    values = np.full(len(toks), np.nan)
    bad = []
    for k, tok in enumerate(toks):
        if tok is None:
            continue
        key = match_key(tok)
        if key in yes:
            values[k] = 1.0
        elif key in no:
            values[k] = 0.0
        else:
            bad.append(k)
    out = Converted(values, missing)
    if bad:
        reads = (f"the recipe reads {', '.join(show(t) for t in entry.yes)} as yes and "
                 f"{', '.join(show(t) for t in entry.no)} as no")
        out.problems.append(
            f"column '{entry.column}': {_count(len(bad), 'value')} neither yes nor no: "
            f"{listing(bad, [show(toks[k]) for k in bad])} ({ROW_NOTE}); {reads} "
            f"({entry.path}.yes and .no): correct the data or extend those lists"
        )
    return out


def _choice_text(tok: Token) -> str:
    return format_number(tok) if isinstance(tok, float) else tok


def _choices(series: pd.Series, entry: InputEntry) -> Converted:
    toks = tokens(series)
    missing = np.array([t is None for t in toks], dtype=bool)
    values = np.array([None if t is None else _choice_text(t) for t in toks], dtype=object)
    out = Converted(values, missing)
    if entry.choices_from_data:
        found = sorted({v for v in values if v is not None})
        if len(found) > MAX_DATA_CHOICES:
            out.problems.append(
                f"column '{entry.column}': {len(found)} different values, too many for a choice "
                f"input whose choices are read from the data (at most {MAX_DATA_CHOICES}); list "
                f"the choices in the recipe ({entry.path}.choices) or check that this is the "
                "right column"
            )
        return out
    allowed = {c.value for c in entry.spec.choices}
    bad = [k for k, v in enumerate(values) if v is not None and v not in allowed]
    if bad:
        out.problems.append(
            f"column '{entry.column}': {_count(len(bad), 'value')} not among the recipe's "
            f"choices ({', '.join(sorted(allowed))}): "
            f"{listing(bad, [show(toks[k]) for k in bad])} ({ROW_NOTE}); correct the data or "
            f"add the values to {entry.path}.choices (choices are matched exactly, case included)"
        )
    return out


def read_outcome(series: pd.Series, outcome: Outcome) -> Converted:
    """Read the outcome column as 1 (the event value), 0 (the other value) or NaN (missing)."""
    toks = tokens(series)
    missing = np.array([t is None for t in toks], dtype=bool)
    first: dict[Token, Token] = {}
    rows: dict[Token, list[int]] = {}
    for k, tok in enumerate(toks):
        if tok is not None:
            key = match_key(tok)
            first.setdefault(key, tok)
            rows.setdefault(key, []).append(k)
    event = match_key(outcome.event)
    values = np.array([np.nan if t is None else float(match_key(t) == event) for t in toks])
    out = Converted(values, missing)
    problem = _outcome_problem(outcome, event, first, rows)
    if problem:
        out.problems.append(problem)
    return out


def _outcome_problem(outcome: Outcome, event: Token, first: dict[Token, Token],
                     rows: dict[Token, list[int]]) -> str | None:
    name = outcome.column
    order = sorted(rows, key=lambda key: -len(rows[key]))
    seen = ", ".join(_value_rows(first[key], rows[key]) for key in order)
    if len(rows) > 2:
        return (f"outcome column '{name}' must have two values; found {len(rows)}: {seen} "
                f"({ROW_NOTE}); correct the unexpected values or leave them empty (missing)")
    if len(rows) < 2:
        found = f"only {seen}" if rows else "no values at all"
        return (f"outcome column '{name}' must have two values (event and no event); found "
                f"{found}: a model cannot be fitted without both")
    if event not in rows:
        return (f"outcome column '{name}': the event value {show(outcome.event)} (outcome.event) "
                f"does not occur; found {seen}: set outcome.event to the value that means the "
                "event happened")
    return None


def _value_rows(tok: Token, positions: list[int]) -> str:
    """``2 (rows 17, 230)`` for a rare value, ``0 (1312 rows)`` for a common one."""
    if len(positions) > MAX_LISTED:
        return f"{show(tok)} ({len(positions)} rows)"
    return f"{show(tok)} ({listing(positions)})"
