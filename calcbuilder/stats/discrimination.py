"""Discrimination: AUC (c-statistic), DeLong standard error and test.

Operating points (ROC points, classification at a threshold, Youden) live in
:mod:`calcbuilder.stats.thresholds`.

Conventions (shared by every function here):

* ``y`` is coded 0/1 with 1 = event; ``risk`` is a predicted risk in [0, 1].
* In the AUC a tied pair (an event and a non-event with equal risk) counts 1/2,
  so the AUC is the Mann-Whitney probability P(risk_event > risk_nonevent) +
  1/2 P(equal), which equals the trapezoidal area under the empirical ROC curve [1]_ [2]_.
* "Positive" means ``risk >= threshold``: a risk equal to the threshold is positive.
* ``weights`` are frequency weights: a weight of 2 equals a duplicated row.

The DeLong variance [3]_ uses the ``m - 1`` and ``n - 1`` denominators (m events,
n non-events) and is computed in O(N log N) from mid-ranks as in Sun & Xu [4]_.

References
----------
.. [1] Bamber D. The area above the ordinal dominance graph and the area below the
       receiver operating characteristic graph. J Math Psychol 1975;12:387-415.
.. [2] Hanley JA, McNeil BJ. The meaning and use of the area under a receiver operating
       characteristic (ROC) curve. Radiology 1982;143(1):29-36.
.. [3] DeLong ER, DeLong DM, Clarke-Pearson DL. Comparing the areas under two or more
       correlated receiver operating characteristic curves: a nonparametric approach.
       Biometrics 1988;44(3):837-845.
.. [4] Sun X, Xu W. Fast implementation of DeLong's algorithm for comparing the areas
       under correlated receiver operating characteristic curves. IEEE Signal Process
       Lett 2014;21(11):1389-1393.
.. [5] Pepe MS. The Statistical Evaluation of Medical Tests for Classification and
       Prediction. Oxford University Press 2003 (logit-transformed interval).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._validate import (
    FloatArray,
    as_outcome,
    as_risk,
    as_weights,
    check_level,
    require_both_classes,
)
from .errors import StatsInputError

__all__ = [
    "AUCComparison",
    "AUCEstimate",
    "IntervalNotEstimableWarning",
    "auc",
    "auc_ci",
    "compare_auc",
]

_METHODS = ("logit", "wald")


class IntervalNotEstimableWarning(UserWarning):
    """The DeLong standard error is exactly zero, so no interval or test can be formed."""


@dataclass(frozen=True)
class AUCEstimate:
    """Result of :func:`auc_ci`: the AUC, its DeLong SE and a ``level`` interval."""

    value: float
    se: float
    low: float
    high: float
    level: float
    method: str


@dataclass(frozen=True)
class AUCComparison:
    """Result of :func:`compare_auc`; ``difference = auc_a - auc_b``."""

    difference: float
    se: float
    low: float
    high: float
    z: float
    p_value: float
    auc_a: float
    auc_b: float
    level: float


@dataclass(frozen=True)
class _DeLong:
    """DeLong structural components of K scores on the same patients.

    ``hits10[k, i]`` counts the non-events that event ``i`` outranks on score ``k``
    (ties 1/2), so the placement ``V10 = hits10 / n``; ``hits01[k, j]`` counts the
    events that outrank non-event ``j`` (ties 1/2), so ``V01 = hits01 / m``. Counts
    are half-integers, held exactly, so a zero variance is detected exactly.
    """

    auc: FloatArray
    hits10: FloatArray
    hits01: FloatArray
    m: int
    n: int

    @property
    def v10(self) -> FloatArray:
        return self.hits10 / self.n

    @property
    def v01(self) -> FloatArray:
        return self.hits01 / self.m


def _tie_groups(sorted_values: FloatArray) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    """Start index and size of each run of equal values in an ascending array."""
    new = np.empty(sorted_values.size, dtype=bool)
    new[0] = True
    np.not_equal(sorted_values[1:], sorted_values[:-1], out=new[1:])
    starts = np.flatnonzero(new)
    sizes = np.diff(np.append(starts, sorted_values.size))
    return starts, sizes


def _weighted_auc(y: FloatArray, risk: FloatArray, w: FloatArray) -> float:
    """Mann-Whitney AUC with frequency weights; equal risks form one group, ties 1/2."""
    order = np.argsort(risk)
    starts, _ = _tie_groups(risk[order])
    w_event = w[order] * y[order]
    ev = np.add.reduceat(w_event, starts)
    non = np.add.reduceat(w[order] - w_event, starts)
    below = np.concatenate(([0.0], np.cumsum(non)[:-1]))  # non-event weight at lower risks
    wins = float(np.dot(ev, below + 0.5 * non))
    return wins / (float(ev.sum()) * float(non.sum()))


def _row_hits(event: NDArray[np.bool_], score: FloatArray, m: int, out: FloatArray) -> None:
    """Write per row: non-events outranked (events) or events outranking (non-events).

    These are Sun & Xu's mid-rank differences [4]_ (``T_Z - T_X`` for an event,
    ``m - (T_Z - T_Y)`` for a non-event) written with cumulative counts: for a tie group
    occupying sorted positions ``[s, e)``, with ``E(k)`` the events among the ``k``
    lowest risks, ``B = E(s) + E(e)`` and ``P = s + e``, an event outranks
    ``(P - B) / 2`` non-events and a non-event is outranked by ``m - B / 2`` events
    (ties count 1/2). Integer arithmetic until the final halving keeps them exact.
    """
    order = np.argsort(score)
    ev_sorted = event[order]
    starts, sizes = _tie_groups(score[order])
    ends = starts + sizes
    cum = np.zeros(score.size + 1, dtype=np.int64)
    np.cumsum(ev_sorted, dtype=np.int64, out=cum[1:])
    b = cum[starts] + cum[ends]
    p = starts + ends
    if starts.size < score.size:  # expand groups to rows (skipped when nothing is tied)
        b, p = np.repeat(b, sizes), np.repeat(p, sizes)
    p[~ev_sorted] = 2 * m
    p -= b
    out[order] = p
    out *= 0.5


def _delong_components(y: FloatArray, scores_2d: FloatArray) -> _DeLong:
    """DeLong placements for K scores at once (``scores_2d`` has shape (K, N)).

    One argsort per score; O(K N log N). ``y`` must hold both classes.
    """
    event = y == 1
    m = int(np.count_nonzero(event))
    n = y.size - m
    scores = np.atleast_2d(scores_2d)
    hits = np.empty(scores.shape)
    for k in range(scores.shape[0]):
        _row_hits(event, scores[k], m, hits[k])
    hits10 = hits[:, event]
    return _DeLong(hits10.sum(axis=1) / (m * n), hits10, hits[:, ~event], m, n)


def _delong_covariance(comp: _DeLong) -> FloatArray:
    """The K x K DeLong covariance ``S10/m + S01/n`` (denominators m - 1 and n - 1) [3]_."""
    m, n = comp.m, comp.n
    d10 = comp.hits10 - comp.hits10.mean(axis=1, keepdims=True)
    d01 = comp.hits01 - comp.hits01.mean(axis=1, keepdims=True)
    s10 = d10 @ d10.T / ((m - 1) * n * n)
    s01 = d01 @ d01.T / ((n - 1) * m * m)
    return np.asarray(s10 / m + s01 / n, dtype=np.float64)


def _contrast_variance(comp: _DeLong, contrast: FloatArray) -> float:
    """DeLong variance of ``contrast @ auc``; exactly 0 when every placement is constant."""
    a10 = contrast @ comp.hits10
    a01 = contrast @ comp.hits01
    if np.ptp(a10) == 0 and np.ptp(a01) == 0:
        return 0.0
    m, n = comp.m, comp.n
    return float(np.var(a10, ddof=1) / (m * n * n) + np.var(a01, ddof=1) / (n * m * m))


def _validated(y: ArrayLike, risk: ArrayLike, what: str) -> tuple[FloatArray, FloatArray]:
    yv = as_outcome(y)
    rv = as_risk(risk, yv.size)
    require_both_classes(yv, np.broadcast_to(1.0, yv.shape), what)
    return yv, rv


def _require_two_per_class(y: FloatArray) -> None:
    m = int(np.count_nonzero(y == 1))
    n = y.size - m
    if m < 2 or n < 2:
        raise StatsInputError(
            "y must contain at least 2 events and 2 non-events for the DeLong standard "
            f"error (it divides by m - 1 and n - 1); got {m} event(s) and {n} non-event(s)"
        )


def _z_quantile(level: float) -> float:
    return NormalDist().inv_cdf(0.5 + level / 2)


def _warn_zero_se(what: str) -> None:
    warnings.warn(
        f"the DeLong standard error of {what} is exactly 0 (every placement is the same, "
        "as when the AUC is 0 or 1 or all risks are tied), so no interval or test can "
        "be formed; low, high (and z, p_value) are NaN",
        IntervalNotEstimableWarning,
        stacklevel=3,
    )


def auc(y: ArrayLike, risk: ArrayLike, *, weights: ArrayLike | None = None) -> float:
    """Area under the ROC curve (c-statistic) in its Mann-Whitney form.

    Parameters
    ----------
    y : array_like of 0/1
        Outcome, 1 = event. Must contain both classes (positive weight in each).
    risk : array_like
        Predicted risks in [0, 1], same length as ``y``.
    weights : array_like, optional
        Frequency weights (non-negative); a weight of 2 equals a duplicated row.

    Returns
    -------
    float
        ``sum_i sum_j w_i w_j psi(risk_i, risk_j) / (W_events W_nonevents)`` over events
        ``i`` and non-events ``j``, with ``psi`` = 1, 1/2, 0 for >, =, <. One sort,
        O(N log N); equal risks are grouped so that ties count 1/2 [1]_ [2]_.

    Raises
    ------
    StatsInputError
        Bad lengths, codes, risks or weights, or a single outcome class (every function).

    Examples
    --------
    The event at 0.4 beats both non-events, the event at 0.2 ties one of them:

    >>> auc([0, 1, 0, 1], [0.1, 0.4, 0.2, 0.2])
    0.875
    """
    yv = as_outcome(y)
    rv, w = as_risk(risk, yv.size), as_weights(weights, yv.size)
    require_both_classes(yv, w, "the AUC")
    return _weighted_auc(yv, rv, w)


def auc_ci(
    y: ArrayLike, risk: ArrayLike, *, level: float = 0.95, method: str = "logit"
) -> AUCEstimate:
    """AUC with its DeLong standard error and a confidence interval.

    Parameters
    ----------
    y, risk : array_like
        As in :func:`auc`; at least 2 events and 2 non-events are required.
    level : float
        Confidence level strictly inside (0, 1).
    method : {"logit", "wald"}
        ``"logit"``: ``expit(logit(AUC) +/- z SE / (AUC (1 - AUC)))``, which stays inside
        (0, 1) [5]_; ``"wald"``: ``AUC +/- z SE`` clipped to [0, 1].

    Returns
    -------
    AUCEstimate
        ``value``, ``se`` (DeLong, denominators m - 1 and n - 1 [3]_), ``low``, ``high``.

    Notes
    -----
    When the DeLong SE is exactly 0 the interval is not estimable by either method:
    ``low`` and ``high`` are NaN and an :class:`IntervalNotEstimableWarning` is issued.
    This always happens when the AUC is 0 or 1 (the logit is then undefined and the
    Wald interval would have zero width) and also when every placement equals the AUC,
    e.g. when all risks are tied. Use a bootstrap interval in that case.
    """
    yv, rv = _validated(y, risk, "the AUC")
    level = check_level(level)
    if method not in _METHODS:
        raise StatsInputError(f"method must be 'logit' or 'wald'; got {method!r}")
    _require_two_per_class(yv)
    comp = _delong_components(yv, rv[None, :])
    value = float(comp.auc[0])
    se = math.sqrt(_contrast_variance(comp, np.ones(1)))
    if se == 0:
        _warn_zero_se("the AUC")
        return AUCEstimate(value, 0.0, math.nan, math.nan, level, method)
    z = _z_quantile(level)
    if method == "wald":
        low, high = max(0.0, value - z * se), min(1.0, value + z * se)
    else:
        centre = math.log(value / (1 - value))
        half = z * se / (value * (1 - value))
        low, high = _expit(centre - half), _expit(centre + half)
    return AUCEstimate(value, se, low, high, level, method)


def _expit(x: float) -> float:
    return 1 / (1 + math.exp(-x)) if x >= 0 else math.exp(x) / (1 + math.exp(x))


def compare_auc(
    y: ArrayLike, risk_a: ArrayLike, risk_b: ArrayLike, *, level: float = 0.95
) -> AUCComparison:
    """Paired DeLong test of two AUCs measured on the same patients.

    Parameters
    ----------
    y : array_like of 0/1
        Outcome; at least 2 events and 2 non-events.
    risk_a, risk_b : array_like
        Two predicted risks in [0, 1] for the same rows.
    level : float
        Confidence level of the interval on the difference, strictly inside (0, 1).

    Returns
    -------
    AUCComparison
        ``difference = AUC(a) - AUC(b)``; ``se`` from the paired DeLong covariance [3]_
        (placements by Sun & Xu's mid-rank algorithm [4]_); Wald interval
        ``difference +/- z se`` clipped to [-1, 1]; ``z = difference / se`` and the
        two-sided normal ``p_value``.

    Notes
    -----
    When the SE is exactly 0 (e.g. the two risks rank every patient identically, or both
    AUCs are 0 or 1) ``low``, ``high``, ``z`` and ``p_value`` are NaN and an
    :class:`IntervalNotEstimableWarning` is issued.
    """
    yv = as_outcome(y)
    ra = as_risk(risk_a, yv.size, "risk_a")
    rb = as_risk(risk_b, yv.size, "risk_b")
    level = check_level(level)
    require_both_classes(yv, np.broadcast_to(1.0, yv.shape), "comparing AUCs")
    _require_two_per_class(yv)
    comp = _delong_components(yv, np.vstack([ra, rb]))
    auc_a, auc_b = float(comp.auc[0]), float(comp.auc[1])
    diff = auc_a - auc_b
    se = math.sqrt(_contrast_variance(comp, np.array([1.0, -1.0])))
    if se == 0:
        _warn_zero_se("the AUC difference")
        nan = math.nan
        return AUCComparison(diff, 0.0, nan, nan, nan, nan, auc_a, auc_b, level)
    zq = _z_quantile(level)
    z = diff / se
    p_value = math.erfc(abs(z) / math.sqrt(2))
    low, high = max(-1.0, diff - zq * se), min(1.0, diff + zq * se)
    return AUCComparison(diff, se, low, high, z, p_value, auc_a, auc_b, level)
