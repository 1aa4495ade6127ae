"""Array kernels behind :mod:`calcbuilder.stats.batch`; inputs are trusted (validated upstream).

Shapes: ``y`` (n,); risks, linear predictors and weights (k, n), weights may also be
(1, n) and broadcast. Every kernel returns values plus an ``ok`` flag per row.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from threadpoolctl import threadpool_limits

from ._validate import FloatArray

__all__ = ["Design", "auc_rows", "brier_rows", "chunk_rows", "fit_chunk", "fit_rows", "slope_rows"]

BoolArray = NDArray[np.bool_]
IntArray = NDArray[np.intp]
Evaluator = Callable[[IntArray, FloatArray], tuple[FloatArray, FloatArray, FloatArray]]
"""``(rows, beta (k, q)) -> (loglik (k,), score (k, q), information (k, q, q))``."""

STEP_TOL = 1e-8  # largest change of a linear-predictor term at the final Newton step
MAX_HALVINGS = 30
WORK_BYTES = 96 * 2**20  # bytes of (rows x n) work arrays per chunk
WORK_ARRAYS = 10  # (k, n) float arrays alive at once in the heaviest kernel
RANK_TOL = 1e-12  # smallest eigenvalue / largest of the scaled weighted Gram matrix


def chunk_rows(n: int) -> int:
    """Rows of weights handled together so that the work arrays stay near ``WORK_BYTES``."""
    return max(1, WORK_BYTES // (WORK_ARRAYS * 8 * n))


# ----------------------------------------------------------------------------------------
# batched Newton-Raphson
# ----------------------------------------------------------------------------------------


def _solve(info: FloatArray, score: FloatArray) -> tuple[FloatArray, BoolArray]:
    try:
        step = np.linalg.solve(info, score[..., None])[..., 0]
    except np.linalg.LinAlgError:  # one singular member spoils the batched call
        step = np.zeros_like(score)
        for i in range(score.shape[0]):
            try:
                step[i] = np.linalg.solve(info[i], score[i])
            except np.linalg.LinAlgError:
                step[i] = np.nan
    return np.asarray(step, dtype=np.float64), np.isfinite(step).all(axis=1)


def newton(
    evaluate: Evaluator, beta0: FloatArray, scale: FloatArray, max_iter: int
) -> tuple[FloatArray, BoolArray, IntArray, list[str]]:
    """Maximise each row's log-likelihood; lazy step-halving when a step lowers it."""
    B = beta0.shape[0]
    beta, prev_beta, step = beta0.copy(), beta0.copy(), np.zeros_like(beta0)
    prev_ll = np.full(B, -np.inf)
    active, converged = np.ones(B, bool), np.zeros(B, bool)
    iters, halvings = np.zeros(B, np.intp), np.zeros(B, np.intp)
    reasons = [""] * B
    for _ in range(max_iter):
        rows = np.flatnonzero(active)
        if rows.size == 0:
            break
        ll, score, info = evaluate(rows, beta[rows])
        iters[rows] += 1
        worse = ~(ll >= prev_ll[rows] - 1e-10 * (1.0 + np.abs(prev_ll[rows])))
        for r in rows[worse]:  # step-halving: retry half the last step from the last point
            step[r] *= 0.5
            beta[r] = prev_beta[r] + step[r]
            halvings[r] += 1
            if halvings[r] > MAX_HALVINGS:
                active[r] = False
                reasons[r] = "the log-likelihood kept falling after step-halving"
        good = rows[~worse]
        new_step, ok = _solve(info[~worse], score[~worse])
        for r in good[~ok]:
            active[r] = False
            reasons[r] = "the information matrix became singular"
        good, new_step = good[ok], new_step[ok]
        prev_beta[good], prev_ll[good] = beta[good], ll[~worse][ok]
        step[good], halvings[good] = new_step, 0
        beta[good] += new_step
        done = good[np.max(np.abs(new_step) * scale[good], axis=1) <= STEP_TOL]
        converged[done], active[done] = True, False
    for r in np.flatnonzero(active):
        reasons[r] = (
            f"no convergence in {max_iter} Newton steps (separation: some coefficient "
            "grows without bound)"
        )
    beta[~converged] = np.nan
    return beta, converged, iters, reasons


