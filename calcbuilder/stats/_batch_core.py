"""Array kernels behind :mod:`calcbuilder.stats.batch`; inputs are trusted (validated upstream).

Shapes: ``y`` (n,); risks, linear predictors and weights (k, n), weights may also be
(1, n) and broadcast. Every kernel returns values plus an ``ok`` flag per row.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Protocol

import numpy as np
from numpy.typing import NDArray
from threadpoolctl import threadpool_limits

from ._validate import FloatArray

__all__ = [
    "Design",
    "auc_rows",
    "blas_threads",
    "brier_rows",
    "chunk_rows",
    "fit_chunk",
    "fit_rows",
    "fit_rows_per_chunk",
    "slope_rows",
]

BoolArray = NDArray[np.bool_]
IntArray = NDArray[np.intp]

STEP_TOL = 1e-8  # converged: the last full Newton step moved no linear predictor by more
WORK_BYTES = 96 * 2**20  # bytes of (rows x n) work arrays per chunk
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


def _block_width(k: int) -> int:
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


def _softplus_sum(eta: FloatArray, W: FloatArray | None) -> FloatArray:
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


def _signed_parts(t: FloatArray) -> tuple[FloatArray, FloatArray]:
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


def _symmetric(flat: FloatArray, iu: tuple[IntArray, IntArray], q: int) -> FloatArray:
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
        width = _block_width(rows.size)
        for s in range(0, Zs.shape[0], width):
            Zb = Zs[s : s + width]
            Wb = W[:, s : s + width] if every else W[rows, s : s + width]
            q, v = _signed_parts(beta @ Zb.T)
            q *= Wb
            v *= Wb
            score += q @ Zb  # sum of w (y - p) z, as (y - p) z = |y - p| (2y - 1) z
            info += v @ pairs[:, s : s + width].T
        return score, _symmetric(info, self.design.iu, Zs.shape[1])

    def loglik(self, rows: IntArray, beta: FloatArray) -> FloatArray:
        Zs, W = self.design.signed, self.W[rows]
        ll = np.zeros(rows.size)
        width = _block_width(rows.size)
        for s in range(0, Zs.shape[0], width):  # log-likelihood = -sum w log(1 + exp(-t))
            ll -= _softplus_sum(-(beta @ Zs[s : s + width].T), W[:, s : s + width])
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
    return ~_scaled(_symmetric(W @ design.pairs.T, design.iu, design.Z.shape[1]))[2]


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


# ----------------------------------------------------------------------------------------
# weighted measures, many rows
# ----------------------------------------------------------------------------------------


def _gather(W: FloatArray, order: IntArray) -> FloatArray:
    return W[0][order] if W.shape[0] == 1 else np.take_along_axis(W, order, axis=1)


def _tie_bounds(rs: FloatArray) -> tuple[IntArray, IntArray] | None:
    """First and last sorted position of each element's tie group; ``None`` when no ties."""
    new = rs[:, 1:] != rs[:, :-1]
    if new.all():
        return None
    k, n = rs.shape
    pos = np.arange(n)
    start = np.zeros((k, n), np.intp)
    start[:, 1:] = np.where(new, pos[1:], 0)
    np.maximum.accumulate(start, axis=1, out=start)
    end = np.full((k, n), n - 1, np.intp)
    end[:, :-1] = np.where(new, pos[:-1], n - 1)
    end = np.minimum.accumulate(end[:, ::-1], axis=1)[:, ::-1]
    return start, end


