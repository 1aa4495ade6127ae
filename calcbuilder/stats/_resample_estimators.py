"""Loops and arithmetic behind :mod:`calcbuilder.stats.resampling` (inputs already validated)."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ._batch_core import IntArray
from ._batch_measures import auc_rows
from ._resample_engine import FastEngine, Metric, Progress, SlowEngine, bootstrap_counts
from ._validate import FloatArray
from .errors import StatsInputError

__all__ = [
    "CVEstimate",
    "Efron632Estimate",
    "OptimismEstimate",
    "ResampleFailure",
    "boot_loop",
    "combine_632",
    "cv_loop",
    "efron_632plus_values",
    "oob_loop",
    "optimism_estimates",
]

Engine = FastEngine | SlowEngine


@dataclass(frozen=True)
class ResampleFailure:
    """A failed resample (cross-validation: fold ``repeat * k + fold``) and why it failed."""

    resample: int
    reason: str


@dataclass(frozen=True)
class OptimismEstimate:
    """Harrell's optimism correction for one metric (see :func:`bootstrap_optimism`)."""

    metric: str
    apparent: float
    bootstrap: float
    test: float
    optimism: float
    corrected: float
    n_used: int


@dataclass(frozen=True)
class Efron632Estimate:
    """Efron's .632 and .632+ estimates for one metric, on the metric's own scale."""

    metric: str
    apparent: float
    out_of_bag: float
    no_information: float
    relative_overfitting: float
    weight: float
    estimate_632: float
    estimate_632plus: float
    n_used: int


@dataclass(frozen=True)
class CVEstimate:
    """Cross-validated performance for one metric: pooled and per-fold summaries."""

    metric: str
    pooled: float | None
    fold_mean: float | None
    fold_sd: float | None
    folds_used: int
    repeats_used: int


def _all_failed(what: str, failures: Sequence[ResampleFailure]) -> StatsInputError:
    first = failures[0].reason if failures else "no reason recorded"
    return StatsInputError(f"every resample failed for {what}; the first failure: {first}")


def boot_loop(
    engine: Engine,
    y: FloatArray,
    mets: Sequence[Metric],
    B: int,
    *,
    rng: np.random.Generator,
    bar: Progress,
) -> tuple[FloatArray, FloatArray, list[ResampleFailure]]:
    """Each resample model's metrics on its resample and on the original data, (B, metrics)."""
    boot, test = np.full((B, len(mets)), np.nan), np.full((B, len(mets)), np.nan)
    failures: list[ResampleFailure] = []
    ones = np.ones((1, y.size))
    for s in range(0, B, engine.chunk):
        W = bootstrap_counts(rng, y.size, min(engine.chunk, B - s))
        pred = engine.predict(W, bar, s)
        failures += [ResampleFailure(s + i, r) for i, r in enumerate(pred.reasons) if r]
        for rows, R, L in pred.pieces(engine.piece):
            for j, m in enumerate(mets):
                (vb, okb), (vt, okt) = m.rows(y, R, L, [W[rows], ones])
                both = okb & okt
                boot[s + rows[both], j], test[s + rows[both], j] = vb[both], vt[both]
                failures += [
                    ResampleFailure(int(s + r), f"{m.name} is undefined on the {where}")
                    for r, where in zip(
                        rows[~both],
                        np.where(okb[~both], "original data", "bootstrap sample"),
                        strict=True,
                    )
                ]
    failures.sort(key=lambda f: f.resample)
    return boot, test, failures


def optimism_estimates(
    mets: Sequence[Metric],
    apparent: Sequence[float],
    boot: FloatArray,
    test: FloatArray,
    failures: Sequence[ResampleFailure],
) -> tuple[OptimismEstimate, ...]:
    """Average the resamples that produced both values of a metric."""
    out = []
    for j, m in enumerate(mets):
        good = np.isfinite(boot[:, j]) & np.isfinite(test[:, j])
        if not good.any():
            raise _all_failed(f"metric {m.name}", failures)
        b, t = boot[good, j], test[good, j]
        opt = float(np.mean(b - t))
        out.append(
            OptimismEstimate(
                m.name,
                apparent[j],
                float(b.mean()),
                float(t.mean()),
                opt,
                apparent[j] - opt,
                int(good.sum()),
            )
        )
    return tuple(out)


# ----------------------------------------------------------------------------------------
# Efron's .632 / .632+
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class OOBResult:
    """Out-of-bag sums over the successful resamples."""

    aucs: FloatArray
    loss_sum: FloatArray
    oob_count: FloatArray
    n_used: int
    failures: list[ResampleFailure]

    @property
    def never_out(self) -> int:
        return int(np.sum(self.oob_count == 0))


def oob_loop(
    engine: Engine,
    y: FloatArray,
    B: int,
    *,
    rng: np.random.Generator,
    names: Sequence[str],
    bar: Progress,
) -> OOBResult:
    """Refit on B bootstrap resamples; score each on its out-of-bag rows."""
    n = y.size
    loss_sum, oob_count = np.zeros(n), np.zeros(n)
    aucs: list[float] = []
    failures: list[ResampleFailure] = []
    used = 0
    for s in range(0, B, engine.chunk):
        W = bootstrap_counts(rng, n, min(engine.chunk, B - s))
        pred = engine.predict(W, bar, s)
        failures += [ResampleFailure(s + i, r) for i, r in enumerate(pred.reasons) if r]
        for rows, R, _ in pred.pieces(engine.piece):
            out = (W[rows] == 0).astype(np.float64)
            good = out.sum(axis=1) > 0
            if "auc" in names:
                ((values, ok),) = auc_rows(y, R, [out])
                good &= ok
                aucs.extend(values[good].tolist())
            failures += [
                ResampleFailure(int(s + r), "its out-of-bag rows hold one outcome class (or none)")
                for r in rows[~good]
            ]
            loss = R[good] - y
            loss *= loss
            loss *= out[good]
            loss_sum += loss.sum(axis=0)
            oob_count += out[good].sum(axis=0)
            used += int(good.sum())
    failures.sort(key=lambda f: f.resample)
    if used == 0:
        raise _all_failed("the .632 estimators", failures)
    return OOBResult(np.asarray(aucs), loss_sum, oob_count, used, failures)


