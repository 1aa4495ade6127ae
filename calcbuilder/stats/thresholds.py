"""Operating points: the empirical ROC curve, classification at a threshold, Youden's J.

Conventions as in :mod:`calcbuilder.stats.discrimination`: ``y`` is 0/1 with
1 = event, and "positive" means ``risk >= threshold`` (a risk equal to the
threshold is positive).

References
----------
.. [1] Youden WJ. Index for rating diagnostic tests. Cancer 1950;3(1):32-35.
.. [2] Hanley JA, McNeil BJ. The meaning and use of the area under a receiver operating
       characteristic (ROC) curve. Radiology 1982;143(1):29-36.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._validate import FloatArray
from .discrimination import _validated
from .errors import StatsInputError

__all__ = ["Classification", "ROCPoints", "YoudenPoint", "classify", "roc_points", "youden"]


@dataclass(frozen=True)
class ROCPoints:
    """Result of :func:`roc_points`: one row per threshold, highest threshold first."""

    thresholds: FloatArray
    sensitivity: FloatArray
    specificity: FloatArray


@dataclass(frozen=True)
class Classification:
    """Result of :func:`classify`: counts and rates at one threshold."""

    tp: int
    fp: int
    tn: int
    fn: int
    sensitivity: float
    specificity: float
    ppv: float
    npv: float


@dataclass(frozen=True)
class YoudenPoint:
    """Result of :func:`youden`: the threshold maximising ``J`` and ``J`` itself."""

    threshold: float
    j: float


def _readonly(arr: FloatArray) -> FloatArray:
    arr.setflags(write=False)
    return arr


def _counts_by_threshold(
    y: FloatArray, risk: FloatArray
) -> tuple[FloatArray, NDArray[np.int64], NDArray[np.int64]]:
    """Distinct risks (descending) and the events / non-events at or above each."""
    values, inverse = np.unique(risk, return_inverse=True)
    events = np.bincount(inverse, weights=y, minlength=values.size).astype(np.int64)
    total = np.bincount(inverse, minlength=values.size)
    tp = np.cumsum(events[::-1])
    fp = np.cumsum((total - events)[::-1])
    return values[::-1].copy(), tp, fp


def roc_points(y: ArrayLike, risk: ArrayLike) -> ROCPoints:
    """Empirical ROC curve: every distinct risk as a threshold, none dropped.

    Parameters
    ----------
    y, risk : array_like
        As in :func:`auc`.

    Returns
    -------
    ROCPoints
        ``thresholds`` start with ``+inf`` (nobody positive: sensitivity 0, specificity 1)
        followed by every distinct risk in descending order; at threshold ``c`` a row is
        positive when ``risk >= c``, so the lowest threshold gives sensitivity 1,
        specificity 0. Collinear points are kept.
    """
    yv, rv = _validated(y, risk, "the ROC curve")
    values, tp, fp = _counts_by_threshold(yv, rv)
    m, n = int(tp[-1]), int(fp[-1])
    sens = np.concatenate(([0.0], tp / m))
    spec = np.concatenate(([1.0], (n - fp) / n))
    return ROCPoints(
        _readonly(np.concatenate(([np.inf], values))), _readonly(sens), _readonly(spec)
    )


def _as_threshold(threshold: object) -> float:
    if isinstance(threshold, bool) or not isinstance(threshold, int | float | np.number):
        raise StatsInputError(f"threshold must be a single number in [0, 1]; got {threshold!r}")
    value = float(threshold)
    if not 0 <= value <= 1:
        raise StatsInputError(f"threshold must be a finite number in [0, 1]; got {value!r}")
    return value


def classify(y: ArrayLike, risk: ArrayLike, threshold: float) -> Classification:
    """Confusion counts, sensitivity, specificity, PPV and NPV at one threshold.

    Parameters
    ----------
    y, risk : array_like
        As in :func:`auc`.
    threshold : float
        A number in [0, 1]; a row is positive when ``risk >= threshold``.

    Returns
    -------
    Classification
        ``tp, fp, tn, fn`` and ``sensitivity = tp/(tp+fn)``, ``specificity = tn/(tn+fp)``,
        ``ppv = tp/(tp+fp)``, ``npv = tn/(tn+fn)``. PPV is NaN when nobody is positive
        and NPV is NaN when nobody is negative (0/0: undefined, not 0).
    """
    yv, rv = _validated(y, risk, "sensitivity and specificity")
    cut = _as_threshold(threshold)
    pos = rv >= cut
    event = yv == 1
    tp, fp = int(np.count_nonzero(pos & event)), int(np.count_nonzero(pos & ~event))
    fn, tn = int(np.count_nonzero(~pos & event)), int(np.count_nonzero(~pos & ~event))
    ppv = tp / (tp + fp) if tp + fp else math.nan
    npv = tn / (tn + fn) if tn + fn else math.nan
    return Classification(tp, fp, tn, fn, tp / (tp + fn), tn / (tn + fp), ppv, npv)


def youden(y: ArrayLike, risk: ArrayLike) -> YoudenPoint:
    """Threshold maximising Youden's J = sensitivity + specificity - 1 [1]_.

    Parameters
    ----------
    y, risk : array_like
        As in :func:`auc`.

    Returns
    -------
    YoudenPoint
        The observed risk ``threshold`` (positive means ``risk >= threshold``) with the
        largest ``j``; when several thresholds share the largest J, the lowest is chosen.
        J is compared exactly as the integer ``tp n + tn m - m n``, so ties are true ties.
        J is at least 0, since the lowest observed risk gives sensitivity 1, specificity 0.
    """
    yv, rv = _validated(y, risk, "Youden's J")
    values, tp, fp = _counts_by_threshold(yv, rv)
    m, n = int(tp[-1]), int(fp[-1])
    j_scaled = tp * n + (n - fp) * m - m * n
    best = int(np.flatnonzero(j_scaled == j_scaled.max())[-1])
    return YoudenPoint(float(values[best]), int(j_scaled[best]) / (m * n))
