"""Turn the caller's per-input arrays into what the transforms read (private).

Numbers become finite float arrays, yes/no values 0/1 floats, choices integer
codes. Anything else raises :class:`InputValueError` naming the input, the rule
and the first offending value with its row; nothing is silently coerced.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from ..errors import InputValueError
from ._model_values import fmt
from .model import Indicator, Levels, ModelSpec
from .transforms import ChoiceCodes

__all__ = ["input_kind", "prepare_values"]


def input_kind(model: ModelSpec, input_id: str) -> tuple[str, tuple[str, ...]]:
    """The kind of an input as the model reads it, and its choices (choice inputs only)."""
    recorded = dict(model.input_choices)
    if input_id in recorded:
        return "choice", recorded[input_id]
    kind, seen = "number", list[str]()
    for term in model.terms:
        t = term.transform
        if term.input != input_id:
            continue
        if isinstance(t, Levels):
            kind, seen = "choice", [*seen, t.reference, *t.levels]
        elif isinstance(t, Indicator):
            kind = "yes_no" if t.level is None else "choice"
            seen += [] if t.level is None else [t.level]
    return kind, tuple(dict.fromkeys(seen))


def prepare_values(model: ModelSpec, values: Mapping[str, Any]) -> tuple[int, dict[str, Any]]:
    """Check and convert the values of every input the model reads.

    Returns
    -------
    n : int
        Number of patients.
    prepared : dict
        Input id -> float array (number, yes_no) or :class:`ChoiceCodes` (choice).
    """
    prepared: dict[str, Any] = {}
    n: int | None = None
    for input_id in model.inputs_read:
        if input_id not in values:
            raise InputValueError(f"values: no value for input {input_id!r}, which the model reads")
        arr = np.atleast_1d(np.asarray(values[input_id]))
        where = f"values[{input_id!r}]"
        if arr.ndim != 1:
            raise InputValueError(
                f"{where}: expected a one-dimensional array (got shape {arr.shape})"
            )
        if n is not None and arr.shape[0] != n:
            raise InputValueError(
                f"{where}: expected {n} values like the other inputs (got {arr.shape[0]})"
            )
        n = arr.shape[0]
        kind, choices = input_kind(model, input_id)
        if kind == "number":
            prepared[input_id] = _numbers(arr, where)
        elif kind == "yes_no":
            prepared[input_id] = _yes_no(arr, where)
        else:
            prepared[input_id] = _choices(arr, choices, where)
    return (0 if n is None else n), prepared


def _show(value: Any) -> str:
    """repr of a value as the user typed it (numpy scalars shown as plain Python values)."""
    return repr(value.item() if isinstance(value, np.generic) else value)


def _numbers(arr: np.ndarray, where: str) -> np.ndarray:
    if arr.dtype.kind == "O":
        odd = [
            v for v in arr.tolist() if isinstance(v, bool | str) or not isinstance(v, int | float)
        ]
        if odd:
            raise InputValueError(f"{where}: expected numbers (got {_show(odd[0])})")
    elif arr.dtype.kind not in "iuf":
        raise InputValueError(f"{where}: expected numbers (got values of type {arr.dtype})")
    x = np.asarray(arr, dtype=float)  # no copy for float64 input; never modified in place
    bad = ~np.isfinite(x)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InputValueError(f"{where}: expected a finite number (got {fmt(x[row])} at row {row})")
    return x


def _yes_no(arr: np.ndarray, where: str) -> np.ndarray:
    if arr.dtype.kind == "b":
        return arr.astype(float)
    if arr.dtype.kind == "O":
        odd = [v for v in arr.tolist() if isinstance(v, str) or v not in (True, False)]
        if odd:
            raise InputValueError(f"{where}: expected true/false or 0/1 (got {_show(odd[0])})")
    elif arr.dtype.kind not in "iuf":
        raise InputValueError(
            f"{where}: expected true/false or 0/1 (got values of type {arr.dtype})"
        )
    x = arr.astype(float)
    bad = (x != 0) & (x != 1)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise InputValueError(
            f"{where}: expected true/false or 0/1 (got {fmt(x[row])} at row {row})"
        )
    return x


def _choices(arr: np.ndarray, choices: tuple[str, ...], where: str) -> ChoiceCodes:
    if arr.dtype.kind not in "UO":
        raise InputValueError(
            f"{where}: expected choice values as text (got values of type {arr.dtype})"
        )
    codes = np.full(arr.shape[0], -1, dtype=np.int16)
    for i, choice in enumerate(choices):
        codes[arr == choice] = i
    bad = codes < 0
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        allowed = ", ".join(repr(c) for c in choices)
        raise InputValueError(
            f"{where}: {_show(arr[row])} at row {row} is not a choice (choices: {allowed})"
        )
    return ChoiceCodes(codes, choices)