def combine_632(err: float, err1: float, gamma: float) -> tuple[float, float, float, float]:
    """``(R, w, Err.632, Err.632+)`` from apparent, out-of-bag and no-information losses."""
    err1p = min(err1, gamma)
    rel = (err1p - err) / (gamma - err) if (err1p > err and gamma > err) else 0.0
    rel = min(max(rel, 0.0), 1.0)
    w = 0.632 / (1.0 - 0.368 * rel)
    return rel, w, 0.368 * err + 0.632 * err1, (1.0 - w) * err + w * err1p


def efron_632plus_values(
    apparent: dict[str, float], oob: OOBResult, y: FloatArray, p_app: FloatArray
) -> tuple[Efron632Estimate, ...]:
    """Brier (a loss) and AUC (loss 1 - AUC) through :func:`combine_632`, on their own scale."""
    out = []
    for name, app in apparent.items():
        if name == "brier":
            seen = oob.oob_count > 0
            err1 = float(np.mean(oob.loss_sum[seen] / oob.oob_count[seen]))
            ybar, pbar = float(y.mean()), float(p_app.mean())
            gamma = ybar - 2 * ybar * pbar + float(np.mean(p_app**2))
            rel, w, e632, e632p = combine_632(app, err1, gamma)
            out.append(Efron632Estimate(name, app, err1, gamma, rel, w, e632, e632p, oob.n_used))
        else:
            err1 = 1.0 - float(np.mean(oob.aucs))
            rel, w, e632, e632p = combine_632(1.0 - app, err1, 0.5)
            out.append(
                Efron632Estimate(
                    name, app, 1.0 - err1, 0.5, rel, w, 1.0 - e632, 1.0 - e632p, oob.n_used
                )
            )
    return tuple(out)


# ----------------------------------------------------------------------------------------
# k-fold cross-validation
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class CVResult:
    """What :func:`cv_loop` hands back to :func:`cross_validate`."""

    estimates: tuple[CVEstimate, ...]
    out_of_fold: FloatArray
    fold_values: FloatArray
    failures: list[ResampleFailure]


def fold_labels(rng: np.random.Generator, y: FloatArray, k: int, stratify: bool) -> IntArray:
    """Fold of each row: permuted rows (per class when stratified) dealt to folds in turn."""
    if stratify:
        order = np.concatenate(
            [rng.permutation(np.flatnonzero(y == 1)), rng.permutation(np.flatnonzero(y == 0))]
        )
    else:
        order = rng.permutation(y.size)
    labels = np.empty(y.size, np.intp)
    labels[order] = np.arange(y.size) % k
    return labels


def _summaries(
    m: Metric, y: FloatArray, folds: FloatArray, oof: FloatArray, oof_lp: FloatArray
) -> CVEstimate:
    vals = folds[np.isfinite(folds)]
    pooled, used = None, 0
    if oof.shape[0]:
        ((v, ok),) = m.rows(y, oof, oof_lp, [np.ones((1, y.size))])
        used = int(ok.sum())
        pooled = float(np.mean(v[ok])) if used else None
    return CVEstimate(
        m.name,
        pooled,
        float(vals.mean()) if vals.size else None,
        float(vals.std(ddof=1)) if vals.size > 1 else None,
        int(vals.size),
        used,
    )


def cv_loop(
    engine: Engine,
    y: FloatArray,
    mets: Sequence[Metric],
    *,
    k: int,
    repeats: int,
    stratify: bool,
    rng: np.random.Generator,
    bar: Progress,
) -> CVResult:
    """Fit every fold of every repeat (as 0/1 training weights) and score the held-out rows."""
    n, total = y.size, k * repeats
    labels = np.stack([fold_labels(rng, y, k, stratify) for _ in range(repeats)])
    oof, oof_lp = np.full((repeats, n), np.nan), np.full((repeats, n), np.nan)
    fold_values = np.full((total, len(mets)), np.nan)
    failures: list[ResampleFailure] = []
    for s in range(0, total, engine.chunk):
        js = np.arange(s, min(s + engine.chunk, total))
        held = labels[js // k] == (js % k)[:, None]
        pred = engine.predict((~held).astype(np.float64), bar, s)
        failures += [ResampleFailure(s + i, r) for i, r in enumerate(pred.reasons) if r]
        for rows, R, L in pred.pieces(engine.piece):
            for i, r in enumerate(rows):
                oof[js[r] // k, held[r]] = R[i, held[r]]
                oof_lp[js[r] // k, held[r]] = L[i, held[r]]
            for j, m in enumerate(mets):
                ((v, ok),) = m.rows(y, R, L, [held[rows].astype(float)])
                fold_values[js[rows[ok]], j] = v[ok]
                failures += [
                    ResampleFailure(int(js[r]), f"{m.name} is undefined on the held-out fold")
                    for r in rows[~ok]
                ]
    complete = np.isfinite(oof).all(axis=1)
    estimates = tuple(
        _summaries(m, y, fold_values[:, j], oof[complete], oof_lp[complete])
        for j, m in enumerate(mets)
    )
    failures.sort(key=lambda f: f.resample)
    return CVResult(estimates, oof, fold_values, failures)
