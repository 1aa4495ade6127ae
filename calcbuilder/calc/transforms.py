"""Column builders for the closed set of term transforms (FORMAT.md, "terms").

Each builder takes the prepared values of one input for ``n`` patients and
returns an ``(n, k)`` float array of columns in coefficient order. Values are
already in the canonical unit and already truncated (:func:`truncate`).

A value outside a transform's domain (log of a non-positive number after the
shift, square root of a negative number, a power that is undefined) raises
:class:`calcbuilder.errors.InputValueError` naming the term, the input, the
rule, the value and its row; input checking against the hard limits normally
prevents this, and :meth:`ModelSpec.from_dict` refuses a model whose transform
is undefined inside its inputs' limits when the limits are known.

The restricted cubic spline basis is :func:`calcbuilder.stats.splines.rcs_basis`
(imported on first use), so the calculator and the fitting code share one
implementation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ._model_values import fmt
from .model import Hinges, Indicator, Levels, Linear, Log, Power, Rcs, Sqrt, TermSpec, Transform

__all__ = [
    "ChoiceCodes",
    "hinge_columns",
    "indicator_columns",
    "level_columns",
    "linear_columns",
    "log_columns",
    "power_columns",
    "product_columns",
    "rcs_columns",
    "sqrt_columns",
    "term_columns",
    "truncate",
]


@dataclass(frozen=True)
class ChoiceCodes:
    """A choice input as integer codes: ``choices[codes[i]]`` is patient i's value."""

    codes: np.ndarray
    choices: tuple[str, ...]

    def code_of(self, value: str) -> int:
        """Index of ``value`` in ``choices`` (-1 if absent, which matches no patient)."""
        return self.choices.index(value) if value in self.choices else -1


def truncate(x: np.ndarray, low: float | None, high: float | None) -> np.ndarray:
    """Clip ``x`` to ``[low, high]`` (a None bound is open); returns a new array."""
    return np.clip(x, -np.inf if low is None else low, np.inf if high is None else high)


def _first_bad(x: np.ndarray, bad: np.ndarray, where: str, rule: str) -> InputValueError:
    row = int(np.flatnonzero(bad)[0])
    return InputValueError(f"{where}: {rule} (got x = {fmt(x[row])} at row {row})")


def linear_columns(x: np.ndarray) -> np.ndarray:
    """``x`` as one column."""
    return x.reshape(-1, 1)


def log_columns(x: np.ndarray, shift: float, where: str) -> np.ndarray:
    """``ln(x + shift)``; every ``x + shift`` must be > 0."""
    y = x + shift
    bad = ~(y > 0)
    if bad.any():
        raise _first_bad(
            x, bad, where, f"log(x + shift) needs x + shift > 0 with shift {fmt(shift)}"
        )
    return np.log(y).reshape(-1, 1)


def sqrt_columns(x: np.ndarray, where: str) -> np.ndarray:
    """``sqrt(x)``; every ``x`` must be >= 0."""
    bad = ~(x >= 0)
    if bad.any():
        raise _first_bad(x, bad, where, "sqrt(x) needs x >= 0")
    return np.sqrt(x).reshape(-1, 1)


def power_columns(x: np.ndarray, exponent: float, where: str) -> np.ndarray:
    """``x ** exponent``; a non-integer exponent needs x >= 0, a negative one x != 0."""
    if not float(exponent).is_integer():
        bad = x < 0
        if bad.any():
            raise _first_bad(
                x, bad, where, f"x ** {fmt(exponent)} needs x >= 0 (non-integer exponent)"
            )
    if exponent < 0:
        bad = x == 0
        if bad.any():
            raise _first_bad(
                x, bad, where, f"x ** {fmt(exponent)} needs x != 0 (negative exponent)"
            )
    return np.power(x, float(exponent)).reshape(-1, 1)


def rcs_columns(x: np.ndarray, knots: tuple[float, ...]) -> np.ndarray:
    """Harrell's restricted cubic spline basis (``norm=2``): ``x`` then ``k - 2`` columns."""
    from ..stats.splines import rcs_basis

    basis = np.asarray(rcs_basis(x, np.asarray(knots, dtype=float)), dtype=float)
    if basis.shape != (x.shape[0], len(knots) - 1):  # pragma: no cover - guards the shared basis
        raise RuntimeError(
            f"rcs_basis returned shape {basis.shape}, expected {(x.shape[0], len(knots) - 1)}"
        )
    return basis


def hinge_columns(x: np.ndarray, knots: tuple[float, ...]) -> np.ndarray:
    """Linear spline: ``x, (x - k1)+, (x - k2)+, ...``."""
    out = np.empty((x.shape[0], 1 + len(knots)))
    out[:, 0] = x
    for j, knot in enumerate(knots, start=1):
        np.maximum(x - knot, 0.0, out=out[:, j])
    return out


def indicator_columns(value: np.ndarray | ChoiceCodes, level: str | None) -> np.ndarray:
    """1 where a yes_no value is yes (``level`` None) or a choice equals ``level``."""
    if isinstance(value, ChoiceCodes):
        if level is None:
            raise ValueError("an indicator of a choice input needs a level")
        return (value.codes == value.code_of(level)).astype(float).reshape(-1, 1)
    return (value != 0).astype(float).reshape(-1, 1)


def level_columns(value: ChoiceCodes, levels: tuple[str, ...]) -> np.ndarray:
    """One 0/1 column per listed level, in order (the reference gets all zeros)."""
    wanted = np.array([value.code_of(level) for level in levels])
    return (value.codes[:, None] == wanted[None, :]).astype(float)


def product_columns(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Every product of the columns of ``a`` and ``b``, row-major: a1*b1, a1*b2, ..., a2*b1, ..."""
    n = a.shape[0]
    return (a[:, :, None] * b[:, None, :]).reshape(n, a.shape[1] * b.shape[1])


def _number_columns(t: Transform, x: np.ndarray, where: str) -> np.ndarray:
    if isinstance(t, Linear):
        return linear_columns(x)
    if isinstance(t, Log):
        return log_columns(x, t.shift, where)
    if isinstance(t, Sqrt):
        return sqrt_columns(x, where)
    if isinstance(t, Power):
        return power_columns(x, t.exponent, where)
    if isinstance(t, Rcs):
        return rcs_columns(x, t.knots)
    if isinstance(t, Hinges):
        return hinge_columns(x, t.knots)
    raise TypeError(f"{where}: {t.type_name!r} is not a transform of a number")


def term_columns(term: TermSpec, value: np.ndarray | ChoiceCodes) -> np.ndarray:
    """The columns of a non-product term from its input's prepared values.

    Parameters
    ----------
    term : TermSpec
        Any term except a product (see :func:`product_columns`).
    value : ndarray or ChoiceCodes
        Canonical float values (number), 0/1 floats (yes_no) or codes (choice).

    Returns
    -------
    ndarray, shape (n, k)
        The term's columns in coefficient order, truncated first if the term says so.
    """
    t = term.transform
    where = f"term {term.name!r} (input {term.input!r})"
    if isinstance(t, Indicator):
        return indicator_columns(value, t.level)
    if isinstance(t, Levels):
        if not isinstance(value, ChoiceCodes):
            raise TypeError(f"{where}: a levels term needs a choice input")
        return level_columns(value, t.levels)
    if isinstance(value, ChoiceCodes):
        raise TypeError(f"{where}: {t.type_name!r} needs a number input")
    if term.truncate is not None:
        value = truncate(value, term.truncate.low, term.truncate.high)
    return _number_columns(t, value, where)
