"""Internal validation by resampling: bootstrap optimism, Efron's .632/.632+, k-fold CV.

The whole modelling procedure is refitted on every resample, given as frequency
weights over the original rows (a bootstrap count, or 1/0 for a training fold).
Two kinds of procedure:

* :class:`PlainLogistic` -- main-effects logistic regression on a fixed numeric
  design ``X``. Resamples are fitted together by batched Newton steps and the
  measures are batched (one sort per refitted model serves every weighting).
* any callable ``fit(X, y, weights) -> predict`` with ``predict(X) -> risk``,
  run once per resample. ``X`` is passed through untouched (any table type).
  The procedure must treat ``weights`` as frequency weights -- a weight of 2 is
  a duplicated row, 0 an absent row -- in *every* data-driven step (variable
  selection, knot placement, ...). It signals a failed fit by raising a
  ``ValueError`` (e.g. :class:`ConvergenceError`) or an ``ArithmeticError``.

Resample counts (reproducible): ``seed`` makes ``numpy.random.default_rng(seed)``
(a ``Generator`` may be passed instead; with ``None`` fresh entropy is drawn and
recorded as ``seed``). Each bootstrap resample is one ``rng.integers(0, n, n)``
call, in resample order, turned into counts by ``numpy.bincount``.

Failed resamples (the fit failed, or a measure is undefined on it) are left out
of the averages, counted in ``n_failed`` and listed in ``failures`` with the
reason; per measure, ``n_used`` / ``folds_used`` says how many values were
averaged. Failed resamples are often the most overfitted ones (e.g. separation),
so leaving them out can understate optimism: show ``n_failed`` with the
estimates. If every resample fails, :class:`StatsInputError` is raised. BLAS is
held to one thread while resampling.

References
----------
.. [1] Harrell FE Jr, Lee KL, Mark DB. Multivariable prognostic models. Stat Med 1996;15:361-387.
.. [2] Efron B, Gong G. A leisurely look at the bootstrap, the jackknife, and
       cross-validation. Am Stat 1983;37:36-48.
.. [3] Efron B, Tibshirani R. Improvements on cross-validation: the .632+ bootstrap
       method. J Am Stat Assoc 1997;92:548-560.
.. [4] Steyerberg EW, Harrell FE Jr, Borsboom GJ, et al. Internal validation of predictive
       models. J Clin Epidemiol 2001;54:774-781.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ._batch_core import blas_threads
from ._resample_engine import (
    FitProcedure,
    Metric,
    PlainLogistic,
    Predictor,
    Progress,
    apparent_values,
    check_count,
    generator,
    make_engine,
    resolve_metrics,
)
from ._resample_estimators import (
    CVEstimate,
    Efron632Estimate,
    OptimismEstimate,
    ResampleFailure,
    boot_loop,
    cv_loop,
    efron_632plus_values,
    oob_loop,
    optimism_estimates,
)
from ._validate import FloatArray, ProgressCallback, as_outcome, require_both_classes
from .errors import StatsInputError

__all__ = [
    "BootstrapValidation",
    "CVEstimate",
    "CrossValidation",
    "Efron632Estimate",
    "Efron632Validation",
    "FitProcedure",
    "Metric",
    "OptimismEstimate",
    "PlainLogistic",
    "Predictor",
    "ResampleFailure",
    "bootstrap_optimism",
    "cross_validate",
    "efron_632plus",
]

DEFAULT_METRICS = ("auc", "brier", "calibration_slope")
RESAMPLING = "rng.integers(0, n, n) per resample, counted with numpy.bincount"


def _lookup(items: Sequence[Any], metric: str) -> Any:
    for item in items:
        if item.metric == metric:
            return item
    raise KeyError(f"no estimate for metric {metric!r}; have {[i.metric for i in items]}")


@dataclass(frozen=True)
class BootstrapValidation:
    """Result of :func:`bootstrap_optimism`; ``result["auc"]`` gives one :class:`OptimismEstimate`.

    ``bootstrap_values`` and ``test_values`` (n_boot, metrics) hold each
    resample's performance on its bootstrap sample and on the original data
    (``nan`` for the resamples listed in ``failures``).
    """

    estimates: tuple[OptimismEstimate, ...]
    n_boot: int
    n_failed: int
    failures: tuple[ResampleFailure, ...]
    seed: int | None
    bootstrap_values: FloatArray = field(repr=False)
    test_values: FloatArray = field(repr=False)
    resampling: str = RESAMPLING

    def __getitem__(self, metric: str) -> OptimismEstimate:
        return _lookup(self.estimates, metric)


@dataclass(frozen=True)
class Efron632Validation:
    """Result of :func:`efron_632plus`; ``result["brier"]`` gives one :class:`Efron632Estimate`.

    ``n_never_out_of_bag`` counts original rows that were in every successful
    resample; they do not enter the leave-one-out bootstrap Brier.
    """

    estimates: tuple[Efron632Estimate, ...]
    n_boot: int
    n_failed: int
    failures: tuple[ResampleFailure, ...]
    seed: int | None
    n_never_out_of_bag: int
    resampling: str = RESAMPLING

    def __getitem__(self, metric: str) -> Efron632Estimate:
        return _lookup(self.estimates, metric)


@dataclass(frozen=True)
class CrossValidation:
    """Result of :func:`cross_validate`; ``result["auc"]`` gives one :class:`CVEstimate`.

    ``out_of_fold`` (repeats, n) holds each row's risk predicted by the model
    that did not see it (``nan`` where that fold's fit failed); ``fold_values``
    (repeats * k, metrics) the per-fold measures, fold ``f`` of repeat ``r`` at
    row ``r * k + f``.
    """

    estimates: tuple[CVEstimate, ...]
    k: int
    repeats: int
    stratified: bool
    n_failed: int
    failures: tuple[ResampleFailure, ...]
    seed: int | None
    out_of_fold: FloatArray = field(repr=False)
    fold_values: FloatArray = field(repr=False)

    def __getitem__(self, metric: str) -> CVEstimate:
        return _lookup(self.estimates, metric)


def _setup(X: Any, y: ArrayLike, procedure: PlainLogistic | FitProcedure) -> tuple[FloatArray, Any]:
    yv = as_outcome(y)
    require_both_classes(yv, np.ones(yv.size), "internal validation")
    return yv, make_engine(procedure, X, yv)


def bootstrap_optimism(
    X: Any,
    y: ArrayLike,
    procedure: PlainLogistic | FitProcedure,
    metrics: Sequence[str | Metric] = DEFAULT_METRICS,
    *,
    n_boot: int = 200,
    seed: int | np.random.Generator | None = None,
    progress: ProgressCallback | None = None,
) -> BootstrapValidation:
    """Harrell's bootstrap optimism correction of apparent performance [1]_ [2]_ [3]_.

    Parameters
    ----------
    X : array (n, p) for :class:`PlainLogistic`, anything the procedure accepts otherwise
        Predictors of the original data.
    y : array (n,)
        Outcome coded 0/1.
    procedure : PlainLogistic or callable
        The whole modelling procedure (see the module notes).
    metrics : sequence of str or Metric
        ``"auc"``, ``"brier"``, ``"calibration_slope"`` and/or :class:`Metric` objects.
    n_boot : int
        Number of bootstrap resamples B (200 or more is usual).
    seed : int, numpy Generator or None
        Randomness (see the module notes); the seed used is recorded in the result.
    progress : callable, optional
        ``progress(done, total)`` after each batch of resamples; returning
        ``False`` cancels with :class:`CancelledError`.

    Returns
    -------
    BootstrapValidation
        Per metric: ``apparent`` (original model on original data), ``bootstrap``
        (mean of each resample model on its own resample), ``test`` (mean of each
        resample model on the original data), ``optimism = mean(bootstrap - test)``
        and ``corrected = apparent - optimism``.

    Notes
    -----
    Optimism is signed as in methods.md 6.1: it is negative for the Brier score
    (lower is better), so the corrected Brier is larger than the apparent one.
    The corrected calibration slope estimates the uniform shrinkage factor.
    Steps (methods.md 6.1): fit on the original data, apparent performance; per
    resample, refit the whole procedure, score it on the resample and on the
    original data; optimism = mean difference; corrected = apparent - optimism.

    References
    ----------
    .. [1] Harrell FE Jr, Lee KL, Mark DB. Multivariable prognostic models. Stat Med
           1996;15:361-387.
    .. [2] Efron B, Gong G. A leisurely look at the bootstrap, the jackknife, and
           cross-validation. Am Stat 1983;37:36-48.
    .. [3] Steyerberg EW, Harrell FE Jr, Borsboom GJ, et al. Internal validation of
           predictive models. J Clin Epidemiol 2001;54:774-781.

    Examples
    --------
    >>> X = [[0.0], [1.0], [2.0], [3.0], [4.0], [5.0], [6.0], [7.0]]
    >>> res = bootstrap_optimism(X, [0, 1, 0, 0, 1, 0, 1, 1], PlainLogistic(), ["brier"],
    ...                          n_boot=20, seed=1)
    >>> res["brier"].corrected > res["brier"].apparent
    True
    """
    mets = resolve_metrics(metrics)
    B = check_count(n_boot, "n_boot", 1)
    rng, used_seed = generator(seed)
    yv, engine = _setup(X, y, procedure)
    apparent = apparent_values(mets, yv, engine.apparent())
    with blas_threads():
        boot, test, failures = boot_loop(engine, yv, mets, B, rng=rng, bar=Progress(progress, B))
    estimates = optimism_estimates(mets, apparent, boot, test, failures)
    return BootstrapValidation(
        estimates, B, len({f.resample for f in failures}), tuple(failures), used_seed, boot, test
    )


def efron_632plus(
    X: Any,
    y: ArrayLike,
    procedure: PlainLogistic | FitProcedure,
    metrics: Sequence[str] = ("brier", "auc"),
    *,
    n_boot: int = 200,
    seed: int | np.random.Generator | None = None,
    progress: ProgressCallback | None = None,
) -> Efron632Validation:
    """Efron's .632 and .632+ bootstrap estimates of the Brier score and the AUC [1]_ [2]_.

    Parameters are those of :func:`bootstrap_optimism`; ``metrics`` may name
    ``"brier"`` and ``"auc"`` only.

    Returns
    -------
    Efron632Validation
        Per metric, on the metric's own scale (AUC, or Brier): ``apparent``,
        ``out_of_bag``, ``no_information``, ``relative_overfitting`` (R),
        ``weight`` (w), ``estimate_632`` and ``estimate_632plus``.

    Notes
    -----
    Losses: Brier, and 1 - AUC. The out-of-bag loss Err(1) of the Brier score
    is Efron's leave-one-out bootstrap: each row is scored only by models whose
    resample left it out, averaged per row, then over rows. The AUC is not a
    per-row loss: Err(1) is 1 - the mean over resamples of the AUC on that
    resample's out-of-bag rows (a resample whose out-of-bag rows hold one
    outcome class fails). No-information loss gamma: Brier
    ``ybar - 2 ybar pbar + mean(p^2)`` (apparent risks p), AUC 0.5. Then
    ``Err.632 = 0.368 err + 0.632 Err(1)``, ``R = (min(Err(1), gamma) - err) /
    (gamma - err)`` when both differences are positive (else 0, clipped to
    [0, 1]), ``w = 0.632 / (1 - 0.368 R)``, ``Err.632+ = (1 - w) err + w
    min(Err(1), gamma)`` (methods.md 6.2).
    """
    mets = resolve_metrics(metrics, allowed=("auc", "brier"))
    B = check_count(n_boot, "n_boot", 1)
    rng, used_seed = generator(seed)
    yv, engine = _setup(X, y, procedure)
    app = engine.apparent()
    apparent = dict(zip([m.name for m in mets], apparent_values(mets, yv, app), strict=True))
    with blas_threads():
        oob = oob_loop(
            engine, yv, B, rng=rng, names=[m.name for m in mets], bar=Progress(progress, B)
        )
    estimates = efron_632plus_values(apparent, oob, yv, app.take(np.zeros(1, np.intp))[0][0])
    return Efron632Validation(
        estimates,
        B,
        len({f.resample for f in oob.failures}),
        tuple(oob.failures),
        used_seed,
        oob.never_out,
    )


def cross_validate(
    X: Any,
    y: ArrayLike,
    procedure: PlainLogistic | FitProcedure,
    metrics: Sequence[str | Metric] = DEFAULT_METRICS,
    *,
    k: int = 10,
    repeats: int = 1,
    stratify: bool = True,
    seed: int | np.random.Generator | None = None,
    progress: ProgressCallback | None = None,
) -> CrossValidation:
    """k-fold cross-validation, optionally stratified by outcome and repeated [1]_.

    Parameters
    ----------
    X, y, procedure, metrics, seed, progress
        As in :func:`bootstrap_optimism`.
    k : int
        Number of folds, 2 to n (``k = n`` with ``stratify=False`` is leave-one-out).
    repeats : int
        Independent fold splits, each from the same generator in turn.
    stratify : bool
        Deal events and non-events out to the folds separately, so every fold
        holds about the same share of each (needs ``k`` at most the smaller class).

    Returns
    -------
    CrossValidation
        Per metric, **both** summaries (methods.md 6.3): ``pooled`` -- the metric
        on the pooled out-of-fold predictions of a repeat, averaged over repeats
        -- and ``fold_mean`` / ``fold_sd`` -- over the per-fold values of every
        fold of every repeat. A summary with no usable value is ``None``.

    Notes
    -----
    Folds: within each repeat the rows (each class separately when stratified)
    are put in the order of ``rng.permutation`` and dealt to folds 0, 1, ...,
    k-1, 0, 1, ... in turn. The pooled AUC mixes the folds' different
    calibrations; the fold mean is noisier for small folds. Each fold is fitted
    with weights 1 on the training rows and 0 on the held-out rows.

    References
    ----------
    .. [1] Steyerberg EW, Harrell FE Jr, Borsboom GJ, et al. Internal validation of
           predictive models. J Clin Epidemiol 2001;54:774-781.
    """
    mets = resolve_metrics(metrics)
    k = check_count(k, "k", 2)
    repeats = check_count(repeats, "repeats", 1)
    if not isinstance(stratify, bool | np.bool_):
        raise StatsInputError(f"stratify must be True or False; got {stratify!r}")
    rng, used_seed = generator(seed)
    yv = as_outcome(y)
    smaller = int(min(yv.sum(), yv.size - yv.sum()))
    if k > yv.size or (stratify and k > smaller):
        limit = f"the smaller outcome class ({smaller}) when stratify=True" if stratify else "n"
        raise StatsInputError(f"k must be at most {limit}; got {k}")
    yv, engine = _setup(X, yv, procedure)
    with blas_threads():
        bar = Progress(progress, k * repeats)
        cv = cv_loop(engine, yv, mets, k=k, repeats=repeats, stratify=stratify, rng=rng, bar=bar)
    return CrossValidation(
        cv.estimates,
        k,
        repeats,
        bool(stratify),
        len({f.resample for f in cv.failures}),
        tuple(cv.failures),
        used_seed,
        cv.out_of_fold,
        cv.fold_values,
    )
