"""Batched damped Newton and logistic fits behind :mod:`calcbuilder.stats.batch`.

Inputs are trusted (validated upstream). Shapes: ``y`` (n,); weights (k, n), one
row per fit. Every fit returns coefficients plus a converged flag and a reason
per row.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol

import numpy as np
from numpy.typing import NDArray
from threadpoolctl import threadpool_limits

from ._validate import FloatArray

__all__ = [
    "Design",
    "blas_threads",
    "block_width",
    "chunk_rows",
    "fit_chunk",
    "fit_rows",
    "fit_rows_per_chunk",
    "newton",
    "signed_parts",
    "softplus_sum",
    "symmetric",
]

BoolArray = NDArray[np.bool_]
IntArray = NDArray[np.intp]

STEP_TOL = 1e-8  # converged: the last full Newton step moved no linear predictor by more
WORK_BYTES = 64 * 2**20  # bytes of (rows x n) work arrays per chunk
WORK_ARRAYS = 10  # (k, n) float arrays alive at once in the heaviest kernel
FIT_BYTES = 48 * 2**20  # bytes of the weight rows fitted together (one pass over the design)
BLOCK_ELEMENTS = 2**16  # (rows x columns) per block of an evaluation: stays in cache
RANK_TOL = 1e-12  # smallest eigenvalue / largest of the scaled weighted Gram matrix
BLAS_THREADS: int | None = 1  # BLAS threads while resampling (None: leave as is); see the bench


def blas_threads() -> threadpool_limits:
    """Hold BLAS to ``BLAS_THREADS`` threads: many small products ran faster on one (bench)."""
    return threadpool_limits(limits=BLAS_THREADS, user_api="blas")


def chunk_rows(n: int) -> int:
    """Rows of weights handled together so that the work arrays stay near ``WORK_BYTES``."""
    return max(1, WORK_BYTES // (WORK_ARRAYS * 8 * n))


def fit_rows_per_chunk(n: int) -> int:
    """Weight rows fitted together: more rows share each pass over the design's pair products."""
    return max(1, FIT_BYTES // (8 * n))


def block_width(k: int) -> int:
    """Columns per block so that a (k, width) array stays in cache."""
    return max(256, BLOCK_ELEMENTS // max(k, 1))


# ----------------------------------------------------------------------------------------
# damped Newton-Raphson, many rows at once
# ----------------------------------------------------------------------------------------


class Problem(Protocol):
    """A batch of weighted logistic likelihoods, one per row."""

    def evaluate(self, rows: IntArray, beta: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Score (k, q) and information (k, q, q) of ``rows`` at ``beta``."""
        ...

    def reach(self, rows: IntArray, step: FloatArray) -> FloatArray:
        """An upper bound, per row, of the largest change ``|z_i . step|`` of a linear predictor."""
        ...

    def loglik(self, rows: IntArray, beta: FloatArray) -> FloatArray:
        """Log-likelihood of ``rows`` at ``beta``."""
        ...


def _scaled(matrices: FloatArray) -> tuple[FloatArray, FloatArray, BoolArray]:
    """Symmetric positive matrices scaled to unit diagonal, the square-root diagonal, and
    whether each is numerically non-singular (eigenvalue ratio above ``RANK_TOL``)."""
    q = matrices.shape[1]
    diag = np.sqrt(np.einsum("kii->ki", matrices))
    with np.errstate(divide="ignore", invalid="ignore"):
        scaled = matrices / diag[:, :, None] / diag[:, None, :]
    fine = np.isfinite(scaled).all(axis=(1, 2))
    scaled = np.where(fine[:, None, None], scaled, np.eye(q))
    eig = np.linalg.eigvalsh(scaled)
    return scaled, diag, fine & (eig[:, 0] > RANK_TOL * eig[:, -1])


def _solve(info: FloatArray, score: FloatArray) -> tuple[FloatArray, BoolArray]:
    """Newton steps ``info^-1 score``, solved in unit-diagonal scaling; ``nan`` where the
    information is numerically singular (rank-deficient, or saturated by separation)."""
    scaled, diag, ok = _scaled(info)
    step = np.full_like(score, np.nan)
    if ok.any():
        rhs = score[ok] / diag[ok]
        step[ok] = np.linalg.solve(scaled[ok], rhs[..., None])[..., 0] / diag[ok]
    return step, ok & np.isfinite(step).all(axis=1)


def newton(
    problem: Problem, beta0: FloatArray, max_iter: int
) -> tuple[FloatArray, BoolArray, IntArray, list[str]]:
    """Damped Newton: a step that would move some linear predictor by more than 1 is
    shortened by backtracking until it raises the log-likelihood, at worst to move none
    by more than 1, which always raises it (see :func:`fit_logistic_batch`). Smaller
    steps need no likelihood. A row has converged when a full step moved every linear
    predictor by at most ``STEP_TOL``.
    """
    B = beta0.shape[0]
    beta = beta0.copy()
    active, converged = np.ones(B, bool), np.zeros(B, bool)
    iters = np.zeros(B, np.intp)
    reasons = [""] * B
    for _ in range(max_iter):
        rows = np.flatnonzero(active)
        if rows.size == 0:
            break
        score, info = problem.evaluate(rows, beta[rows])
        iters[rows] += 1
        step, ok = _solve(info, score)
        for r in rows[~ok]:
            active[r] = False
            reasons[r] = (
                "the information matrix became singular (fitted risks reach 0 or 1: separation)"
            )
        rows, step = rows[ok], step[ok]
        reach = problem.reach(rows, step)
        beta[rows] += step * _step_length(problem, rows, beta[rows], step, reach)[:, None]
        done = rows[reach <= STEP_TOL]
        converged[done], active[done] = True, False
    for r in np.flatnonzero(active):
        reasons[r] = (
            f"no convergence in {max_iter} Newton steps (separation: some coefficient "
            "grows without bound)"
        )
    beta[~converged] = np.nan
    return beta, converged, iters, reasons


def _step_length(
    problem: Problem, rows: IntArray, beta: FloatArray, step: FloatArray, reach: FloatArray
) -> FloatArray:
    """Length of each Newton step: 1 when no linear predictor moves by more than 1.

    Otherwise backtracking: the first of 1, 1/2, 1/4, ... that raises the
    log-likelihood, never below the safe length ``1 / reach``, which always raises it.
    """
    length = np.ones(rows.size)
    big = np.flatnonzero(reach > 1.0)
    if big.size == 0:
        return length
    now = problem.loglik(rows[big], beta[big])
    todo = np.arange(big.size)
    while todo.size:
        safe = 1.0 / reach[big[todo]]
        settled = length[big[todo]] <= safe
        length[big[todo[settled]]] = safe[settled]
        todo = todo[~settled]
        i = big[todo]
        trial = problem.loglik(rows[i], beta[i] + length[i][:, None] * step[i])
        todo = todo[~(trial > now[todo])]
        length[big[todo]] *= 0.5
    return length


def softplus_sum(eta: FloatArray, W: FloatArray | None) -> FloatArray:
    """Row sums of ``w log(1 + exp(eta))`` without overflow (``eta`` is overwritten)."""
    pos = np.maximum(eta, 0.0)
    np.abs(eta, out=eta)
    np.negative(eta, out=eta)
    np.exp(eta, out=eta)
    np.log1p(eta, out=eta)
    eta += pos
    return (
        eta.sum(axis=1) if W is None else np.einsum("kn,kn->k", np.broadcast_to(W, eta.shape), eta)
    )


def signed_parts(t: FloatArray) -> tuple[FloatArray, FloatArray]:
    """``|y - p|`` and ``p(1-p)`` from the signed linear predictor ``t = (2y-1) eta``.

    ``|y - p| = 1/(1+exp(t))`` and ``p(1-p) = exp(t)/(1+exp(t))^2`` hold for both
    outcomes and involve no difference of nearly equal numbers, so the score stays
    accurate in the tails: under separation the iterations keep diverging instead of
    stopping on rounding noise. ``t`` is capped at 700 (``exp`` stays finite; the
    values are then below 1e-304). Works in place on ``t`` (numpy ``exp``).
    """
    np.minimum(t, 700.0, out=t)
    np.exp(t, out=t)
    q = t + 1.0
    np.reciprocal(q, out=q)
    t *= q
    t *= q
    return q, t


# ----------------------------------------------------------------------------------------
# logistic regression on a shared design, many weight rows
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Design:
    """The design ``Z = [1, X]`` with its column-pair products ``Z_i * Z_j`` (``i <= j``, rows).

    One matrix product of weights with ``pairs`` gives every row's information matrix.
    """

    Z: FloatArray
    signed: FloatArray  # (2y - 1) Z: its products with coefficients are signed predictors
    pairs: FloatArray
    iu: tuple[IntArray, IntArray]
    zmax: FloatArray  # largest absolute value in each column

    @classmethod
    def build(cls, Z: FloatArray, y: FloatArray) -> Design:
        i, j = np.triu_indices(Z.shape[1])
        iu = (i.astype(np.intp), j.astype(np.intp))
        cols = np.ascontiguousarray(Z.T)
        pairs = np.empty((i.size, Z.shape[0]))
        for c in range(i.size):
            np.multiply(cols[i[c]], cols[j[c]], out=pairs[c])
        return cls(Z, Z * (2.0 * y - 1.0)[:, None], pairs, iu, np.abs(Z).max(axis=0))


def symmetric(flat: FloatArray, iu: tuple[IntArray, IntArray], q: int) -> FloatArray:
    """(k, q, q) symmetric matrices from their upper triangles (k, q(q+1)/2)."""
    out = np.empty((flat.shape[0], q, q))
    out[:, iu[0], iu[1]] = flat
    out[:, iu[1], iu[0]] = flat
    return out


@dataclass(frozen=True)
class _DesignProblem:
    design: Design
    W: FloatArray

    def evaluate(self, rows: IntArray, beta: FloatArray) -> tuple[FloatArray, FloatArray]:
        Zs, pairs, W = self.design.signed, self.design.pairs, self.W
        every = rows.size == W.shape[0]
        score = np.zeros((rows.size, Zs.shape[1]))
        info = np.zeros((rows.size, pairs.shape[0]))
        width = block_width(rows.size)
        for s in range(0, Zs.shape[0], width):
            Zb = Zs[s : s + width]
            Wb = W[:, s : s + width] if every else W[rows, s : s + width]
            q, v = signed_parts(beta @ Zb.T)
            q *= Wb
            v *= Wb
            score += q @ Zb  # sum of w (y - p) z, as (y - p) z = |y - p| (2y - 1) z
            info += v @ pairs[:, s : s + width].T
        return score, symmetric(info, self.design.iu, Zs.shape[1])

    def loglik(self, rows: IntArray, beta: FloatArray) -> FloatArray:
        Zs, W = self.design.signed, self.W[rows]
        ll = np.zeros(rows.size)
        width = block_width(rows.size)
        for s in range(0, Zs.shape[0], width):  # log-likelihood = -sum w log(1 + exp(-t))
            ll -= softplus_sum(-(beta @ Zs[s : s + width].T), W[:, s : s + width])
        return ll

    def reach(self, rows: IntArray, step: FloatArray) -> FloatArray:
        del rows  # one design for every row
        bound = np.abs(step) @ self.design.zmax
        big = np.flatnonzero(bound > 1.0)
        for i in big:  # the cheap bound may be loose: compute the largest change exactly
            bound[i] = float(np.abs(self.design.Z @ step[i]).max())
        return np.asarray(bound, dtype=np.float64)


def _rank_failures(design: Design, W: FloatArray) -> BoolArray:
    """Rows whose weighted design is rank-deficient (scaled Gram matrix nearly singular)."""
    return ~_scaled(symmetric(W @ design.pairs.T, design.iu, design.Z.shape[1]))[2]


def fit_chunk(
    design: Design, y: FloatArray, W: FloatArray, beta0: FloatArray, max_iter: int
) -> tuple[FloatArray, BoolArray, IntArray, list[str]]:
    """Fit one chunk of weight rows; rows failing the pre-checks are not iterated."""
    k, q = W.shape[0], design.Z.shape[1]
    events, total = W @ y, W.sum(axis=1)
    one_class = (events <= 0) | (events >= total)
    singular = ~one_class & _rank_failures(design, W)
    fine = np.flatnonzero(~one_class & ~singular)
    coef = np.full((k, q), np.nan)
    conv, iters = np.zeros(k, bool), np.zeros(k, np.intp)
    reasons = ["the weights leave only one outcome class" if c else "" for c in one_class]
    for r in np.flatnonzero(singular):
        reasons[r] = "the weighted design is rank-deficient (a column constant or duplicated)"
    if fine.size:
        Wf = W if fine.size == k else W[fine]
        problem = _DesignProblem(design, Wf)
        b, c, it, why = newton(problem, beta0[fine], max_iter)
        coef[fine], conv[fine], iters[fine] = b, c, it
        for r, text in zip(fine, why, strict=True):
            reasons[r] = text
    return coef, conv, iters, reasons


def fit_rows(
    Z: FloatArray, y: FloatArray, W: FloatArray, beta0: FloatArray, max_iter: int
) -> tuple[FloatArray, BoolArray, IntArray, list[str]]:
    """Fit every row of ``W`` in chunks, BLAS held to one thread."""
    design = Design.build(Z, y)
    step = fit_rows_per_chunk(y.size)
    parts = []
    with blas_threads():
        for s in range(0, W.shape[0], step):
            parts.append(fit_chunk(design, y, W[s : s + step], beta0[s : s + step], max_iter))
    reasons = [r for part in parts for r in part[3]]
    return (
        np.vstack([p[0] for p in parts]),
        np.concatenate([p[1] for p in parts]),
        np.concatenate([p[2] for p in parts]),
        reasons,
    )
