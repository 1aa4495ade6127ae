"""Weighted logistic regression: maximum likelihood and Firth's penalised likelihood.

Both fits use Newton-Raphson with step-halving [1]_; the Firth fit maximises
``l(b) + 0.5 log det I(b)`` [2]_ [3]_. Fits that fail are diagnosed: a linear
programme [4]_ tells separation (no finite estimate) from plain non-convergence.

References
----------
.. [1] McCullagh P, Nelder JA. Generalized Linear Models, 2nd ed. Chapman & Hall 1989, ch. 4.
.. [2] Firth D. Bias reduction of maximum likelihood estimates. Biometrika 1993;80:27-38.
.. [3] Heinze G, Schemper M. A solution to the problem of separation in logistic
       regression. Stat Med 2002;21:2409-2419.
.. [4] Konis K. Linear programming algorithms for detecting separated data in binary
       logistic regression models. DPhil thesis, University of Oxford, 2007.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike
from scipy.linalg import cho_solve, solve_triangular
from scipy.special import expit

from ._validate import (
    FloatArray,
    as_outcome,
    as_vector,
    as_weights,
    check_length,
    require_both_classes,
)
from .errors import ConvergenceError, SeparationError, SingularDesignError, StatsInputError
from .separation import _design_matrix, separation_on_design

__all__ = ["LogisticFit", "fit_logistic"]

MAX_ITER = 50
"""Newton steps allowed before the fit is declared non-convergent."""
MAX_HALVINGS = 30
"""Step-halvings tried when a full Newton step lowers the objective."""
ETA_TOL = 1e-8
"""Converged when the last step moved no row's linear predictor by more than this."""
SUSPECT_ITER = 10
"""Newton steps after which a still-moving fit is checked for separation (once)."""
RANK_TOL = 1e-9
"""A column is dependent when its part orthogonal to earlier columns is below this fraction."""


@dataclass(frozen=True)
class LogisticFit:
    """Result of :func:`fit_logistic`.

    ``coef`` has the intercept first; ``cov`` is the inverse Fisher information
    at ``coef``; ``loglik`` is the (weighted) log-likelihood at ``coef`` (never
    the penalised one, also for Firth fits); ``iterations`` counts Newton steps.
    """

    coef: FloatArray
    cov: FloatArray
    loglik: float
    converged: bool
    iterations: int


