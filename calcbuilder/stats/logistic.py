"""Weighted maximum-likelihood logistic regression by Newton-Raphson.

References
----------
.. [1] McCullagh P, Nelder JA. Generalized Linear Models, 2nd ed. Chapman & Hall 1989, ch. 4.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ._validate import FloatArray, as_outcome, as_vector, as_weights, check_length
from .errors import ConvergenceError, SingularDesignError, StatsInputError

__all__ = ["LogisticFit", "fit_logistic"]

MAX_ITER = 50
TOL = 1e-10


@dataclass(frozen=True)
class LogisticFit:
    """Result of :func:`fit_logistic`.

    ``coef`` has the intercept first; ``cov`` is the inverse Fisher information;
    ``loglik`` is the (weighted) log-likelihood; ``iterations`` counts Newton steps.
    """

    coef: FloatArray
    cov: FloatArray
    loglik: float
    converged: bool
    iterations: int


def _design(X: ArrayLike, n: int) -> FloatArray:
    arr = np.asarray(X, dtype=np.float64)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise StatsInputError(f"X must be two-dimensional (rows x columns); got shape {arr.shape}")
    check_length(arr, n, "X")
    if not np.isfinite(arr).all():
        r, c = np.argwhere(~np.isfinite(arr))[0]
        raise StatsInputError(f"X must be finite; got {arr[r, c]} at row {r}, column {c}")
    return np.column_stack([np.ones(n), arr])


def _check_rank(Z: FloatArray, w: FloatArray) -> None:
    """Name the first column that is constant or a combination of earlier ones."""
    used = Z[w > 0]
    for j in range(1, Z.shape[1]):
        if np.linalg.matrix_rank(used[:, : j + 1]) <= j:
            what = (
                "constant" if np.ptp(used[:, j]) == 0 else "a linear combination of earlier columns"
            )
            raise SingularDesignError(
                f"X column {j - 1} is {what}; remove it or merge it with the column it duplicates"
            )


def _loglik(y: FloatArray, eta: FloatArray, w: FloatArray) -> float:
    # log p = -log(1 + e^-eta); log(1 - p) = -log(1 + e^eta); stable via logaddexp
    return float(np.sum(w * (y * -np.logaddexp(0.0, -eta) + (1 - y) * -np.logaddexp(0.0, eta))))


def fit_logistic(
    X: ArrayLike,
    y: ArrayLike,
    *,
    weights: ArrayLike | None = None,
    offset: ArrayLike | None = None,
    firth: bool = False,
) -> LogisticFit:
    """Fit ``logit P(y=1) = b0 + X b (+ offset)`` by Newton-Raphson.

    Parameters
    ----------
    X : array (n, p)
        Predictors without a constant column; the intercept is added and comes first.
    y : array (n,)
        Outcome coded 0/1.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row).
    offset : array (n,), optional
        Known part of the linear predictor (coefficient fixed at 1).
    firth : bool
        Use Firth's penalised likelihood (finite estimates under separation).

    Returns
    -------
    LogisticFit

    Examples
    --------
    >>> fit = fit_logistic([[0.0], [1.0], [2.0], [3.0]], [0, 1, 0, 1])
    >>> round(float(fit.coef[1]), 4)
    0.6719
    """
    yv = as_outcome(y)
    n = yv.size
    Z = _design(X, n)
    w = as_weights(weights, n)
    off = np.zeros(n) if offset is None else as_vector(offset, "offset")
    check_length(off, n, "offset")
    _check_rank(Z, w)
    if firth:
        raise StatsInputError("firth=True is not available yet")
    return _newton(Z, yv, w, off)


def _newton(Z: FloatArray, y: FloatArray, w: FloatArray, off: FloatArray) -> LogisticFit:
    beta = np.zeros(Z.shape[1])
    ll_old = -np.inf
    for it in range(1, MAX_ITER + 1):
        eta = off + Z @ beta
        p = 1.0 / (1.0 + np.exp(-eta))
        info = (Z * (w * p * (1 - p))[:, None]).T @ Z
        score = Z.T @ (w * (y - p))
        beta = beta + np.linalg.solve(info, score)
        ll = _loglik(y, off + Z @ beta, w)
        if abs(ll - ll_old) < TOL * (abs(ll) + TOL):
            eta = off + Z @ beta
            p = 1.0 / (1.0 + np.exp(-eta))
            info = (Z * (w * p * (1 - p))[:, None]).T @ Z
            cov = np.asarray(np.linalg.inv(info), dtype=np.float64)
            return LogisticFit(beta, cov, ll, True, it)
        ll_old = ll
    raise ConvergenceError(
        f"logistic fit did not converge in {MAX_ITER} Newton steps; check for separation "
        "or extreme predictor scales, or use firth=True"
    )
