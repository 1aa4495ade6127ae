"""Reclassification measures: categorical NRI, category-free NRI and IDI.

Conventions: ``risk_old`` comes from the reference model, ``risk_new`` from the
model under study; "up" means a higher risk category (or, category-free, a
strictly higher risk) under the new model. Categories are ``[0, c1), [c1, c2),
..., [ck, 1]``: a risk equal to a cut falls in the upper category. An equal old
and new risk (category-free NRI) counts as neither up nor down. ``weights`` are
frequency weights (a weight of 2 equals a duplicated row); counts ``n`` are
total weights. Both outcome classes must be present.

When nobody is reclassified the NRI and its standard error are both 0; ``z`` is
then reported as 0 and ``p_value`` as 1 (no evidence of a difference). When the
IDI standard error is 0 the interval collapses to the point and ``p_value`` is
1 if the IDI is 0, else 0.

References
----------
.. [1] Pencina MJ, D'Agostino RB Sr, D'Agostino RB Jr, Vasan RS. Evaluating the
       added predictive ability of a new marker: from area under the ROC curve
       to reclassification and beyond. Stat Med 2008;27(2):157-172.
.. [2] Pencina MJ, D'Agostino RB Sr, Steyerberg EW. Extensions of net
       reclassification improvement calculations to measure usefulness of new
       biomarkers. Stat Med 2011;30(1):11-21.
.. [3] Kerr KF, Wang Z, Janes H, McClelland RL, Psaty BM, Pepe MS. Net
       reclassification indices for evaluating risk prediction instruments: a
       critical review. Epidemiology 2014;25(1):114-121.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._validate import FloatArray, as_outcome, as_risk, as_vector, as_weights, require_both_classes
from .errors import StatsInputError

__all__ = ["IDIResult", "NRIResult", "continuous_nri", "idi", "nri"]

_Z975 = NormalDist().inv_cdf(0.975)


@dataclass(frozen=True)
class NRIResult:
    """Result of :func:`nri` and :func:`continuous_nri`.

    Attributes
    ----------
    events : float
        ``P(up | event) - P(down | event)``.
    nonevents : float
        ``P(down | non-event) - P(up | non-event)``.
    total : float
        ``events + nonevents`` (range -2 to 2). Report both components too [3]_.
    se : float
        Standard error of ``total`` under no improvement (Pencina 2008).
    z : float
        ``total / se``.
    p_value : float
        Two-sided normal p-value of ``z``.
    """

    events: float
    nonevents: float
    total: float
    se: float
    z: float
    p_value: float


@dataclass(frozen=True)
class IDIResult:
    """Result of :func:`idi`: the IDI, its standard error, 95% Wald interval and p-value."""

    value: float
    se: float
    low: float
    high: float
    p_value: float


def _two_sided_p(z: float) -> float:
    return math.erfc(abs(z) / math.sqrt(2.0))


def _wald_p(value: float, se: float) -> float:
    """Two-sided p of ``value / se``; with ``se == 0``, 1 for a zero value, else 0."""
    if se > 0:
        return _two_sided_p(value / se)
    return 1.0 if value == 0 else 0.0


def _inputs(
    y: ArrayLike, risk_old: ArrayLike, risk_new: ArrayLike, weights: ArrayLike | None, what: str
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    y_arr = as_outcome(y)
    old = as_risk(risk_old, y_arr.size, "risk_old")
    new = as_risk(risk_new, y_arr.size, "risk_new")
    w = as_weights(weights, y_arr.size)
    require_both_classes(y_arr, w, what)
    return y_arr, old, new, w


def _as_cuts(cuts: ArrayLike) -> FloatArray:
    arr = np.atleast_1d(as_vector(np.atleast_1d(np.asarray(cuts, dtype=float)), "cuts"))
    bad = ~np.isfinite(arr) | (arr <= 0) | (arr >= 1)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise StatsInputError(f"cuts must lie strictly inside (0, 1); got {arr[i]} at position {i}")
    steps = np.diff(arr) <= 0
    if steps.any():
        i = int(np.flatnonzero(steps)[0])
        raise StatsInputError(
            f"cuts must be strictly increasing; got {arr[i]} then {arr[i + 1]} "
            f"at positions {i} and {i + 1}"
        )
    return arr


def _nri_from_moves(
    y: FloatArray, up: NDArray[np.bool_], down: NDArray[np.bool_], w: FloatArray
) -> NRIResult:
    """Components, Pencina 2008 McNemar-type SE, z and p from up/down indicators."""
    ev = y == 1
    n_e, n_ne = float(w[ev].sum()), float(w[~ev].sum())
    up_e, down_e = float(w[ev & up].sum()) / n_e, float(w[ev & down].sum()) / n_e
    up_ne, down_ne = float(w[~ev & up].sum()) / n_ne, float(w[~ev & down].sum()) / n_ne
    events, nonevents = up_e - down_e, down_ne - up_ne
    total = events + nonevents
    se = math.sqrt((up_e + down_e) / n_e + (up_ne + down_ne) / n_ne)
    z = total / se if se > 0 else 0.0
    return NRIResult(events, nonevents, total, se, z, _two_sided_p(z))


def nri(
    y: ArrayLike,
    risk_old: ArrayLike,
    risk_new: ArrayLike,
    cuts: ArrayLike,
    *,
    weights: ArrayLike | None = None,
) -> NRIResult:
    """Categorical net reclassification improvement (NRI).

    Parameters
    ----------
    y : array_like
        Outcome coded 0/1 (1 = event); both classes must occur.
    risk_old, risk_new : array_like
        Risks in [0, 1] from the reference and the new model, same length as ``y``.
    cuts : array_like
        Category cut points, strictly increasing and strictly inside (0, 1).
        Categories are ``[0, c1), [c1, c2), ..., [ck, 1]``; a risk equal to a cut
        is in the upper category.
    weights : array_like, optional
        Frequency weights; default all 1.

    Returns
    -------
    NRIResult
        Event and non-event components, their sum, the standard error
        ``sqrt((p_up,e + p_down,e)/n_e + (p_up,ne + p_down,ne)/n_ne)`` valid
        under the null hypothesis [1]_, ``z`` and the two-sided p-value.

    References
    ----------
    .. [1] Pencina MJ et al. Stat Med 2008;27(2):157-172.
    .. [2] Kerr KF et al. Epidemiology 2014;25(1):114-121.
    """
    y_arr, old, new, w = _inputs(y, risk_old, risk_new, weights, "the NRI")
    c = _as_cuts(cuts)
    cat_old = np.searchsorted(c, old, side="right")
    cat_new = np.searchsorted(c, new, side="right")
    return _nri_from_moves(y_arr, cat_new > cat_old, cat_new < cat_old, w)


def continuous_nri(
    y: ArrayLike,
    risk_old: ArrayLike,
    risk_new: ArrayLike,
    *,
    weights: ArrayLike | None = None,
) -> NRIResult:
    """Category-free (continuous) net reclassification improvement.

    Parameters
    ----------
    y : array_like
        Outcome coded 0/1 (1 = event); both classes must occur.
    risk_old, risk_new : array_like
        Risks in [0, 1] from the reference and the new model, same length as ``y``.
    weights : array_like, optional
        Frequency weights; default all 1.

    Returns
    -------
    NRIResult
        As :func:`nri` with "up" meaning ``risk_new > risk_old`` and "down"
        ``risk_new < risk_old``; equal risks count as neither [1]_. The standard
        error is the Pencina 2008 formula [2]_.

    References
    ----------
    .. [1] Pencina MJ, D'Agostino RB Sr, Steyerberg EW. Stat Med 2011;30(1):11-21.
    .. [2] Pencina MJ et al. Stat Med 2008;27(2):157-172.
    """
    y_arr, old, new, w = _inputs(y, risk_old, risk_new, weights, "the continuous NRI")
    return _nri_from_moves(y_arr, new > old, new < old, w)


def _mean_and_var_of_mean(d: FloatArray, w: FloatArray) -> tuple[float, float]:
    """Weighted mean and squared standard error ``SD^2 / n`` (SD with ``n - 1``)."""
    n = float(w.sum())
    mean = float(np.sum(w * d)) / n
    var = float(np.sum(w * (d - mean) ** 2)) / (n - 1.0)
    return mean, var / n


def idi(
    y: ArrayLike,
    risk_old: ArrayLike,
    risk_new: ArrayLike,
    *,
    weights: ArrayLike | None = None,
) -> IDIResult:
    """Integrated discrimination improvement (IDI).

    Parameters
    ----------
    y : array_like
        Outcome coded 0/1 (1 = event); at least 2 events and 2 non-events (in
        total weight) are needed for the standard error.
    risk_old, risk_new : array_like
        Risks in [0, 1] from the reference and the new model, same length as ``y``.
    weights : array_like, optional
        Frequency weights; default all 1.

    Returns
    -------
    IDIResult
        ``value`` = mean change in risk among events minus mean change among
        non-events (the difference of discrimination slopes) [1]_;
        ``se = sqrt(se_e^2 + se_ne^2)`` with ``se_e = SD(new - old | event) /
        sqrt(n_e)`` (SD with ``n - 1``), likewise ``se_ne``; the 95% Wald
        interval ``value -/+ 1.959964 se``; and the two-sided normal p-value.

    References
    ----------
    .. [1] Pencina MJ et al. Stat Med 2008;27(2):157-172.
    """
    y_arr, old, new, w = _inputs(y, risk_old, risk_new, weights, "the IDI")
    ev = y_arr == 1
    for label, mask in (("events", ev), ("non-events", ~ev)):
        if float(w[mask].sum()) <= 1.0:
            raise StatsInputError(
                f"y must contain more than 1 of the {label} (in total weight) for the IDI "
                f"standard error; got {float(w[mask].sum()):g}"
            )
    d = new - old
    mean_e, v_e = _mean_and_var_of_mean(d[ev], w[ev])
    mean_ne, v_ne = _mean_and_var_of_mean(d[~ev], w[~ev])
    value = mean_e - mean_ne
    se = math.sqrt(v_e + v_ne)
    return IDIResult(value, se, value - _Z975 * se, value + _Z975 * se, _wald_p(value, se))
