"""Score a data table with one or more calculators, for ``recalibrate`` and ``compare``.

Reading rules (said in the commands' ``--help``):

* each calculator reads its own inputs from the table by input id; a header
  ``id[unit]`` gives a number in one of the input's alternative units; other
  columns are ignored;
* every cell is checked exactly as the clinic form checks a typed value
  (:func:`calcbuilder.calc.checking.check_columns`); a row refused by any of the
  calculators (a required value missing or implausible) is excluded from all
  of them, so every model is judged on the same patients, and the rows are
  counted and reported;
* the outcome column holds two values; ``event`` names the one that means the
  event happened (text compared without regard to case, ``1`` by default); a row
  whose outcome is empty is excluded and counted;
* without an outcome column named by the user, the one recorded in the
  calculator's evidence (``settings.outcome_column`` of the latest evidence set
  that has it, with ``settings.outcome_event``) is used.

pandas is imported inside the functions that read a table, never at module import.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from ..calc.checking import ColumnCheck, check_columns, parse_column_header
from ..calc.scoring import score
from ..errors import InputValueError
from ._convert import listing, tokens
from ._tokens import Token, match_key, show, token
from .dataset import ROW_NOTE, file_row, file_sha256, read_table
from .errors import DataError

if TYPE_CHECKING:
    import pandas as pd

    from ..calc.document import Calculator

__all__ = [
    "Outcome",
    "ScoredData",
    "load_scored_data",
    "outcome_from_evidence",
    "read_outcome",
    "resolve_outcome",
    "score_table",
]

FloatArray = NDArray[np.float64]
MAX_REASONS = 3
"""At most this many example reasons are shown for refused rows."""


@dataclass(frozen=True)
class Outcome:
    """The outcome column and the value in it that means the event happened."""

    column: str
    event: Token = 1.0

    @property
    def event_value(self) -> float | int | str:
        """The event value as stored in evidence settings (whole numbers as int)."""
        if isinstance(self.event, float) and self.event.is_integer():
            return int(self.event)
        return self.event


@dataclass(frozen=True)
class ScoredData:
    """The rows of a data table usable by every calculator, scored by each of them.

    Attributes
    ----------
    y : ndarray
        Outcome, 1 = event, for the rows used.
    risks, etas : tuple of ndarray
        One array per calculator, in the order given: the risk and ``eta`` (the
        scale recalibration acts on, after any existing recalibration).
    rows : ndarray of int
        Table positions of the rows used (file row = position + 2).
    n_table : int
        Rows in the table.
    missing_outcome : int
        Rows excluded because the outcome is empty.
    refused : int
        Rows (with an outcome) excluded because a calculator refused a value.
    refused_examples : tuple of str
        Up to :data:`MAX_REASONS` rows with their messages.
    extrapolated : int
        Rows used with a value outside a calculator's developed range.
    outcome : Outcome
        The outcome column and event value used.
    path : Path or None
        The data file, when read from one.
    sha256 : str or None
        SHA-256 of the data file's bytes.
    """

    y: FloatArray
    risks: tuple[FloatArray, ...]
    etas: tuple[FloatArray, ...]
    rows: NDArray[np.intp]
    n_table: int
    missing_outcome: int
    refused: int
    refused_examples: tuple[str, ...]
    extrapolated: int
    outcome: Outcome
    path: Path | None = None
    sha256: str | None = None

    @property
    def n(self) -> int:
        """Rows used."""
        return int(self.y.size)

    @property
    def events(self) -> int:
        """Events among the rows used."""
        return int(self.y.sum())

    @property
    def excluded(self) -> int:
        """Rows of the table not used (outcome empty or a value refused)."""
        return self.n_table - self.n

    def exclusion_note(self) -> str:
        """One sentence saying which rows were excluded and why (empty when none)."""
        if not self.excluded:
            return ""
        parts = []
        if self.missing_outcome:
            parts.append(f"{self.missing_outcome} with an empty outcome")
        if self.refused:
            parts.append(f"{self.refused} with a required value missing or refused")
        text = (f"{self.excluded} of {self.n_table} rows excluded ({'; '.join(parts)}); "
                f"{self.n} rows used")
        if self.refused_examples:
            text += ". For example: " + " | ".join(self.refused_examples)
        return text

    def dataset(self, name: str) -> dict[str, Any]:
        """The ``dataset`` block of an evidence set (FORMAT.md) for the rows used."""
        out: dict[str, Any] = {"name": name, "n": self.n, "events": self.events}
        if self.excluded:
            out["excluded"] = self.excluded
        if self.sha256 is not None:
            out["sha256"] = self.sha256
        return out


def outcome_from_evidence(calc: Calculator) -> Outcome | None:
    """The outcome recorded in the latest evidence set with ``settings.outcome_column``."""
    for evidence in reversed(calc.evidence):
        settings = evidence.raw.get("settings") or {}
        column = settings.get("outcome_column")
        if isinstance(column, str) and column.strip():
            event = token(settings.get("outcome_event", 1))
            return Outcome(column.strip(), 1.0 if event is None else event)
    return None


def resolve_outcome(column: str | None, event: str | None,
                    calcs: Sequence[Calculator]) -> Outcome:
    """The outcome to use: the one given, else the first recorded in the calculators' evidence.

    Raises
    ------
    DataError
        Neither given nor recorded, or an empty event value.
    """
    recorded = next((o for o in map(outcome_from_evidence, calcs) if o is not None), None)
    if column is None or not column.strip():
        if recorded is None:
            raise DataError("name the outcome column with --outcome: the calculator's evidence "
                            "does not record which data column holds the outcome")
        column = recorded.column
        if event is None:
            return recorded
    ev = token(event) if event is not None else 1.0
    if ev is None:
        raise DataError(f"--event must be the value that marks an event, got {event!r}")
    return Outcome(column.strip(), ev)


def read_outcome(series: pd.Series, outcome: Outcome) -> tuple[FloatArray, NDArray[np.bool_]]:
    """Read the outcome column as 1 (event), 0 (the other value) and the missing mask.

    Raises
    ------
    DataError
        The column does not have exactly two values, or the event value is not one of them.
    """
    toks = tokens(series)
    missing = np.array([t is None for t in toks], dtype=bool)
    rows: dict[Token, list[int]] = {}
    first: dict[Token, Token] = {}
    for k, tok in enumerate(toks):
        if tok is not None:
            first.setdefault(match_key(tok), tok)
            rows.setdefault(match_key(tok), []).append(k)
    seen = ", ".join(f"{show(first[key])} ({len(rows[key])} rows)"
                     for key in sorted(rows, key=lambda key: -len(rows[key])))
    name = outcome.column
    if len(rows) != 2:
        found = f"{len(rows)}: {seen}" if rows else "none (every cell is empty)"
        raise DataError(f"outcome column '{name}' must have exactly two values (event and no "
                        f"event); found {found}")
    event = match_key(outcome.event)
    if event not in rows:
        raise DataError(f"outcome column '{name}': the event value {show(outcome.event)} does "
                        f"not occur; found {seen}; give the value that means the event "
                        "happened with --event")
    y = np.array([np.nan if t is None else float(match_key(t) == event) for t in toks])
    return y, missing


def _column_array(series: pd.Series) -> NDArray[Any]:
    """A column for :func:`check_columns`: floats with NaN, or objects with None for missing."""
    import pandas as pd

    if pd.api.types.is_numeric_dtype(series) and not pd.api.types.is_bool_dtype(series):
        return series.to_numpy(dtype=float, na_value=np.nan)
    return series.astype(object).where(series.notna(), None).to_numpy(dtype=object)


def _input_columns(calc: Calculator, frame: pd.DataFrame) -> tuple[dict[str, Any],
                                                                   dict[str, str | None]]:
    """Input id -> column array and input id -> unit, from headers ``id`` or ``id[unit]``."""
    ids = {spec.id for spec in calc.inputs}
    where: dict[str, str] = {}
    units: dict[str, str | None] = {}
    for header in frame.columns:
        try:
            key, unit = parse_column_header(str(header))
        except InputValueError:  # not of the form id or id[unit]: not an input column
            continue
        if key not in ids:
            continue
        if key in where:
            raise DataError(f"columns '{where[key]}' and '{header}' both give input '{key}' "
                            f"of {calc.about.title}; keep one")
        where[key], units[key] = str(header), unit
    return {key: _column_array(frame[col]) for key, col in where.items()}, units


def _check(calc: Calculator, frame: pd.DataFrame) -> ColumnCheck:
    columns, units = _input_columns(calc, frame)
    try:
        return check_columns(calc.inputs, columns, units, decimal_comma=False)
    except InputValueError as exc:  # lists every column problem (missing column, unit, ...)
        raise DataError(f"the data cannot be scored with {calc.about.title}: {exc}") from None


def _examples(checks: Sequence[ColumnCheck], rows: NDArray[np.intp]) -> tuple[str, ...]:
    out = []
    for row in rows[:MAX_REASONS].tolist():
        texts = dict.fromkeys(c.row_text(row) for c in checks if c.row_text(row))
        text = " ".join(texts).strip()
        out.append(f"row {file_row(row)}: {text}")
    return tuple(out)


def score_table(calcs: Sequence[Calculator], frame: pd.DataFrame, outcome: Outcome,
                *, path: Path | None = None) -> ScoredData:
    """Score the rows of ``frame`` that every calculator accepts and that have an outcome.

    Parameters
    ----------
    calcs : sequence of Calculator
        One or more calculators; each reads its own inputs by input id.
    frame : pandas.DataFrame
        The data (as from :func:`calcbuilder.evidence.dataset.read_table`).
    outcome : Outcome
        The outcome column and its event value.
    path : Path, optional
        The file the table was read from (its SHA-256 is recorded).

    Returns
    -------
    ScoredData

    Raises
    ------
    DataError
        The outcome column is absent or unusable, a required input has no
        column, a unit is unknown, no row is usable, or the rows used lack
        events or non-events.
    """
    if outcome.column not in frame.columns:
        names = ", ".join(f"'{c}'" for c in list(frame.columns)[:30])
        raise DataError(f"the data has no outcome column '{outcome.column}'; its columns are "
                        f"{names}; name the outcome column with --outcome")
    y_all, missing = read_outcome(frame[outcome.column], outcome)
    checks = [_check(calc, frame) for calc in calcs]
    blocked = np.logical_or.reduce([c.blocked for c in checks])
    refused_rows = np.flatnonzero(blocked & ~missing)
    keep = np.flatnonzero(~blocked & ~missing)
    _require_usable(y_all[keep], len(frame), int(missing.sum()), refused_rows, checks)
    risks, etas = [], []
    for calc, check in zip(calcs, checks, strict=True):
        result = score(calc.model, {k: v[keep] for k, v in check.values.items()})
        risks.append(np.array(result.risk, dtype=float))
        etas.append(np.array(result.eta, dtype=float))
    extrapolated = np.logical_or.reduce([c.extrapolated for c in checks])[keep]
    return ScoredData(
        y=y_all[keep], risks=tuple(risks), etas=tuple(etas), rows=keep, n_table=len(frame),
        missing_outcome=int(missing.sum()), refused=int(refused_rows.size),
        refused_examples=_examples(checks, refused_rows), extrapolated=int(extrapolated.sum()),
        outcome=outcome, path=path, sha256=file_sha256(path) if path is not None else None,
    )


def _require_usable(y: FloatArray, n_table: int, missing: int, refused: NDArray[np.intp],
                    checks: Sequence[ColumnCheck]) -> None:
    if y.size and 0 < y.sum() < y.size:
        return
    why = (f"{n_table} rows in the table, {missing} with an empty outcome, "
           f"{refused.size} with a value refused")
    if refused.size:
        why += f" ({listing(refused.tolist())}, {ROW_NOTE}; e.g. " \
               f"{_examples(checks, refused)[0]})"
    if not y.size:
        raise DataError(f"no row of the data can be used ({why})")
    kind = "non-events" if y.sum() == y.size else "events"
    raise DataError(f"the {y.size} usable rows of the data contain no {kind}, so the model "
                    f"cannot be judged on them ({why})")


def load_scored_data(calcs: Sequence[Calculator], data: str | Path, outcome: Outcome,
                     *, sheet: str | None = None) -> ScoredData:
    """Read a data file (CSV, Parquet, Excel) and score it; see :func:`score_table`."""
    path = Path(data)
    frame = read_table(path, sheet=sheet)
    return score_table(calcs, frame, outcome, path=path)
