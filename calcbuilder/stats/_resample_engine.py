"""Machinery shared by the resampling estimators: procedures, metrics, engines, seeds.

A resample is a row of frequency weights over the original rows (bootstrap
counts, a training-fold indicator). An engine turns a chunk of such rows into
predicted risks and linear predictors for *every* original row; the estimators
then evaluate metrics under other weight rows (the bootstrap counts, ones for
the original data, out-of-bag or held-out indicators).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ._batch_core import BoolArray, Design, IntArray, chunk_rows, fit_chunk, fit_rows_per_chunk
from ._batch_measures import auc_rows, brier_rows, slope_rows
from ._validate import FloatArray, ProgressCallback, as_risk, report_progress
from .batch import design_matrix
from .errors import StatsInputError
from .logistic import fit_logistic

__all__ = ["FitProcedure", "Metric", "PlainLogistic", "Predictor"]

Predictor = Callable[[Any], ArrayLike]
"""``predict(X) -> risk``: predicted risks for the rows of ``X``."""
FitProcedure = Callable[[Any, FloatArray, FloatArray], Predictor]
"""``fit(X, y, weights) -> predict``: the whole modelling procedure on weighted data."""
RowsFunction = Callable[
    [FloatArray, FloatArray, FloatArray, Sequence[FloatArray]], list[tuple[FloatArray, BoolArray]]
]
"""``(y, risk (k, n), lp (k, n), weight matrices) -> [(values (k,), ok (k,)) per matrix]``."""


@dataclass(frozen=True)
class PlainLogistic:
    """The fast path: main-effects logistic regression on the fixed numeric design ``X``.

    Nothing is chosen from the data except the coefficients, so every resample
    is refitted by the batched Newton fitter of :mod:`calcbuilder.stats.batch`.
    """

    max_iter: int = 50


@dataclass(frozen=True)
class Metric:
    """A performance measure evaluated for many (risk, weights) rows at once.

    Use the names ``"auc"``, ``"brier"`` and ``"calibration_slope"`` for the
    built-in batched measures, or :meth:`from_scalar` to wrap any function
    ``f(y, risk, weights) -> float`` (evaluated row by row).
    """

    name: str
    rows: RowsFunction

    @classmethod
    def from_scalar(
        cls, name: str, func: Callable[[FloatArray, FloatArray, FloatArray], float]
    ) -> Metric:
        """Wrap ``func(y, risk, weights)``; a ``ValueError`` it raises marks that row failed."""

        def rows(
            y: FloatArray, R: FloatArray, L: FloatArray, Ws: Sequence[FloatArray]
        ) -> list[tuple[FloatArray, BoolArray]]:
            del L
            out = []
            for W in Ws:
                Wb = np.broadcast_to(W, R.shape)
                vals, ok = np.full(R.shape[0], np.nan), np.zeros(R.shape[0], bool)
                for i in range(R.shape[0]):
                    try:
                        vals[i] = float(func(y, R[i], Wb[i]))
                    except (ValueError, ArithmeticError):
                        continue
                    ok[i] = bool(np.isfinite(vals[i]))
                out.append((vals, ok))
            return out

        return cls(name, rows)


def _auc(y: FloatArray, R: FloatArray, L: FloatArray, Ws: Sequence[FloatArray]) -> Any:
    del L
    return auc_rows(y, R, Ws)


def _brier(y: FloatArray, R: FloatArray, L: FloatArray, Ws: Sequence[FloatArray]) -> Any:
    del L
    return [brier_rows(y, R, W) for W in Ws]


def _slope(y: FloatArray, R: FloatArray, L: FloatArray, Ws: Sequence[FloatArray]) -> Any:
    del R
    return [(v, ok) for v, ok, _ in slope_rows(y, L, Ws)]


BUILT_IN = {
    "auc": Metric("auc", _auc),
    "brier": Metric("brier", _brier),
    "calibration_slope": Metric("calibration_slope", _slope),
}


def resolve_metrics(
    metrics: Sequence[str | Metric] | str, allowed: Sequence[str] = ()
) -> list[Metric]:
    """Built-in names or :class:`Metric` objects; unknown, duplicate or empty lists are refused."""
    items = [metrics] if isinstance(metrics, str | Metric) else list(metrics)
    names = sorted(allowed or BUILT_IN)
    out: list[Metric] = []
    for item in items:
        if isinstance(item, Metric) and not allowed:
            out.append(item)
        elif isinstance(item, str) and item in names:
            out.append(BUILT_IN[item])
        else:
            raise StatsInputError(
                f"metrics must be names from {names}"
                + ("" if allowed else " or Metric objects")
                + f"; got {item!r}"
            )
    if not out:
        raise StatsInputError(f"metrics must name at least one measure; got {items!r}")
    seen = [m.name for m in out]
    if len(set(seen)) != len(seen):
        raise StatsInputError(f"metrics must not repeat a name; got {seen}")
    return out


def generator(seed: int | np.random.Generator | None) -> tuple[np.random.Generator, int | None]:
    """A generator and the seed to record.

    For ``None`` a fresh seed is drawn from operating-system entropy and recorded; it
    stays below 2**53 so that JSON (and canonical JSON) holds it exactly.
    """
    if isinstance(seed, np.random.Generator):
        return seed, None
    if seed is None:
        seed = int(np.random.SeedSequence().generate_state(1, np.uint64)[0] >> np.uint64(11))
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise StatsInputError(
            f"seed must be a non-negative int, a numpy Generator or None; got {seed!r}"
        )
    return np.random.default_rng(int(seed)), int(seed)


def check_count(value: object, name: str, minimum: int) -> int:
    """A whole number at least ``minimum`` (booleans refused)."""
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < minimum:
        raise StatsInputError(f"{name} must be an integer >= {minimum}; got {value!r}")
    return int(value)


def bootstrap_counts(rng: np.random.Generator, n: int, k: int) -> FloatArray:
    """``k`` rows of bootstrap counts: one ``rng.integers(0, n, n)`` per row, then bincount."""
    counts = np.empty((k, n))
    for i in range(k):
        counts[i] = np.bincount(rng.integers(0, n, n), minlength=n)
    return counts


class Progress:
    """Counts finished units and forwards them to the caller's callback (which may cancel)."""

    def __init__(self, callback: ProgressCallback | None, total: int) -> None:
        self.callback, self.total, self.done = callback, total, 0
        report_progress(callback, 0, total)

    def tick(self, k: int = 1) -> None:
        self.done += k
        report_progress(self.callback, self.done, self.total)


