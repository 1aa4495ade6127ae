"""Entry validation shared by every public statistics function.

Each public function validates its arguments once, here, and hands plain float
arrays to private helpers that trust them. Every message has one shape: the
argument, the rule, and what was received, e.g.
``"risk must lie in [0, 1]; got 1.3 at row 17"``.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import CancelledError, StatsInputError

FloatArray = NDArray[np.float64]
ProgressCallback = Callable[[int, int], bool | None]
"""``callback(done, total)``; returning ``False`` cancels the computation."""


def _first_bad(mask: NDArray[np.bool_]) -> int:
    return int(np.flatnonzero(mask)[0])


def as_vector(values: ArrayLike, name: str) -> FloatArray:
    """A 1-D float array; refuses other shapes, empty input and non-numbers."""
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise StatsInputError(f"{name} must be numeric; got {exc}") from None
    if arr.ndim != 1:
        raise StatsInputError(f"{name} must be one-dimensional; got shape {arr.shape}")
    if arr.size == 0:
        raise StatsInputError(f"{name} must not be empty; got 0 rows")
    return arr


def as_outcome(y: ArrayLike, name: str = "y") -> FloatArray:
    """Outcome coded 0/1 (1 = event); booleans are accepted."""
    arr = as_vector(y, name)
    bad = ~((arr == 0) | (arr == 1))
    if bad.any():
        i = _first_bad(bad)
        seen = np.unique(arr[~np.isnan(arr)])[:6].tolist()
        raise StatsInputError(
            f"{name} must be coded 0/1 (1 = event); got {float(arr[i])!r} at row {i} "
            f"(values seen include {seen})"
        )
    return arr


def as_risk(
    risk: ArrayLike, n: int, name: str = "risk", *, open_interval: bool = False
) -> FloatArray:
    """Predicted risks in [0, 1] (or (0, 1) when ``open_interval``), length ``n``."""
    arr = as_vector(risk, name)
    check_length(arr, n, name)
    bad = ~np.isfinite(arr)
    if bad.any():
        i = _first_bad(bad)
        raise StatsInputError(f"{name} must be finite (no NaN or inf); got {arr[i]} at row {i}")
    bad = (arr < 0) | (arr > 1)
    if bad.any():
        i = _first_bad(bad)
        raise StatsInputError(f"{name} must lie in [0, 1]; got {arr[i]} at row {i}")
    if open_interval:
        edge = (arr == 0) | (arr == 1)
        if edge.any():
            raise StatsInputError(
                f"{name} must lie strictly inside (0, 1) for this measure, which takes "
                f"logarithms of the risk; got {int(edge.sum())} row(s) equal to exactly 0 or 1 "
                f"(first at row {_first_bad(edge)})"
            )
    return arr


def as_weights(weights: ArrayLike | None, n: int, name: str = "weights") -> FloatArray:
    """Frequency weights (non-negative, finite, positive total); ``None`` means all 1."""
    if weights is None:
        return np.ones(n)
    arr = as_vector(weights, name)
    check_length(arr, n, name)
    bad = ~np.isfinite(arr) | (arr < 0)
    if bad.any():
        i = _first_bad(bad)
        raise StatsInputError(f"{name} must be finite and non-negative; got {arr[i]} at row {i}")
    if arr.sum() <= 0:
        raise StatsInputError(f"{name} must have a positive total; got {arr.sum()}")
    return arr


def as_thresholds(thresholds: ArrayLike, name: str = "thresholds") -> FloatArray:
    """Decision thresholds strictly inside (0, 1); a scalar becomes a length-1 array."""
    arr = np.atleast_1d(as_vector(np.atleast_1d(np.asarray(thresholds, dtype=float)), name))
    bad = ~np.isfinite(arr) | (arr <= 0) | (arr >= 1)
    if bad.any():
        i = _first_bad(bad)
        raise StatsInputError(
            f"{name} must lie strictly inside (0, 1); got {arr[i]} at position {i}"
        )
    return arr


def check_length(arr: NDArray[Any], n: int, name: str) -> None:
    """Refuse an array whose length differs from the outcome's."""
    if arr.shape[0] != n:
        raise StatsInputError(f"{name} must have the same length as y ({n}); got {arr.shape[0]}")


def require_both_classes(y: FloatArray, weights: FloatArray, what: str) -> None:
    """Refuse data with events only or non-events only (policy: an error, never NaN)."""
    w_events = float(weights[y == 1].sum())
    w_nonevents = float(weights[y == 0].sum())
    if w_events <= 0 or w_nonevents <= 0:
        raise StatsInputError(
            f"y must contain both events and non-events for {what}; got "
            f"{w_events:g} event(s) and {w_nonevents:g} non-event(s)"
        )


def check_level(level: float) -> float:
    """A confidence level strictly inside (0, 1)."""
    if not (isinstance(level, int | float) and 0 < level < 1):
        raise StatsInputError(f"level must lie strictly inside (0, 1); got {level!r}")
    return float(level)


def report_progress(callback: ProgressCallback | None, done: int, total: int) -> None:
    """Call the progress callback; raise :class:`CancelledError` if it returns ``False``."""
    if callback is not None and callback(done, total) is False:
        raise CancelledError(f"cancelled after {done} of {total} steps")
