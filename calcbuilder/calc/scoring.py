"""Vectorised scoring: risk, linear predictor, interval and contributions for many patients.

FORMAT.md ("Linear predictor, risk and interval") is the contract:

* logistic: ``eta = intercept + X beta``, ``risk = 1 / (1 + exp(-eta))``;
* survival at horizon: ``lp_c = (X - centre) beta``, ``eta = ln(-ln S0) + lp_c``,
  ``risk = 1 - exp(-exp(eta)) = 1 - S0 ** exp(lp_c)``;
* recalibration: ``eta' = a + b * eta``;
* interval: ``eta' +/- z * sqrt(x' V x) * |b|``, back-transformed (methods.md 9.1,
  9.2), with ``x = [1, X]`` (logistic) or ``X - centre`` (survival, baseline
  survival treated as fixed);
* contribution of an input: ``sum(coef * column)`` over the columns of its
  terms (survival: ``coef * (column - centre)``); a product term is split half
  to each of its two factor terms' inputs.

Values are in the canonical unit, one array per input (see :func:`score`).
Imports only numpy and calcbuilder.calc at module level (clinic start-up path).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass
from functools import cache
from typing import Any, cast

import numpy as np

from ..errors import CalcbuilderError
from ._values import prepare_values
from .model import ModelSpec, Product
from .transforms import product_columns, term_columns

__all__ = ["Z95", "Score", "design_matrix", "score", "z_value"]

#: Standard normal 0.975 quantile (the 95% two-sided multiplier).
Z95 = 1.959963984540054
_CHUNK = 1 << 16
_ONE_THREAD_FROM = 20_000


@dataclass(frozen=True, eq=False)
class Score:
    """Scores of ``n`` patients (read-only arrays of length ``n``).

    Attributes
    ----------
    risk : ndarray
        Predicted risk at the horizon.
    eta : ndarray
        The scale the interval is built on, after recalibration: logit
        (logistic) or complementary log-log (survival at horizon).
    linear_predictor : ndarray
        Before recalibration: ``intercept + X beta`` (logistic) or the centred
        ``(X - centre) beta`` (survival).
    low, high : ndarray
        Interval limits on the risk scale; NaN when ``interval_available`` is False.
    contributions : mapping
        Input id -> contribution to the linear predictor (see module notes);
        they sum to ``linear_predictor - intercept`` (logistic) or to
        ``linear_predictor`` (survival).
    level : float
        Coverage of the interval, e.g. 0.95.
    interval_available : bool
        False when the model has no covariance matrix.
    interval_note : str
        One sentence saying how the interval was made and what it leaves out.
    """

    risk: np.ndarray
    eta: np.ndarray
    linear_predictor: np.ndarray
    low: np.ndarray
    high: np.ndarray
    contributions: Mapping[str, np.ndarray]
    level: float
    interval_available: bool
    interval_note: str


def z_value(level: float) -> float:
    """Two-sided standard normal multiplier for coverage ``level`` (0 < level < 1)."""
    if not 0 < level < 1:
        raise CalcbuilderError(f"level: must be strictly between 0 and 1 (got {level!r})")
    if level == 0.95:
        return Z95
    from statistics import NormalDist

    return NormalDist().inv_cdf(0.5 + level / 2)


def _build(model: ModelSpec, prepared: Mapping[str, Any], n: int) -> np.ndarray:
    X = np.empty((n, model.n_columns), order="F")  # columns contiguous: term-wise work is fast
    where = dict(zip((t.name for t in model.terms), model.column_slices, strict=True))
    for term, cols in zip(model.terms, model.column_slices, strict=True):
        t = term.transform
        if isinstance(t, Product):
            X[:, cols] = product_columns(X[:, where[t.of[0]]], X[:, where[t.of[1]]])
        else:
            X[:, cols] = term_columns(term, prepared[str(term.input)])
    return X


def design_matrix(model: ModelSpec, values: Mapping[str, Any]) -> np.ndarray:
    """The ``(n, n_columns)`` term columns in coefficient order (no intercept, not centred).

    Parameters
    ----------
    model : ModelSpec
    values : mapping
        Input id -> array of length n (number: canonical unit; yes_no: bool or
        0/1; choice: the choice values as text). Inputs the model does not read
        are ignored.

    Raises
    ------
    InputValueError
        A value is missing, of the wrong type, not finite, not a known choice,
        or outside a transform's domain; the message names the input or term.
    """
    n, prepared = prepare_values(model, values)
    return _build(model, prepared, n)


def _coefficients(model: ModelSpec) -> np.ndarray:
    return np.array([c for t in model.terms for c in t.coefficients], dtype=float)


def _contributions(model: ModelSpec, X: np.ndarray, beta: np.ndarray) -> dict[str, np.ndarray]:
    out = {input_id: np.zeros(X.shape[0]) for input_id in model.inputs_read}
    reads = {t.name: t.input for t in model.terms}
    for term, cols in zip(model.terms, model.column_slices, strict=True):
        part = np.zeros(X.shape[0])
        for j in range(cols.start, cols.stop):  # column by column: no BLAS, contiguous
            part += beta[j] * X[:, j]
        if isinstance(term.transform, Product):
            for factor in term.transform.of:
                out[str(reads[factor])] += 0.5 * part
        else:
            out[str(term.input)] += part
    return out


@cache
def _blas_controller() -> Any:
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def _one_blas_thread(n: int) -> AbstractContextManager[Any]:
    """Hold BLAS to one thread for large batches (many threads on tall-skinny products were
    several times slower on 2-core machines, design.md 12); no-op for small n."""
    if n < _ONE_THREAD_FROM:
        return nullcontext()
    try:
        return cast(
            AbstractContextManager[Any], _blas_controller().limit(limits=1, user_api="blas")
        )
    except ImportError:  # pragma: no cover - threadpoolctl is a declared dependency
        return nullcontext()


def _variance(X: np.ndarray, V: np.ndarray, with_intercept: bool) -> np.ndarray:
    """Row-wise ``x' V x`` with ``x = [1, X_i]`` or ``X_i``, in chunks to bound memory."""
    Vxx = V[1:, 1:] if with_intercept else V
    out = np.empty(X.shape[0])
    for start in range(0, X.shape[0], _CHUNK):
        block = X[start : start + _CHUNK]
        q = np.einsum("ij,ij->i", block @ Vxx, block)
        if with_intercept:
            q += V[0, 0] + 2.0 * (block @ V[0, 1:])
        out[start : start + _CHUNK] = q
    return np.maximum(out, 0.0)