def _logistic_parts(eta: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
    """``p``, ``p(1-p)`` and ``log(1+exp(eta))`` without overflow (numpy exp, in place)."""
    e = np.abs(eta)
    np.negative(e, out=e)
    np.exp(e, out=e)  # exp(-|eta|) in (0, 1]
    d = e + 1.0
    np.reciprocal(d, out=d)  # 1/(1+exp(-|eta|))
    softplus = np.log1p(e)
    softplus += np.maximum(eta, 0.0)
    p = e * d
    np.copyto(p, d, where=eta >= 0)
    e *= d
    e *= d  # p(1-p) = exp(-|eta|)/(1+exp(-|eta|))^2 on both branches
    return p, e, softplus


# ----------------------------------------------------------------------------------------
# logistic regression on a shared design, many weight rows
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Design:
    """The design ``Z = [1, X]`` with its column-pair products ``Z_i * Z_j`` (``i <= j``).

    One matrix product of weights with ``pairs`` gives every row's information matrix.
    """

    Z: FloatArray
    pairs: FloatArray
    iu: tuple[IntArray, IntArray]
    scale: FloatArray  # root-mean-square size of each column

    @classmethod
    def build(cls, Z: FloatArray) -> Design:
        i, j = np.triu_indices(Z.shape[1])
        iu = (i.astype(np.intp), j.astype(np.intp))
        return cls(Z, Z[:, i] * Z[:, j], iu, np.sqrt(np.mean(Z * Z, axis=0)))


def _symmetric(flat: FloatArray, iu: tuple[IntArray, IntArray], q: int) -> FloatArray:
    out = np.empty((flat.shape[0], q, q))
    out[:, iu[0], iu[1]] = flat
    out[:, iu[1], iu[0]] = flat
    return out


def _design_evaluator(design: Design, y: FloatArray, W: FloatArray) -> Evaluator:
    Z, pairs, iu = design.Z, design.pairs, design.iu
    WyZ = W @ (Z * y[:, None])

    def evaluate(rows: IntArray, beta: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        Wk = W if rows.size == W.shape[0] else W[rows]
        eta = beta @ Z.T
        p, v, softplus = _logistic_parts(eta)
        ll = np.einsum("kj,kj->k", WyZ[rows], beta) - np.einsum("kn,kn->k", Wk, softplus)
        p *= Wk
        v *= Wk
        score = WyZ[rows] - p @ Z
        return ll, score, _symmetric(v @ pairs, iu, Z.shape[1])

    return evaluate


def _rank_failures(design: Design, W: FloatArray) -> BoolArray:
    """Rows whose weighted design is rank-deficient (scaled Gram matrix nearly singular)."""
    q = design.Z.shape[1]
    gram = _symmetric(W @ design.pairs, design.iu, q)
    diag = np.sqrt(np.einsum("kii->ki", gram))
    with np.errstate(divide="ignore", invalid="ignore"):
        scaled = gram / diag[:, :, None] / diag[:, None, :]
    bad = ~np.isfinite(scaled).all(axis=(1, 2))
    eig = np.linalg.eigvalsh(np.where(bad[:, None, None], np.eye(q), scaled))
    return bad | (eig[:, 0] <= RANK_TOL * eig[:, -1])


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
        ev = _design_evaluator(design, y, W if fine.size == k else W[fine])
        scale = np.broadcast_to(design.scale, (fine.size, q))
        b, c, it, why = newton(ev, beta0[fine], scale, max_iter)
        coef[fine], conv[fine], iters[fine] = b, c, it
        for r, text in zip(fine, why, strict=True):
            reasons[r] = text
    return coef, conv, iters, reasons


def fit_rows(
    Z: FloatArray, y: FloatArray, W: FloatArray, beta0: FloatArray, max_iter: int
) -> tuple[FloatArray, BoolArray, IntArray, list[str]]:
    """Fit every row of ``W`` in chunks, BLAS held to one thread."""
    design = Design.build(Z)
    step = chunk_rows(y.size)
    parts = []
    with threadpool_limits(limits=1, user_api="blas"):
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


def _slope_evaluator(y: FloatArray, L: FloatArray, W: FloatArray | None) -> Evaluator:
    """Two-parameter logistic ``a + b L`` per row; ``W is None`` means unit weights."""
    wy = y[None, :] if W is None else W * y
    Sy = np.stack([np.broadcast_to(wy.sum(axis=1), (L.shape[0],)), (wy * L).sum(axis=1)], axis=1)

    def evaluate(rows: IntArray, beta: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        Lk = L if rows.size == L.shape[0] else L[rows]
        eta = Lk * beta[:, 1:2]
        eta += beta[:, 0:1]
        p, v, softplus = _logistic_parts(eta)
        if W is not None:
            Wk = W if W.shape[0] == 1 else W[rows]
            p *= Wk
            v *= Wk
            softplus *= Wk
        ll = np.einsum("kj,kj->k", Sy[rows], beta) - softplus.sum(axis=1)
        score = Sy[rows] - np.stack([p.sum(axis=1), np.einsum("kn,kn->k", p, Lk)], axis=1)
        s0, s1 = v.sum(axis=1), np.einsum("kn,kn->k", v, Lk)
        v *= Lk
        s2 = np.einsum("kn,kn->k", v, Lk)
        info = np.stack([np.stack([s0, s1], axis=1), np.stack([s1, s2], axis=1)], axis=1)
        return ll, score, info

    return evaluate


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
            rms = np.sqrt(np.einsum("kn,kn->k", Lr, Lr) / Lr.shape[1])
            scale = np.stack([np.ones(rows.size), rms], axis=1)
            beta0 = np.tile([0.0, 1.0], (rows.size, 1))
            W_use = None if _unit(W) else (W if W.shape[0] == 1 else W[rows])
            b, c, _, why = newton(_slope_evaluator(y, Lr, W_use), beta0, scale, max_iter)
            slope[rows], ok[rows] = b[:, 1], c
            for r, text in zip(rows, why, strict=True):
                reasons[r] = text
        out.append((slope, ok, reasons))
    return out
