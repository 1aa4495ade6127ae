"""Model checks needing context: term vs input, covariance, counts, survival, recalibration.

Private to :mod:`calcbuilder.calc._model_parse`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from ._model_values import fmt, number, numbers, string
from .model import (
    HORIZON_UNITS,
    Hinges,
    Indicator,
    InputInfo,
    Levels,
    Log,
    Power,
    Product,
    Rcs,
    Recalibration,
    Sqrt,
    SurvivalSpec,
    Transform,
    Truncate,
)
from .problems import Problems, join

__all__ = [
    "check_covariance",
    "check_term_against_input",
    "count_message",
    "parse_recalibration",
    "parse_survival",
]

NUMBER_TYPES = ("linear", "log", "sqrt", "power", "rcs", "hinges")
_ARTICLE = {"indicator": "an", "rcs": "an"}

# Relative tolerances for a covariance matrix written with ~17 significant digits.
SYMMETRY_RTOL = 1e-8
PSD_RTOL = 1e-10


def check_term_against_input(
    path: str,
    problems: Problems,
    *,
    input_id: str,
    info: InputInfo,
    transform: Transform,
    truncate: Truncate | None,
) -> None:
    """Check a term's transform and truncation against its input's kind, choices and limits."""
    tp = join(path, "transform")
    kinds: tuple[str, ...] = ("number",) if transform.type_name in NUMBER_TYPES else ()
    if isinstance(transform, Indicator):
        kinds = ("yes_no", "choice")
    elif isinstance(transform, Levels):
        kinds = ("choice",)
    if info.kind not in kinds:
        needed = " or ".join(kinds)
        problems.add(
            join(tp, "type"),
            f"{transform.type_name!r} needs a {needed} input, "
            f"but input {input_id!r} is {info.kind}",
        )
        return
    if truncate is not None and info.kind != "number":
        problems.add(
            join(path, "truncate"),
            f"only number inputs can be truncated (input {input_id!r} is {info.kind})",
        )
    if isinstance(transform, Indicator):
        _check_indicator(tp, problems, input_id, info, transform)
    elif isinstance(transform, Levels):
        _check_levels(tp, problems, input_id, info, transform)
    else:
        _check_domain(tp, problems, input_id=input_id, info=info, t=transform, truncate=truncate)


def _not_a_choice(value: str, input_id: str, info: InputInfo) -> str:
    choices = ", ".join(repr(c) for c in info.choices)
    return f"{value!r} is not a choice of input {input_id!r} (choices: {choices})"


def _check_indicator(
    tp: str, problems: Problems, input_id: str, info: InputInfo, t: Indicator
) -> None:
    where = join(tp, "level")
    if info.kind == "yes_no" and t.level is not None:
        problems.add(where, f"not allowed for a yes_no input ({input_id!r})")
    elif info.kind == "choice" and t.level is None:
        problems.add(where, f"required for a choice input ({input_id!r})")
    elif info.kind == "choice" and t.level not in info.choices:
        problems.add(where, _not_a_choice(str(t.level), input_id, info))


def _check_levels(tp: str, problems: Problems, input_id: str, info: InputInfo, t: Levels) -> None:
    before = len(problems.items)
    if t.reference not in info.choices:
        problems.add(join(tp, "reference"), _not_a_choice(t.reference, input_id, info))
    for i, level in enumerate(t.levels):
        if level not in info.choices:
            problems.add(join(join(tp, "levels"), i), _not_a_choice(level, input_id, info))
    if len(problems.items) > before:
        return  # coverage is only meaningful once every named value is a choice
    for choice in info.choices:
        if choice != t.reference and choice not in t.levels:
            problems.add(
                join(tp, "levels"),
                f"choice {choice!r} of input {input_id!r} is neither the reference nor listed "
                "(every choice needs a column or must be the reference)",
            )


def _allowed_range(info: InputInfo, truncate: Truncate | None) -> tuple[float | None, float | None]:
    """Lowest and highest value reaching the transform (None: unknown)."""
    low, high = info.limits if info.limits is not None else (None, None)
    if truncate is not None and truncate.low is not None:
        low = truncate.low if low is None else max(low, truncate.low)
    if truncate is not None and truncate.high is not None:
        high = truncate.high if high is None else min(high, truncate.high)
    return low, high


def _check_domain(
    tp: str,
    problems: Problems,
    *,
    input_id: str,
    info: InputInfo,
    t: Transform,
    truncate: Truncate | None,
) -> None:
    low, high = _allowed_range(info, truncate)
    if low is None:
        return
    lowest = f"the lowest allowed value of input {input_id!r} (limit or truncation)"
    if isinstance(t, Log) and not low + t.shift > 0:
        problems.add(
            tp,
            f"log(x + shift) is undefined at {lowest}: "
            f"x = {fmt(low)}, shift {fmt(t.shift)}, needs x + shift > 0",
        )
    elif isinstance(t, Sqrt) and low < 0:
        problems.add(tp, f"sqrt(x) is undefined at {lowest}: x = {fmt(low)}, needs x >= 0")
    elif isinstance(t, Power) and not float(t.exponent).is_integer() and low < 0:
        problems.add(
            tp,
            f"x ** {fmt(t.exponent)} is undefined at {lowest}: "
            f"x = {fmt(low)}, a non-integer exponent needs x >= 0",
        )
    elif isinstance(t, Power) and t.exponent < 0 and low <= 0 and (high is None or high >= 0):
        problems.add(
            tp,
            f"x ** {fmt(t.exponent)} is undefined at x = 0, which input {input_id!r} allows "
            "(a negative exponent needs x != 0)",
        )


def count_message(t: Transform, expected: int, got: int, counts: Mapping[str, int | None]) -> str:
    """``expected 3 numbers for an rcs term with 4 knots (got 2)`` and friends."""
    noun = "number" if expected == 1 else "numbers"
    if isinstance(t, Product):
        a, b = t.of
        detail = f"a product of {a!r} ({_cols(counts[a])}) and {b!r} ({_cols(counts[b])})"
    else:
        detail = f"{_ARTICLE.get(t.type_name, 'a')} {t.type_name} term"
        if isinstance(t, Rcs | Hinges):
            detail += f" with {len(t.knots)} knot{'s' if len(t.knots) != 1 else ''}"
        elif isinstance(t, Levels):
            n = len(t.levels)
            detail += f" with {n} non-reference level{'s' if n != 1 else ''}"
    return f"expected {expected} {noun} for {detail} (got {got})"


def _cols(n: int | None) -> str:
    return f"{n} column{'s' if n != 1 else ''}"


def check_covariance(
    raw: Any, path: str, problems: Problems, n_columns: int, with_intercept: bool
) -> tuple[tuple[float, ...], ...] | None:
    """Square, right size, finite, bounded, symmetric, semi-definite: the matrix, or None."""
    matrix = _square_matrix(raw, path, problems)
    if matrix is None:
        return None
    size = n_columns + int(with_intercept)
    if len(matrix) != size:
        what = f"1 intercept + {n_columns} columns" if with_intercept else "one per column"
        problems.add(path, f"expected {size} x {size} ({what}) (got {len(matrix)} x {len(matrix)})")
        return None
    V = np.array(matrix, dtype=float)
    if np.abs(V).max() > MAX_COVARIANCE_ENTRY:
        problems.add(
            path,
            f"entries must be below {MAX_COVARIANCE_ENTRY:g} in magnitude "
            f"(got {fmt(float(np.abs(V).max()))}); check the units of the matrix",
        )
        return None
    if not _symmetric(V, path, problems) or not _semidefinite(V, path, problems):
        return None
    return tuple(tuple(r) for r in matrix)


def _square_matrix(raw: Any, path: str, problems: Problems) -> list[tuple[float, ...]] | None:
    """A list of rows of finite numbers with as many numbers per row as rows, or None."""
    if not isinstance(raw, list):
        problems.add(path, f"expected a list of rows (got {raw!r})")
        return None
    rows = [numbers(row, join(path, i), problems) for i, row in enumerate(raw)]
    if any(r is None for r in rows):
        return None
    matrix = [r for r in rows if r is not None]
    for i, row in enumerate(matrix):
        if len(row) != len(matrix):
            problems.add(
                path,
                f"must be square (row {i} has {len(row)} numbers, "
                f"but there are {len(matrix)} rows)",
            )
            return None
    return matrix


MAX_COVARIANCE_ENTRY = 1e100  # larger entries overflow x'Vx and the eigenvalue check


def _symmetric(V: np.ndarray, path: str, problems: Problems) -> bool:
    scale = np.sqrt(np.abs(np.outer(np.diag(V), np.diag(V))))
    bad = np.argwhere(np.abs(V - V.T) > SYMMETRY_RTOL * scale + 1e-300)
    if bad.size:
        i, j = (int(v) for v in bad[bad[:, 0] > bad[:, 1]][0])
        problems.add(
            path,
            f"must be symmetric (row {i}, column {j} is {fmt(V[i, j])} "
            f"but row {j}, column {i} is {fmt(V[j, i])})",
        )
        return False
    return True


def _semidefinite(V: np.ndarray, path: str, problems: Problems) -> bool:
    eig = np.linalg.eigvalsh((V + V.T) / 2)
    if eig[0] < -PSD_RTOL * max(float(np.abs(eig).max()), 1e-300):
        problems.add(
            path, f"must be positive semi-definite (smallest eigenvalue {float(eig[0]):.6g})"
        )
        return False
    return True


def parse_survival(
    raw: Mapping[str, Any], path: str, problems: Problems, family: Any, n_columns: int | None
) -> SurvivalSpec | None:
    """The ``survival`` section: required for survival_at_horizon, refused for logistic."""
    where = join(path, "survival")
    section = raw.get("survival")
    if section is None:
        if family == "survival_at_horizon":
            problems.add(where, "required for family 'survival_at_horizon'")
        return None
    if family == "logistic":
        problems.add(where, "not allowed for family 'logistic'")
        return None
    horizon = number(section.get("horizon"), join(where, "horizon"), problems)
    if horizon is not None and horizon <= 0:
        problems.add(join(where, "horizon"), f"must be greater than 0 (got {fmt(horizon)})")
    unit = section.get("horizon_unit")
    if unit not in HORIZON_UNITS:
        allowed = ", ".join(repr(u) for u in HORIZON_UNITS)
        problems.add(join(where, "horizon_unit"), f"must be one of {allowed} (got {unit!r})")
    s0 = number(section.get("baseline_survival"), join(where, "baseline_survival"), problems)
    if s0 is not None and not 0 < s0 < 1:
        problems.add(
            join(where, "baseline_survival"), f"must be strictly between 0 and 1 (got {fmt(s0)})"
        )
    centre = numbers(section.get("centre"), join(where, "centre"), problems)
    if centre is not None and n_columns is not None and len(centre) != n_columns:
        problems.add(
            join(where, "centre"),
            f"expected {n_columns} numbers, one per column (got {len(centre)})",
        )
    if horizon is None or s0 is None or centre is None:
        return None
    return SurvivalSpec(horizon, str(unit), s0, centre)


def parse_recalibration(raw: Any, path: str, problems: Problems) -> Recalibration | None:
    """The optional ``recalibration`` section."""
    if raw is None:
        return None
    method = raw.get("method")
    if method not in ("intercept", "slope"):
        problems.add(join(path, "method"), f"must be 'intercept' or 'slope' (got {method!r})")
    intercept = number(raw.get("intercept"), join(path, "intercept"), problems)
    slope = number(raw.get("slope", 1), join(path, "slope"), problems)
    if slope is not None:
        _check_slope(slope, method, join(path, "slope"), problems)
    dataset = string(raw.get("dataset"), join(path, "dataset"), problems)
    n = _whole(raw.get("n"), join(path, "n"), problems)
    events = _whole(raw.get("events"), join(path, "events"), problems)
    _check_counts_of_recalibration(n, events, path, problems)
    if intercept is None or slope is None or dataset is None:
        return None
    return Recalibration(str(method), intercept, slope, dataset, n, events)


def _check_slope(slope: float, method: Any, path: str, problems: Problems) -> None:
    if method == "intercept" and slope != 1:
        problems.add(path, f"must be 1 for method 'intercept' (got {fmt(slope)})")
    elif slope == 0:
        problems.add(path, "must not be 0 (got 0): every patient would get the same risk")
    elif slope < 0:
        problems.add(
            path,
            f"must be positive (got {fmt(slope)}): a negative slope reverses the model's ranking",
        )


def _whole(value: Any, path: str, problems: Problems) -> int | None:
    if value is None:
        return None
    if isinstance(value, float) and value.is_integer():
        return int(value)
    if isinstance(value, bool) or not isinstance(value, int):
        problems.add(path, f"expected a whole number (got {value!r})")
        return None
    return value


def _check_counts_of_recalibration(
    n: int | None, events: int | None, path: str, problems: Problems
) -> None:
    if n is not None and n < 1:
        problems.add(join(path, "n"), f"must be at least 1 (got {n})")
    if events is not None and events < 0:
        problems.add(join(path, "events"), f"must not be negative (got {events})")
    elif events is not None and n is not None and events > n:
        problems.add(join(path, "events"), f"must not exceed n = {n} (got {events})")