@dataclass(frozen=True)
class Predictions:
    """Predictions for every original row, one row per weight row, made on demand.

    The fast path keeps only coefficients (risks for a few rows at a time keep
    memory bounded); the slow path keeps the procedure's risks.
    """

    ok: BoolArray
    reasons: list[str]
    risk: FloatArray | None = None
    lp: FloatArray | None = None
    coef: FloatArray | None = None
    Z: FloatArray | None = None

    def take(self, rows: IntArray) -> tuple[FloatArray, FloatArray]:
        """Risks and linear predictors (len(rows), n) of the given weight rows."""
        if self.coef is None or self.Z is None:
            assert self.risk is not None
            assert self.lp is not None
            return self.risk[rows], self.lp[rows]
        lp = self.coef[rows] @ self.Z.T
        with np.errstate(over="ignore"):
            risk = np.exp(-lp)
        risk += 1.0
        np.reciprocal(risk, out=risk)
        return risk, lp

    def pieces(self, size: int) -> Iterator[tuple[IntArray, FloatArray, FloatArray]]:
        """``(rows, risk, lp)`` for the successful rows, ``size`` rows at a time."""
        good = np.flatnonzero(self.ok)
        for s in range(0, good.size, size):
            rows = good[s : s + size]
            yield (rows, *self.take(rows))


class FastEngine:
    """Plain logistic regression: batched Newton fits of a whole chunk of weight rows."""

    def __init__(self, X: ArrayLike, y: FloatArray, procedure: PlainLogistic) -> None:
        self.y = y
        self.design = Design.build(design_matrix(X, y.size), y)
        self.Z = self.design.Z
        self.start = fit_logistic(self.Z[:, 1:], y).coef  # clear errors on the original data
        self.max_iter = check_count(procedure.max_iter, "PlainLogistic.max_iter", 1)
        self.chunk = fit_rows_per_chunk(y.size)
        self.piece = chunk_rows(y.size)

    def predict(self, W: FloatArray, progress: Progress | None, first: int = 0) -> Predictions:
        del first  # resample numbers only appear in the slow path's messages
        beta0 = np.broadcast_to(self.start, (W.shape[0], self.Z.shape[1]))
        coef, ok, _, reasons = fit_chunk(self.design, self.y, W, beta0, self.max_iter)
        if progress is not None:
            progress.tick(W.shape[0])
        return Predictions(ok, reasons, coef=coef, Z=self.Z)

    def apparent(self) -> Predictions:
        pred = self.predict(np.ones((1, self.y.size)), None)
        if not pred.ok[0]:  # fit_logistic succeeded, so this would be a defect: say so
            raise StatsInputError(
                f"the logistic fit to the original data failed: {pred.reasons[0]}"
            )
        return pred


