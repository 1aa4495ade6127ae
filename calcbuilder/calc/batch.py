"""Batch scoring of a CSV of patients (``calcbuilder score``).

Reading rules, stated in ``calcbuilder score --help`` and the README:

* one column per input id, in the canonical unit; a header ``id[unit]``
  selects an alternative unit; other columns are carried through unchanged;
* numbers use a decimal point (or a decimal comma with ``decimal_comma=True``,
  in which case a point is refused as ambiguous); empty cells are missing;
* every row is checked exactly as the clinic form checks one patient; a row
  with an error gets an empty risk and its messages in ``warnings``; the other
  rows are still scored; warnings (extrapolation) travel with the risk.

pandas is imported here only, never on the clinic form's start-up path.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import CalcbuilderError, InputValueError
from .atomic import atomic_write_text
from .checking import check_columns, parse_column_header
from .numbers import parse_number
from .scoring import score

if TYPE_CHECKING:
    from .document import Calculator

__all__ = ["BatchReport", "score_csv", "score_frame"]

OUTPUT_COLUMNS = ("risk", "risk_low", "risk_high", "warnings")


@dataclass(frozen=True)
class BatchReport:
    """What a batch run did."""

    rows: int
    scored: int
    refused: int
    warned: int
    ignored_columns: tuple[str, ...]


def _read(path: Path) -> Any:
    import pandas as pd

    try:
        return pd.read_csv(path, dtype=str, keep_default_na=False, encoding="utf-8-sig")
    except FileNotFoundError:
        raise CalcbuilderError(f"patients file {path} does not exist") from None
    except UnicodeDecodeError:
        raise CalcbuilderError(
            f"patients file {path} is not UTF-8 text; save it as UTF-8"
        ) from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        raise CalcbuilderError(f"patients file {path} is not a readable CSV: {exc}") from None


def _input_columns(calc: Calculator, headers: list[str]) -> tuple[dict[str, str],
                                                                  dict[str, str | None]]:
    """Map input id -> CSV header, and input id -> unit; refuse an input given twice."""
    ids = {spec.id for spec in calc.inputs}
    where: dict[str, str] = {}
    units: dict[str, str | None] = {}
    for header in headers:
        key, unit = parse_column_header(header)
        if key not in ids:
            continue
        if key in where:
            raise InputValueError(
                f"columns {where[key]!r} and {header!r} both give input {key!r}; keep one"
            )
        where[key], units[key] = header, unit
    return where, units


def _numeric(text: Any, decimal_comma: bool) -> tuple[np.ndarray, np.ndarray]:
    """Fast conversion of a text column; returns values and the rows that did not convert."""
    import pandas as pd

    stripped = text.str.strip()
    if decimal_comma:
        has_point = stripped.str.contains(".", regex=False)
        stripped = stripped.str.replace(",", ".", regex=False).where(~has_point, "x")
    values = pd.to_numeric(stripped, errors="coerce").to_numpy(dtype=float)
    bad = np.isnan(values) & (stripped.to_numpy() != "")
    return values, bad


def _unreadable_messages(label: str, texts: np.ndarray, decimal_comma: bool) -> list[str]:
    out = []
    for text in texts:
        try:
            parse_number(str(text), decimal_comma=decimal_comma)
            out.append(f"{label}: {text!r} could not be read as a number.")
        except InputValueError as exc:
            out.append(f"{label}: {exc}")
    return out


def score_frame(calc: Calculator, frame: Any, *, decimal_comma: bool = False) -> tuple[Any,
                                                                                     BatchReport]:
    """Score a DataFrame of text cells; returns the frame with the output columns added."""
    where, units = _input_columns(calc, list(frame.columns))
    n = len(frame)
    columns: dict[str, Any] = {}
    parse_errors: dict[int, list[str]] = {}
    for spec in calc.inputs:
        if spec.id not in where:
            continue
        text = frame[where[spec.id]]
        if spec.kind == "number":
            values, bad = _numeric(text, decimal_comma)
            columns[spec.id] = values
            bad_rows = np.flatnonzero(bad)
            texts = _unreadable_messages(spec.label, text.to_numpy()[bad_rows], decimal_comma)
            for bad_row, msg in zip(bad_rows.tolist(), texts, strict=True):
                parse_errors.setdefault(bad_row, []).append(msg)
        else:
            columns[spec.id] = text.to_numpy(dtype=object)
    checked = check_columns(calc.inputs, columns, units)
    blocked = checked.blocked.copy()
    blocked[list(parse_errors)] = True
    risk = np.full(n, np.nan)
    low, high = risk.copy(), risk.copy()
    ok = np.flatnonzero(~blocked)
    if ok.size:
        result = score(calc.model, {k: v[ok] for k, v in checked.values.items()})
        risk[ok], low[ok], high[ok] = result.risk, result.low, result.high
    notes = [""] * n
    for row, found in checked.messages.items():
        # an unreadable number shows as missing to check_columns: say what was wrong instead
        kept = [m.text for m in found if not (row in parse_errors and m.code == "missing")]
        notes[row] = " ".join(kept)
    for row, texts in parse_errors.items():
        notes[row] = " ".join([*texts, notes[row]]).strip()
    out = frame.copy()
    out["risk"], out["risk_low"], out["risk_high"] = risk, low, high
    out["warnings"] = notes
    ignored = tuple(c for c in frame.columns if c not in where.values())
    warned = int(sum(1 for i in range(n) if notes[i] and not blocked[i]))
    return out, BatchReport(n, int(ok.size), int(blocked.sum()), warned, ignored)


def score_csv(calc: Calculator, patients: str | Path, output: str | Path, *,
              decimal_comma: bool = False) -> BatchReport:
    """Read, score and write atomically; nothing is written when reading or mapping fails."""
    frame = _read(Path(patients))
    clash = [c for c in OUTPUT_COLUMNS if c in frame.columns]
    if clash:
        raise CalcbuilderError(
            f"patients file already has column(s) {', '.join(clash)}; rename them first"
        )
    out, report = score_frame(calc, frame, decimal_comma=decimal_comma)
    buffer = io.StringIO()
    out.to_csv(buffer, index=False, float_format="%.10g")
    atomic_write_text(output, buffer.getvalue())
    return report