def auc_rows(
    y: FloatArray, R: FloatArray, weight_sets: Sequence[FloatArray]
) -> list[tuple[FloatArray, BoolArray]]:
    """Weighted Mann-Whitney AUC of each row of ``R`` under each weight matrix; one sort."""
    if R.shape[0] == 1 and max(W.shape[0] for W in weight_sets) > 1:
        order = np.argsort(R[0])[None, :]
    else:
        order = np.argsort(R, axis=1)
    ys = y[order]
    bounds = _tie_bounds(np.take_along_axis(R, order, axis=1))
    out = []
    for W in weight_sets:
        if _unit(W):
            w1, w0 = ys, 1.0 - ys
        else:
            w1 = _gather(W, order)
            w0 = w1.copy()
            w1 *= ys
            w0 -= w1
        cum0 = np.cumsum(w0, axis=1)
        below = cum0 - w0
        if bounds is None:
            num = np.einsum("kn,kn->k", w1, below)
        else:
            lo = np.take_along_axis(below, bounds[0], axis=1)
            tie = np.take_along_axis(cum0, bounds[1], axis=1) - lo
            num = np.einsum("kn,kn->k", w1, lo + 0.5 * tie)
        n1, n0 = w1.sum(axis=1), cum0[:, -1]
        ok = (n1 > 0) & (n0 > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            out.append((np.where(ok, num / (n1 * n0), np.nan), ok))
    return out


def brier_rows(y: FloatArray, R: FloatArray, W: FloatArray) -> tuple[FloatArray, BoolArray]:
    """Weighted mean of ``(risk - y)^2`` per row; fails only on an all-zero weight row."""
    total = np.broadcast_to(W.sum(axis=1), (R.shape[0],))
    sq = R - y
    sq *= sq
    num = np.einsum("kn,kn->k", np.broadcast_to(W, R.shape), sq)
    ok = total > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(ok, num / total, np.nan), ok


def _unit(W: FloatArray) -> bool:
    return W.shape[0] == 1 and bool((W == 1.0).all())


@dataclass(frozen=True)
class _SlopeProblem:
    """Two-parameter logistic ``a + b L`` per row of ``L``; ``W is None`` means unit weights."""

    L: FloatArray
    signed: FloatArray  # (2y - 1) L
    sign: FloatArray  # 2y - 1
    W: FloatArray | None
    lo: FloatArray
    hi: FloatArray

    @classmethod
    def build(cls, y: FloatArray, L: FloatArray, W: FloatArray | None) -> _SlopeProblem:
        sign = 2.0 * y - 1.0
        return cls(L, L * sign, sign, W, L.min(axis=1), L.max(axis=1))

    def _t(self, rows: IntArray, beta: FloatArray, s: int, width: int) -> FloatArray:
        every = rows.size == self.L.shape[0]
        t = (self.signed[:, s : s + width] if every else self.signed[rows, s : s + width]) * beta[
            :, 1:2
        ]
        t += beta[:, 0:1] * self.sign[s : s + width]
        return t

    def _w(self, rows: IntArray, s: int, width: int) -> FloatArray | None:
        W = self.W
        if W is None:
            return None
        return (
            W[:, s : s + width]
            if W.shape[0] == 1 or rows.size == W.shape[0]
            else W[rows, s : s + width]
        )

    def evaluate(self, rows: IntArray, beta: FloatArray) -> tuple[FloatArray, FloatArray]:
        every = rows.size == self.L.shape[0]
        score, info = np.zeros((rows.size, 2)), np.zeros((rows.size, 3))
        width = _block_width(rows.size)
        for s in range(0, self.L.shape[1], width):
            Lb = self.L[:, s : s + width] if every else self.L[rows, s : s + width]
            Ls = self.signed[:, s : s + width] if every else self.signed[rows, s : s + width]
            q, v = _signed_parts(self._t(rows, beta, s, width))
            Wb = self._w(rows, s, width)
            if Wb is not None:
                q *= Wb
                v *= Wb
            score[:, 0] += q @ self.sign[s : s + width]
            score[:, 1] += np.einsum("kn,kn->k", q, Ls)
            info[:, 0] += v.sum(axis=1)
            info[:, 1] += np.einsum("kn,kn->k", v, Lb)
            v *= Lb
            info[:, 2] += np.einsum("kn,kn->k", v, Lb)
        return score, _symmetric(info, (np.array([0, 0, 1]), np.array([0, 1, 1])), 2)

    def loglik(self, rows: IntArray, beta: FloatArray) -> FloatArray:
        ll = np.zeros(rows.size)
        width = _block_width(rows.size)
        for s in range(0, self.L.shape[1], width):
            t = self._t(rows, beta, s, width)
            np.negative(t, out=t)
            ll -= _softplus_sum(t, self._w(rows, s, width))
        return ll

    def reach(self, rows: IntArray, step: FloatArray) -> FloatArray:
        a, b = step[:, 0], step[:, 1]
        return np.maximum(np.abs(a + b * self.hi[rows]), np.abs(a + b * self.lo[rows]))


def _slope_prechecks(y: FloatArray, L: FloatArray, W: FloatArray) -> tuple[FloatArray, BoolArray]:
    """Linear predictors with non-finite rows zeroed, and the rows fit to iterate."""
    k = L.shape[0]
    finite: BoolArray = np.asarray(np.isfinite(L).all(axis=1))
    if not finite.all():
        L = np.where(finite[:, None], L, 0.0)
    if _unit(W):
        total, events = np.full(k, float(y.size)), np.full(k, float(y.sum()))
        s1, s2 = L.sum(axis=1), np.einsum("kn,kn->k", L, L)
    else:
        Wb = np.broadcast_to(W, L.shape)
        total, events = Wb.sum(axis=1), Wb @ y
        s1, s2 = np.einsum("kn,kn->k", Wb, L), np.einsum("kn,kn,kn->k", Wb, L, L)
    mean = s1 / np.where(total > 0, total, 1.0)
    spread = s2 - s1 * mean  # weighted sum of squares about the mean
    both = (events > 0) & (events < total)
    return L, finite & both & (spread > 1e-12 * (1.0 + mean**2) * total)


def slope_rows(
    y: FloatArray, L: FloatArray, weight_sets: Sequence[FloatArray], max_iter: int = 50
) -> list[tuple[FloatArray, BoolArray, list[str]]]:
    """Calibration slope of ``logit P = a + b L`` per row of ``L`` under each weight matrix."""
    out = []
    for W in weight_sets:
        k = max(L.shape[0], W.shape[0])
        Lb, fit = _slope_prechecks(y, np.broadcast_to(L, (k, L.shape[1])), W)
        slope, ok = np.full(k, np.nan), np.zeros(k, bool)
        reasons = [
            "" if f else "one outcome class, a constant linear predictor, or a risk of 0 or 1"
            for f in fit
        ]
        rows = np.flatnonzero(fit)
        if rows.size:
            Lr = Lb if rows.size == k else Lb[rows]
            W_use = None if _unit(W) else (W if W.shape[0] == 1 else W[rows])
            problem = _SlopeProblem.build(y, Lr, W_use)
            b, c, _, why = newton(problem, np.tile([0.0, 1.0], (rows.size, 1)), max_iter)
            slope[rows], ok[rows] = b[:, 1], c
            for r, text in zip(rows, why, strict=True):
                reasons[r] = text
        out.append((slope, ok, reasons))
    return out