class SlowEngine:
    """A user procedure ``fit(X, y, weights) -> predict``, run once per weight row."""

    def __init__(self, X: Any, y: FloatArray, fit: FitProcedure) -> None:
        n = y.size
        if hasattr(X, "__len__") and len(X) != n:
            raise StatsInputError(f"X must have the same number of rows as y ({n}); got {len(X)}")
        self.X, self.y, self.fit = X, y, fit
        self.chunk = self.piece = chunk_rows(n)

    def _checked(self, predict: Any, what: str) -> Predictor:
        if not callable(predict):
            raise StatsInputError(
                f"procedure must return a predict(X) function; got {type(predict).__name__} {what}"
            )
        return predict

    def _risk(self, raw: ArrayLike, what: str) -> FloatArray:
        return as_risk(raw, self.y.size, f"risk predicted by the procedure {what}")

    def predict(self, W: FloatArray, progress: Progress | None, first: int = 0) -> Predictions:
        k, n = W.shape
        risk, ok, reasons = np.full((k, n), 0.5), np.zeros(k, bool), [""] * k
        for i in range(k):
            what = f"(resample {first + i})"
            fitted, reasons[i] = _attempt(self.fit, self.X, self.y, W[i].copy())
            if not reasons[i]:
                raw, reasons[i] = _attempt(self._checked(fitted, what), self.X)
            if not reasons[i]:
                risk[i], ok[i] = self._risk(raw, what), True
            if progress is not None:
                progress.tick()
        return Predictions(ok, reasons, risk=risk, lp=_logit(risk))

    def apparent(self) -> Predictions:
        fitted, reason = _attempt(self.fit, self.X, self.y, np.ones(self.y.size))
        if not reason:
            raw, reason = _attempt(self._checked(fitted, "(original data)"), self.X)
        if reason:
            raise StatsInputError(f"{reason} (on the original data)")
        risk = self._risk(raw, "(original data)")[None, :]
        return Predictions(np.ones(1, bool), [""], risk=risk, lp=_logit(risk))


def _attempt(call: Callable[..., Any], *args: Any) -> tuple[Any, str]:
    """Run user code; a ``ValueError`` or ``ArithmeticError`` becomes a failure reason."""
    try:
        return call(*args), ""
    except (ValueError, ArithmeticError) as exc:
        return None, f"the procedure failed: {type(exc).__name__}: {exc}"


def _logit(risk: FloatArray) -> FloatArray:
    with np.errstate(divide="ignore"):
        return np.asarray(np.log(risk) - np.log1p(-risk), dtype=np.float64)


def make_engine(procedure: object, X: Any, y: FloatArray) -> FastEngine | SlowEngine:
    """The engine for ``procedure``: :class:`PlainLogistic` or a callable ``fit``."""
    if isinstance(procedure, PlainLogistic):
        return FastEngine(X, y, procedure)
    if callable(procedure):
        return SlowEngine(X, y, procedure)
    raise StatsInputError(
        "procedure must be PlainLogistic() or a callable fit(X, y, weights) -> predict; "
        f"got {type(procedure).__name__}"
    )


def apparent_values(metrics: Sequence[Metric], y: FloatArray, pred: Predictions) -> list[float]:
    """Each metric of the original-data model on the original data; a failure is an error."""
    out = []
    for m in metrics:
        ((value, ok),) = m.rows(y, *pred.take(np.zeros(1, np.intp)), [np.ones((1, y.size))])
        if not ok[0]:
            raise StatsInputError(
                f"metric {m.name} cannot be computed for the model fitted to the original data "
                "(e.g. its risks separate the outcome perfectly, or are exactly 0 or 1)"
            )
        out.append(float(value[0]))
    return out
