"""Batched weighted measures behind :mod:`calcbuilder.stats.batch` (inputs trusted).

Shapes: ``y`` (n,); risks and linear predictors (k, n); weights (k, n) or (1, n),
broadcast. Each kernel returns values and an ``ok`` flag per row (and, for the
slope, a reason per failed row).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ._batch_core import (
    BoolArray,
    IntArray,
    block_width,
    newton,
    signed_parts,
    softplus_sum,
    symmetric,
)
from ._validate import FloatArray

__all__ = ["auc_rows", "brier_rows", "slope_rows"]


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
        width = block_width(rows.size)
        for s in range(0, self.L.shape[1], width):
            Lb = self.L[:, s : s + width] if every else self.L[rows, s : s + width]
            Ls = self.signed[:, s : s + width] if every else self.signed[rows, s : s + width]
            q, v = signed_parts(self._t(rows, beta, s, width))
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
        return score, symmetric(info, (np.array([0, 0, 1]), np.array([0, 1, 1])), 2)

    def loglik(self, rows: IntArray, beta: FloatArray) -> FloatArray:
        ll = np.zeros(rows.size)
        width = block_width(rows.size)
        for s in range(0, self.L.shape[1], width):
            t = self._t(rows, beta, s, width)
            np.negative(t, out=t)
            ll -= softplus_sum(t, self._w(rows, s, width))
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