def _inverse_link(family: str, eta: np.ndarray) -> np.ndarray:
    with np.errstate(over="ignore"):
        if family == "logistic":
            return 1.0 / (1.0 + np.exp(-eta))
        return -np.expm1(-np.exp(eta))


def _note(model: ModelSpec, level: float) -> str:
    pct = f"{level * 100:g}%"
    if model.covariance is None:
        return "No interval: the calculator file has no covariance matrix of the coefficients."
    if model.family == "logistic":
        text = (
            f"{pct} interval by the delta method on the logit scale from the coefficient covariance"
        )
    else:
        text = (
            f"{pct} interval by the delta method on the complementary log-log scale from "
            "the coefficient covariance; the baseline survival is treated as fixed, "
            "so the interval is somewhat too narrow"
        )
    if model.recalibration is not None:
        text += "; recalibration intercept and slope are treated as fixed"
    return text + "."


def _readonly(arr: np.ndarray) -> np.ndarray:
    arr.flags.writeable = False
    return arr


def score(model: ModelSpec, values: Mapping[str, Any], *, level: float = 0.95) -> Score:
    """Score many patients at once.

    Parameters
    ----------
    model : ModelSpec
        A model built by :meth:`ModelSpec.from_dict` (or equivalent).
    values : mapping
        Input id -> array of length n, canonical units (see :func:`design_matrix`).
    level : float, default 0.95
        Coverage of the interval.

    Returns
    -------
    Score

    Raises
    ------
    InputValueError
        Bad values (see :func:`design_matrix`).
    CalcbuilderError
        ``level`` not strictly between 0 and 1.
    """
    z = z_value(level)
    n, prepared = prepare_values(model, values)
    with _one_blas_thread(n):
        with np.errstate(over="ignore", invalid="ignore"):  # overflow is refused by _finite
            X = _build(model, prepared, n)
        return _score(model, X, z, level)


def _finite(values: np.ndarray, what: str) -> np.ndarray:
    """Refuse a result that overflowed instead of showing 0, 1 or NaN as a risk."""
    bad = ~np.isfinite(values)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise CalcbuilderError(
            f"{what} is not finite at row {row} (got {values[row]}): the coefficients or values "
            "are too large to compute with; check the model's units and coefficients"
        )
    return values


def _linear_predictor(model: ModelSpec, X: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """``intercept + X beta`` (logistic) or ``(X - centre) beta`` (survival; centres X in place)."""
    with np.errstate(over="ignore", invalid="ignore"):
        if model.survival is not None:
            X -= np.asarray(model.survival.centre, dtype=float)
            return _finite(X @ beta, "the linear predictor")
        return _finite(float(model.intercept or 0.0) + X @ beta, "the linear predictor")


def _score(model: ModelSpec, X: np.ndarray, z: float, level: float) -> Score:
    beta = _coefficients(model)
    lp = _linear_predictor(model, X, beta)
    eta = lp
    if model.survival is not None:
        eta = math.log(-math.log(model.survival.baseline_survival)) + lp
    slope = 1.0
    if model.recalibration is not None:
        slope = model.recalibration.slope
        eta = _finite(model.recalibration.intercept + slope * eta, "the recalibrated eta")
    if model.covariance is not None:
        V = np.asarray(model.covariance, dtype=float)
        with np.errstate(over="ignore", invalid="ignore"):
            var = _finite(_variance(X, V, model.family == "logistic"), "the variance of eta")
        half = z * abs(slope) * np.sqrt(var)
        low, high = _inverse_link(model.family, eta - half), _inverse_link(model.family, eta + half)
    else:
        low = high = np.full(X.shape[0], np.nan)
    with np.errstate(over="ignore", invalid="ignore"):
        parts = _contributions(model, X, beta)
    contributions = {
        k: _readonly(_finite(v, f"the contribution of {k!r}")) for k, v in parts.items()
    }
    return Score(
        risk=_readonly(_inverse_link(model.family, eta)),
        eta=_readonly(np.asarray(eta, dtype=float)),
        linear_predictor=_readonly(lp),
        low=_readonly(low),
        high=_readonly(high),
        contributions=contributions,
        level=level,
        interval_available=model.covariance is not None,
        interval_note=_note(model, level),
    )