@dataclass(frozen=True)
class _Point:
    """Everything Newton needs at one coefficient vector."""

    eta: FloatArray
    loglik: float
    objective: float
    score: FloatArray
    chol: FloatArray  # lower Cholesky factor of the Fisher information
    p: FloatArray
    A: FloatArray | None  # Firth only: L^-1 Z', so that z_i' I^-1 z_i = |A[:, i]|^2


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
        Predictors without a constant column; the intercept is added and comes
        first. ``p`` may be 0 (``np.empty((n, 0))``): an intercept-only fit.
    y : array (n,)
        Outcome coded 0/1 (1 = event); both classes must occur.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row); rows with
        weight 0 are ignored.
    offset : array (n,), optional
        Known part of the linear predictor (coefficient fixed at 1).
    firth : bool
        Maximise Firth's penalised log-likelihood ``l(b) + 0.5 log det I(b)``
        instead [2]_ [3]_; its estimates are finite under separation.

    Returns
    -------
    LogisticFit
        ``cov`` is the inverse Fisher information ``(Z' W Z)^-1`` at the
        estimate (also for Firth fits, as in [3]_). ``loglik`` is always the
        ordinary log-likelihood ``sum w_i [y_i log p_i + (1 - y_i) log(1 - p_i)]``;
        for a Firth fit the maximised penalised value is
        ``loglik - 0.5 * log(det(cov))``.

    Raises
    ------
    SeparationError
        Complete or quasi-complete separation, checked by the linear programme
        of [4]_ only when Newton fails or still moves after ``SUSPECT_ITER``
        steps (never on ordinary fits); the message names the kind and columns.
    SingularDesignError
        A column of X is constant or a linear combination of earlier columns
        (judged on rows with positive weight), or there are fewer rows than
        coefficients.
    ConvergenceError
        No convergence in ``MAX_ITER`` steps without separation.
    StatsInputError
        Bad arguments (shape, coding, non-finite values, negative weights,
        a single outcome class); ``converged`` is therefore always True.

    Notes
    -----
    Newton starts at zero. A step that lowers the (penalised) log-likelihood is
    halved up to ``MAX_HALVINGS`` times. The fit has converged when a step
    moves no row's linear predictor by more than ``ETA_TOL`` (a scale-free
    rule: under separation the separated rows keep moving by about 1 per step).
    The Firth fit uses the modified score
    ``U* = sum [w_i (y_i - p_i) + h_i (1/2 - p_i)] z_i`` with hat values
    ``h_i = w_i p_i (1 - p_i) z_i' I^-1 z_i`` [3]_, the gradient of the penalised
    log-likelihood, so frequency weights act like copied rows in both fits. Its
    step solves with the exact Hessian of the penalised log-likelihood where
    that is negative definite (quadratic convergence) and is the scoring step
    ``I^-1 U*`` of [3]_ elsewhere.

    References
    ----------
    .. [1] McCullagh P, Nelder JA. Generalized Linear Models, 2nd ed. 1989, ch. 4.
    .. [2] Firth D. Bias reduction of maximum likelihood estimates. Biometrika 1993;80:27-38.
    .. [3] Heinze G, Schemper M. A solution to the problem of separation in logistic
           regression. Stat Med 2002;21:2409-2419.
    .. [4] Konis K. Linear programming algorithms for detecting separated data in
           binary logistic regression models. DPhil thesis, University of Oxford, 2007.

    Examples
    --------
    >>> fit = fit_logistic([[0.0], [1.0], [2.0], [3.0]], [0, 1, 0, 1])
    >>> round(float(fit.coef[1]), 4)
    0.9082
    """
    if not isinstance(firth, bool | np.bool_):
        raise StatsInputError(f"firth must be True or False; got {firth!r}")
    yv = as_outcome(y)
    n = yv.size
    Z = _design_matrix(X, n)
    w = as_weights(weights, n)
    off = _offset(offset, n)
    require_both_classes(yv, w, "a logistic fit")
    keep = w > 0
    if not keep.all():
        Z, yv, w, off = Z[keep], yv[keep], w[keep], off[keep]
    _check_rank(Z)
    return _fit(_Problem(Z, yv, w, off, bool(firth)))


def _offset(offset: ArrayLike | None, n: int) -> FloatArray:
    if offset is None:
        return np.zeros(n)
    off = as_vector(offset, "offset")
    check_length(off, n, "offset")
    bad = ~np.isfinite(off)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise StatsInputError(f"offset must be finite (no NaN or inf); got {off[i]} at row {i}")
    return off


def _check_rank(Z: FloatArray) -> None:
    """Name the first column that is constant or a combination of earlier ones (one QR)."""
    n, k = Z.shape
    if n < k:
        raise SingularDesignError(
            f"X has {k - 1} column(s), so {k} coefficients with the intercept, but only {n} "
            "row(s) with positive weight; use fewer predictors or more data"
        )
    R = np.linalg.qr(Z, mode="r")
    norms = np.linalg.norm(Z, axis=0)
    dependent = np.abs(np.diag(R)) <= RANK_TOL * norms
    if dependent.any():
        raise SingularDesignError(_singular_message(Z, int(np.flatnonzero(dependent)[0])))


def _singular_message(Z: FloatArray, j: int) -> str:
    col = Z[:, j]
    if np.ptp(col) == 0:
        return (
            f"X column {j - 1} must vary, but it is constant ({col[0]:g} in every row with "
            "positive weight); the intercept already plays that role, so remove the column"
        )
    coef = np.linalg.lstsq(Z[:, :j], col, rcond=None)[0]
    size = np.abs(coef) * np.linalg.norm(Z[:, :j], axis=0) > 1e-6 * np.linalg.norm(col)
    used = [f"X column {i - 1}" for i in range(1, j) if size[i]]
    if not used:
        return (
            f"X column {j - 1} must vary, but it is constant up to rounding (range "
            f"{np.ptp(col):.3g} around {np.mean(col):.6g}); remove or rescale it"
        )
    if size[0]:
        used.append("the intercept")
    names = ", ".join(used[:-1]) + " and " + used[-1] if len(used) > 1 else used[0]
    return (
        f"X column {j - 1} must not be a linear combination of other columns, but it is a "
        f"combination of {names} (up to rounding): a duplicated or rescaled column, or "
        "indicators for every category with no reference level; remove it"
    )


class _Problem(NamedTuple):
    """Validated data of one fit (rows with positive weight only)."""

    Z: FloatArray
    y: FloatArray
    w: FloatArray
    off: FloatArray
    firth: bool


def _evaluate(prob: _Problem, beta: FloatArray) -> _Point | None:
    """Log-likelihood, (modified) score and Fisher information; ``None`` if I is singular."""
    Z, y, w = prob.Z, prob.y, prob.w
    eta = prob.off + Z @ beta
    p, q = expit(eta), expit(-eta)  # q = 1 - p without cancellation
    v = w * p * q
    info = (Z * v[:, None]).T @ Z
    try:
        chol = np.linalg.cholesky(info)
    except np.linalg.LinAlgError:
        return None
    if not np.isfinite(chol).all() or np.min(np.diag(chol)) <= 0:
        return None
    loglik = float(-np.sum(w * (y * np.logaddexp(0.0, -eta) + (1 - y) * np.logaddexp(0.0, eta))))
    resid = w * (y * q - (1 - y) * p)  # w (y - p)
    if not prob.firth:
        return _Point(eta, loglik, loglik, Z.T @ resid, chol, p, None)
    A = solve_triangular(chol, Z.T, lower=True, check_finite=False)  # z_i' I^-1 z_i = |A_i|^2
    h = v * np.einsum("ij,ij->j", A, A)
    penalised = loglik + float(np.sum(np.log(np.diag(chol))))  # + 0.5 log det I
    return _Point(eta, loglik, penalised, Z.T @ (resid + h * (0.5 - p)), chol, p, A)


def _direction(prob: _Problem, point: _Point) -> FloatArray:
    """Newton direction: ``I^-1 U`` for ML; for Firth the exact penalised Hessian if concave."""
    fisher = cho_solve((point.chol, True), point.score, check_finite=False)
    if point.A is None:
        return np.asarray(fisher, dtype=np.float64)
    neg_hessian = point.chol @ point.chol.T - _penalty_hessian(prob, point)
    try:
        chol = np.linalg.cholesky(neg_hessian)
    except np.linalg.LinAlgError:
        return np.asarray(fisher, dtype=np.float64)  # not locally concave: Fisher scoring
    return np.asarray(cho_solve((chol, True), point.score, check_finite=False), dtype=np.float64)


def _penalty_hessian(prob: _Problem, point: _Point) -> FloatArray:
    """Hessian of ``0.5 log det I(b)``.

    With ``H = Z I^-1 Z'``, ``a = w p q (1 - 2p)`` and ``c = w p q (1 - 6pq)`` it is
    ``0.5 Z' diag(c * diag(H)) Z - 0.5 Z' diag(a) (H o H) diag(a) Z``. The second term
    is ``B B'`` with ``B[j, (r, s)] = sum_i a_i z_ij A_ri A_si`` (``H = A'A``), built
    with k matrix products so that no n x n matrix is formed.
    """
    Z, w, p, A = prob.Z, prob.w, point.p, point.A
    assert A is not None
    pq = p * expit(-point.eta)
    a = w * pq * (1 - 2 * p)
    c = w * pq * (1 - 6 * pq)
    At = np.ascontiguousarray(A.T)
    first = (Z * (c * np.einsum("ij,ij->i", At, At))[:, None]).T @ Z
    G = Z * a[:, None]
    k = Z.shape[1]
    B = np.empty((k, k, k))
    for r in range(k):
        B[:, r, :] = (G * At[:, r : r + 1]).T @ At
    flat = B.reshape(k, k * k)
    return np.asarray(0.5 * first - 0.5 * (flat @ flat.T), dtype=np.float64)


def _fit(prob: _Problem) -> LogisticFit:
    beta = np.zeros(prob.Z.shape[1])
    point = _evaluate(prob, beta)
    # Firth estimates exist under separation, and an intercept-only design cannot be
    # separated when both classes occur: nothing to check in either case
    checked = prob.firth or prob.Z.shape[1] == 1
    for it in range(1, MAX_ITER + 1):
        if point is None:
            break
        if not checked and it > SUSPECT_ITER:
            _raise_if_separated(prob)
            checked = True
        step = _direction(prob, point)
        if not np.isfinite(step).all():
            break
        moved = _line_search(prob, beta, step, point)
        if moved is None:
            break
        beta, new = moved
        converged = float(np.max(np.abs(new.eta - point.eta))) <= ETA_TOL
        point = new
        if converged:
            cov = cho_solve((point.chol, True), np.eye(beta.size))
            return LogisticFit(beta, (cov + cov.T) / 2, point.loglik, True, it)
    if not checked:
        _raise_if_separated(prob)
    what = "Firth-penalised logistic fit" if prob.firth else "logistic fit"
    advice = "rescale the predictors" if prob.firth else "use firth=True or rescale the predictors"
    raise ConvergenceError(
        f"{what} must converge within {MAX_ITER} Newton steps (with step-halving) but did not; "
        f"the design is probably badly scaled or nearly collinear: {advice}"
    )


def _line_search(
    prob: _Problem, beta: FloatArray, step: FloatArray, point: _Point
) -> tuple[FloatArray, _Point] | None:
    """Full Newton step, halved while the objective falls; ``None`` if nothing helps."""
    slack = 1e-12 * (1.0 + abs(point.objective))
    for _ in range(MAX_HALVINGS + 1):
        trial = beta + step
        new = _evaluate(prob, trial)
        if new is not None and new.objective >= point.objective - slack:
            return trial, new
        step = step / 2
    return None


def _raise_if_separated(prob: _Problem) -> None:
    found = separation_on_design(prob.Z, prob.y)
    if found.kind != "none":
        raise SeparationError(found.message())
