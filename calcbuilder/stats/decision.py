"""Net benefit and decision curves (decision curve analysis).

Convention: a patient is *treated* at threshold ``t`` when ``risk >= t``; a risk
exactly equal to a threshold counts as treated. Thresholds lie strictly inside
(0, 1). ``weights`` are frequency weights (a weight of 2 equals a duplicated
row); ``n`` below is the total weight.

Net benefit is defined for any outcome mix, so data with events only or
non-events only are accepted here (treat-all is then ``1`` or ``-t/(1-t)``).

All thresholds are answered from one sort per outcome class: the risks of the
events and of the non-events are each sorted once (descending, as negated
values), and every threshold is located with :func:`numpy.searchsorted`, so a
curve over ``k`` thresholds costs ``O(n log n + k log n)``.

References
----------
.. [1] Vickers AJ, Elkin EB. Decision curve analysis: a novel method for
       evaluating prediction models. Med Decis Making 2006;26(6):565-574.
.. [2] Vickers AJ, Cronin AM, Elkin EB, Gonen M. Extensions to decision curve
       analysis, a novel method for evaluating diagnostic tests, prediction
       models and molecular markers. BMC Med Inform Decis Mak 2008;8:53.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ._validate import FloatArray, as_outcome, as_risk, as_thresholds, as_weights

__all__ = [
    "DecisionCurve",
    "decision_curve",
    "net_benefit",
    "net_benefit_treat_all",
]


@dataclass(frozen=True)
class DecisionCurve:
    """Result of :func:`decision_curve`; every field is aligned with ``thresholds``.

    Attributes
    ----------
    thresholds : ndarray
        The decision thresholds, in the order given.
    model : ndarray
        Net benefit of treating patients whose risk is at or above the threshold.
    treat_all : ndarray
        Net benefit of treating everyone.
    treat_none : ndarray
        Net benefit of treating no one (always 0).
    interventions_avoided : ndarray
        Net interventions avoided per 100 patients by deciding with the model
        instead of treating everyone, ``(model - treat_all) / (t/(1-t)) * 100``.
    """

    thresholds: FloatArray
    model: FloatArray
    treat_all: FloatArray
    treat_none: FloatArray
    interventions_avoided: FloatArray


def _treated_weight(
    risk: FloatArray, weights: FloatArray | None, thresholds: FloatArray
) -> tuple[FloatArray, float]:
    """Weight of rows with ``risk >= t`` for every ``t`` and the class total, from one sort.

    ``risk`` holds the rows of a single outcome class. Negated risks sorted
    ascending are the risks in descending order; the count of rows with
    ``-risk <= -t`` (``side="right"``, so ties at ``t`` are included) is the
    count with ``risk >= t``. Negation is exact, so ties are preserved. The
    total is the last cumulative sum, so a treated weight never exceeds it.
    """
    if weights is None:
        counts = np.searchsorted(np.sort(-risk), -thresholds, side="right")
        return counts.astype(np.float64), float(risk.size)
    order = np.argsort(-risk, kind="stable")
    cumulative = np.concatenate(([0.0], np.cumsum(weights[order])))
    counts = np.searchsorted(-risk[order], -thresholds, side="right")
    return cumulative[counts], float(cumulative[-1])


def _curves(
    y: FloatArray, risk: FloatArray, thresholds: FloatArray, weights: FloatArray | None
) -> tuple[FloatArray, FloatArray]:
    """Net benefit of the model and of treat-all at every threshold."""
    events = y == 1
    w_e = None if weights is None else weights[events]
    w_ne = None if weights is None else weights[~events]
    tp, total_e = _treated_weight(risk[events], w_e, thresholds)
    fp, total_ne = _treated_weight(risk[~events], w_ne, thresholds)
    n = total_e + total_ne
    odds = thresholds / (1.0 - thresholds)
    prev = total_e / n
    return tp / n - fp / n * odds, prev - (1.0 - prev) * odds


def _unit_or_none(weights: ArrayLike | None, n: int) -> FloatArray | None:
    """Validated weights, or ``None`` when absent (the faster unweighted path)."""
    if weights is None:
        return None
    return as_weights(weights, n)


def net_benefit(
    y: ArrayLike,
    risk: ArrayLike,
    thresholds: ArrayLike,
    *,
    weights: ArrayLike | None = None,
) -> FloatArray:
    """Net benefit of treating patients whose predicted risk is at or above each threshold.

    Parameters
    ----------
    y : array_like
        Outcome coded 0/1 (1 = event).
    risk : array_like
        Predicted risks in [0, 1], same length as ``y``.
    thresholds : array_like
        One or more decision thresholds strictly inside (0, 1), any order.
    weights : array_like, optional
        Frequency weights (non-negative, positive total); default all 1.

    Returns
    -------
    ndarray
        ``NB(t) = TP/n - FP/n * t/(1-t)`` for each threshold, where TP and FP are
        the (weighted) counts of events and non-events with ``risk >= t`` [1]_.

    References
    ----------
    .. [1] Vickers AJ, Elkin EB. Med Decis Making 2006;26(6):565-574.
    """
    y_arr = as_outcome(y)
    risk_arr = as_risk(risk, y_arr.size)
    t = as_thresholds(thresholds)
    w = _unit_or_none(weights, y_arr.size)
    return _curves(y_arr, risk_arr, t, w)[0]


def net_benefit_treat_all(
    y: ArrayLike,
    thresholds: ArrayLike,
    *,
    weights: ArrayLike | None = None,
) -> FloatArray:
    """Net benefit of treating every patient, at each threshold.

    Parameters
    ----------
    y : array_like
        Outcome coded 0/1 (1 = event).
    thresholds : array_like
        One or more decision thresholds strictly inside (0, 1).
    weights : array_like, optional
        Frequency weights; default all 1.

    Returns
    -------
    ndarray
        ``prev - (1 - prev) * t/(1-t)`` with ``prev`` the (weighted) event
        proportion [1]_.

    References
    ----------
    .. [1] Vickers AJ, Elkin EB. Med Decis Making 2006;26(6):565-574.
    """
    y_arr = as_outcome(y)
    t = as_thresholds(thresholds)
    w = as_weights(weights, y_arr.size)
    total = float(w.sum())
    prev = float(w[y_arr == 1].sum()) / total
    return prev - (1.0 - prev) * (t / (1.0 - t))


def decision_curve(
    y: ArrayLike,
    risk: ArrayLike,
    thresholds: ArrayLike | None = None,
    *,
    weights: ArrayLike | None = None,
) -> DecisionCurve:
    """Decision curve: net benefit of the model, treat-all and treat-none.

    Parameters
    ----------
    y : array_like
        Outcome coded 0/1 (1 = event).
    risk : array_like
        Predicted risks in [0, 1], same length as ``y``.
    thresholds : array_like, optional
        Decision thresholds strictly inside (0, 1). Default 0.01, 0.02, ...,
        0.99, built as ``np.arange(1, 100) / 100`` so that each equals its
        decimal literal (0.07 is exactly ``0.07``), which matters for ties.
    weights : array_like, optional
        Frequency weights; default all 1.

    Returns
    -------
    DecisionCurve
        Net benefit of the model (treat if ``risk >= t``) [1]_, of treating all
        and of treating none, and the net interventions avoided per 100
        patients, ``(NB_model - NB_all) / (t/(1-t)) * 100`` [2]_.

    References
    ----------
    .. [1] Vickers AJ, Elkin EB. Med Decis Making 2006;26(6):565-574.
    .. [2] Vickers AJ, Cronin AM, Elkin EB, Gonen M. BMC Med Inform Decis Mak
           2008;8:53.
    """
    y_arr = as_outcome(y)
    risk_arr = as_risk(risk, y_arr.size)
    t = np.arange(1, 100) / 100 if thresholds is None else as_thresholds(thresholds).copy()
    w = _unit_or_none(weights, y_arr.size)
    model, treat_all = _curves(y_arr, risk_arr, t, w)
    avoided = (model - treat_all) / (t / (1.0 - t)) * 100.0
    return DecisionCurve(
        thresholds=t,
        model=model,
        treat_all=treat_all,
        treat_none=np.zeros_like(t),
        interventions_avoided=avoided,
    )
