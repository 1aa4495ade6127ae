"""Many weighted logistic fits and performance measures at once.

Every function here takes a matrix of frequency weights, one row per fit or
evaluation (typically one row of bootstrap counts per resample), and returns
one value per row. Rows share the design matrix, the outcome and, where they
can, one sort, so that hundreds of resamples cost a few large array operations
instead of hundreds of small ones.

Fits that fail (one outcome class, a design that becomes rank-deficient in the
resample, no convergence within the iteration limit, e.g. under separation) are
flagged per row, never dropped and never given a made-up number: their
coefficients are ``nan`` and ``converged`` is ``False``. The public metric
functions raise instead; the resampling module uses the flags.

References
----------
.. [1] McCullagh P, Nelder JA. Generalized Linear Models, 2nd ed. Chapman & Hall 1989, ch. 4.
.. [2] Hanley JA, McNeil BJ. The meaning and use of the area under a receiver operating
       characteristic (ROC) curve. Radiology 1982;143:29-36.
.. [3] Brier GW. Verification of forecasts expressed in terms of probability.
       Mon Weather Rev 1950;78:1-3.
.. [4] Cox DR. Two further applications of a model for binary regression.
       Biometrika 1958;45:562-565.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ._batch_core import BoolArray, IntArray, fit_rows
from ._batch_measures import auc_rows, brier_rows, slope_rows
from ._validate import FloatArray, as_outcome, as_risk, as_weights, check_length
from .errors import ConvergenceError, StatsInputError

__all__ = [
    "BatchLogisticFit",
    "auc_batch",
    "brier_batch",
    "calibration_slope_batch",
    "fit_logistic_batch",
]


@dataclass(frozen=True)
class BatchLogisticFit:
    """Result of :func:`fit_logistic_batch`, one row per weight vector.

    ``coef`` (B, p+1) has the intercept first and is ``nan`` on rows that did not
    converge; ``converged`` (B,) flags the rows that did; ``iterations`` (B,)
    counts the Newton steps of each row; ``reasons`` holds, for each row, an
    empty string or why that fit failed.
    """

    coef: FloatArray
    converged: BoolArray
    iterations: IntArray
    reasons: tuple[str, ...]


def fit_logistic_batch(
    X: ArrayLike,
    y: ArrayLike,
    weights: ArrayLike,
    *,
    start: ArrayLike | None = None,
    max_iter: int = 50,
) -> BatchLogisticFit:
    """Fit ``logit P(y=1) = b0 + X b`` once per row of ``weights``.

    Parameters
    ----------
    X : array (n, p)
        Predictors without a constant column; the intercept is added first.
    y : array (n,)
        Outcome coded 0/1.
    weights : array (B, n) or (n,)
        Frequency weights, one row per fit (e.g. bootstrap counts).
    start : array (p+1,) or (B, p+1), optional
        Starting coefficients; default intercept = logit of the weighted event rate.
    max_iter : int
        Newton steps allowed per row.

    Returns
    -------
    BatchLogisticFit

    Notes
    -----
    Damped Newton-Raphson [1]_ on all rows together. The information matrices of
    a chunk of rows come from one matrix product of the weights ``w p (1-p)``
    with the products of pairs of design columns, and are solved in one batched
    call after scaling to unit diagonal. A row whose information matrix is
    numerically singular (eigenvalue ratio below 1e-12 after scaling) fails.

    Step length: a step that changes no linear predictor by more than 1 is taken
    whole. As ``|d log[p(1-p)] / d eta| < 1``, the curvature along such a step
    stays within a factor ``e`` of its starting value, so the log-likelihood
    rises by at least ``(3 - e) s' I s`` (``s`` the step, ``I`` the information)
    and needs no checking. A longer step is halved until the log-likelihood
    rises, but never below the length that moves no linear predictor by more
    than 1.

    A row has converged when a full step moved no linear predictor by more than
    1e-8; that step is applied. The residuals ``y - p`` and weights ``p(1-p)``
    are computed as ``1/(1+exp(t))`` and ``exp(t)/(1+exp(t))^2`` of the signed
    predictor ``t = (2y-1) eta``, free of cancellation, so under separation the
    iterations keep diverging (and the row fails) instead of stopping on
    rounding noise. Rows are processed in chunks (at most 48 MB of weights at a
    time, evaluated in cache-sized blocks) with BLAS held to one thread, which
    measured several times faster on two-core machines (``tests/bench``).

    References
    ----------
    .. [1] McCullagh P, Nelder JA. Generalized Linear Models, 2nd ed. 1989, ch. 4.

    Examples
    --------
    >>> fit = fit_logistic_batch([[0.0], [1.0], [2.0], [3.0]], [0, 1, 0, 1], [[1, 1, 1, 1]])
    >>> round(float(fit.coef[0, 1]), 4)
    0.9082
    """
    yv = as_outcome(y)
    Z = design_matrix(X, yv.size)
    W = weight_rows(weights, yv.size, "weights")
    beta0 = _start_values(start, W, yv, Z.shape[1])
    if not (isinstance(max_iter, int) and max_iter >= 1):
        raise StatsInputError(f"max_iter must be a positive integer; got {max_iter!r}")
    coef, ok, iters, reasons = fit_rows(Z, yv, W, beta0, max_iter)
    return BatchLogisticFit(coef, ok, iters, tuple(reasons))


def auc_batch(y: ArrayLike, risk: ArrayLike, weights: ArrayLike | None = None) -> FloatArray:
    """Weighted AUC (c-statistic) for each row of ``risk`` and/or ``weights``.

    Parameters
    ----------
    y : array (n,)
        Outcome coded 0/1.
    risk : array (n,) or (B, n)
        Predicted risks; one vector shared by every weight row, or one per row.
    weights : array (n,) or (B, n), optional
        Frequency weights; ``None`` means all 1.

    Returns
    -------
    array (B,)
        ``B`` is the number of rows of ``risk`` or ``weights`` (1 when both are vectors).

    Notes
    -----
    Mann-Whitney form [1]_: the weighted share of (event, non-event) pairs in
    which the event has the higher risk, ties counting 1/2. A shared risk
    vector is sorted once for all weight rows; a risk matrix once per row,
    whatever the number of weight sets. A row whose weights leave only one
    outcome class is an error.

    References
    ----------
    .. [1] Hanley JA, McNeil BJ. The meaning and use of the area under a receiver
           operating characteristic (ROC) curve. Radiology 1982;143:29-36.

    Examples
    --------
    >>> auc_batch([0, 0, 1, 1], [0.1, 0.4, 0.35, 0.8], [[1, 1, 1, 1], [1, 0, 1, 1]]).tolist()
    [0.75, 1.0]
    """
    yv, R, W = _metric_inputs(y, risk, weights, open_interval=False)
    values, ok = auc_rows(yv, R, [W])[0]
    _raise_failed(ok, "auc_batch", "weights leave only one outcome class")
    return values


def brier_batch(y: ArrayLike, risk: ArrayLike, weights: ArrayLike | None = None) -> FloatArray:
    """Weighted Brier score ``sum w (risk - y)^2 / sum w`` for each row [1]_.

    Parameters and shapes as in :func:`auc_batch`.

    References
    ----------
    .. [1] Brier GW. Verification of forecasts expressed in terms of probability.
           Mon Weather Rev 1950;78:1-3.

    Examples
    --------
    >>> [round(v, 12) for v in brier_batch([0, 1], [0.2, 0.6], [[1, 1], [3, 1]]).tolist()]
    [0.1, 0.07]
    """
    yv, R, W = _metric_inputs(y, risk, weights, open_interval=False)
    return brier_rows(yv, R, W)[0]


def calibration_slope_batch(
    y: ArrayLike, risk: ArrayLike, weights: ArrayLike | None = None
) -> FloatArray:
    """Calibration slope ``b`` of ``logit P(y=1) = a + b logit(risk)`` for each row [1]_.

    Parameters and shapes as in :func:`auc_batch`; risks must lie strictly
    inside (0, 1).

    Notes
    -----
    A batched two-parameter Newton-Raphson (start ``a = 0, b = 1``) with the
    damping and convergence rule of :func:`fit_logistic_batch`. A row with
    one outcome class, a constant linear predictor or no convergence (e.g. the
    risks separate the outcome perfectly) raises :class:`ConvergenceError`
    naming the row.

    References
    ----------
    .. [1] Cox DR. Two further applications of a model for binary regression.
           Biometrika 1958;45:562-565.

    Examples
    --------
    >>> slope = calibration_slope_batch([0, 0, 1, 1, 0, 1], [0.2, 0.3, 0.4, 0.6, 0.7, 0.8])
    >>> round(float(slope[0]), 4)
    1.1413
    """
    yv, R, W = _metric_inputs(y, risk, weights, open_interval=True)
    values, ok, reasons = slope_rows(yv, np.log(R) - np.log1p(-R), [W])[0]
    bad = np.flatnonzero(~ok)
    if bad.size:
        b = int(bad[0])
        raise ConvergenceError(
            f"calibration_slope_batch: row {b} of {ok.size} has no calibration slope: {reasons[b]}"
        )
    return values


# ----------------------------------------------------------------------------------------
# entry validation shared with the resampling module
# ----------------------------------------------------------------------------------------


def design_matrix(X: ArrayLike, n: int) -> FloatArray:
    """The design ``[1, X]`` from a numeric (n, p) array, refusing other shapes and non-finite."""
    try:
        arr = np.asarray(X, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise StatsInputError(f"X must be a numeric (rows x columns) array; got {exc}") from None
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise StatsInputError(f"X must be two-dimensional (rows x columns); got shape {arr.shape}")
    check_length(arr, n, "X")
    if not np.isfinite(arr).all():
        r, c = np.argwhere(~np.isfinite(arr))[0]
        raise StatsInputError(f"X must be finite; got {arr[r, c]} at row {r}, column {c}")
    return np.column_stack([np.ones(n), arr])


def weight_rows(weights: ArrayLike, n: int, name: str) -> FloatArray:
    """A (B, n) matrix of frequency weights, each row checked by ``as_weights``."""
    arr = np.asarray(weights, dtype=object if _ragged(weights) else np.float64)
    if arr.dtype == object:
        raise StatsInputError(f"{name} must be a rectangular (B, n) array; got ragged rows")
    if arr.ndim == 1:
        return as_weights(arr, n, name)[None, :]
    if arr.ndim != 2 or arr.shape[0] == 0:
        raise StatsInputError(f"{name} must be a (B, n) matrix or an (n,) vector; got {arr.shape}")
    return np.vstack([as_weights(row, n, f"{name}[{b}]") for b, row in enumerate(arr)])


def _ragged(values: ArrayLike) -> bool:
    if isinstance(values, list | tuple) and values and isinstance(values[0], list | tuple):
        return len({len(v) for v in values}) > 1
    return False


def _risk_rows(risk: ArrayLike, n: int, open_interval: bool) -> FloatArray:
    arr = np.asarray(risk, dtype=object if _ragged(risk) else np.float64)
    if arr.dtype == object:
        raise StatsInputError("risk must be a rectangular (B, n) array; got ragged rows")
    if arr.ndim == 1:
        return as_risk(arr, n, open_interval=open_interval)[None, :]
    if arr.ndim != 2 or arr.shape[0] == 0:
        raise StatsInputError(f"risk must be a (B, n) matrix or an (n,) vector; got {arr.shape}")
    return np.vstack(
        [as_risk(r, n, f"risk[{b}]", open_interval=open_interval) for b, r in enumerate(arr)]
    )


def _metric_inputs(
    y: ArrayLike, risk: ArrayLike, weights: ArrayLike | None, *, open_interval: bool
) -> tuple[FloatArray, FloatArray, FloatArray]:
    yv = as_outcome(y)
    R = _risk_rows(risk, yv.size, open_interval)
    W = np.ones((1, yv.size)) if weights is None else weight_rows(weights, yv.size, "weights")
    if R.shape[0] != W.shape[0] and min(R.shape[0], W.shape[0]) > 1:
        raise StatsInputError(
            f"weights must have one row per row of risk ({R.shape[0]}), or be a vector; "
            f"got {W.shape[0]} rows"
        )
    B = max(R.shape[0], W.shape[0])
    return yv, np.broadcast_to(R, (B, yv.size)), np.broadcast_to(W, (B, yv.size))


def _start_values(start: ArrayLike | None, W: FloatArray, y: FloatArray, q: int) -> FloatArray:
    B = W.shape[0]
    if start is None:
        beta0 = np.zeros((B, q))
        rate = np.clip((W @ y) / W.sum(axis=1), 1e-6, 1 - 1e-6)
        beta0[:, 0] = np.log(rate) - np.log1p(-rate)
        return beta0
    arr = np.asarray(start, dtype=np.float64)
    if arr.shape not in {(q,), (B, q)} or not np.isfinite(arr).all():
        raise StatsInputError(
            f"start must be finite with shape ({q},) or ({B}, {q}); got shape {arr.shape}"
        )
    return np.array(np.broadcast_to(arr, (B, q)))


def _raise_failed(ok: BoolArray, what: str, why: str) -> None:
    bad = np.flatnonzero(~ok)
    if bad.size:
        raise StatsInputError(
            f"{what}: y must contain both events and non-events in every weight row; "
            f"row {int(bad[0])} of {ok.size} fails ({why})"
        )
