"""Overall performance and calibration of predicted risks for a binary outcome.

Conventions (shared by every function here):

* ``y`` is coded 0/1 with 1 = event; ``risk`` is a predicted risk in [0, 1];
  ``LP = logit(risk)`` is the linear predictor.
* ``weights`` are frequency weights: a weight of 2 equals a duplicated row.
* Measures that take logarithms of the risk (the R² measures, the calibration
  intercept and slope) refuse risks of exactly 0 or 1 and say how many rows have
  them; the others accept them.
* Single outcome class: the scaled Brier score, the R² measures and the
  calibration intercept and slope need events and non-events and refuse data
  without both. The Brier score, the calibration curve and its errors, the
  Hosmer-Lemeshow test and Spiegelhalter's z compare outcomes with the predicted
  risks directly and are computed for any outcome mix (no events at all among
  high predicted risks is itself miscalibration).

Each function names its own references.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np
from numpy.typing import ArrayLike

from ._validate import (
    FloatArray,
    as_outcome,
    as_risk,
    as_weights,
    check_level,
    require_both_classes,
)
from .errors import ConvergenceError, StatsInputError
from .logistic import fit_logistic
from .lowess import CalibrationCurve, CalibrationErrors, calibration_curve, calibration_errors

__all__ = [
    "CalibrationCurve",
    "CalibrationErrors",
    "CalibrationEstimate",
    "HosmerLemeshowResult",
    "SpiegelhalterResult",
    "brier",
    "calibration_curve",
    "calibration_errors",
    "calibration_intercept",
    "calibration_slope",
    "cox_snell_r2",
    "hosmer_lemeshow",
    "nagelkerke_r2",
    "scaled_brier",
    "spiegelhalter_z",
]


@dataclass(frozen=True)
class CalibrationEstimate:
    """A logistic calibration coefficient with its standard error and Wald interval."""

    value: float
    se: float
    low: float
    high: float


@dataclass(frozen=True)
class HosmerLemeshowResult:
    """Hosmer-Lemeshow statistic, its degrees of freedom and chi-squared p-value."""

    statistic: float
    df: int
    p_value: float


@dataclass(frozen=True)
class SpiegelhalterResult:
    """Spiegelhalter's z and its two-sided normal p-value."""

    statistic: float
    p_value: float


def _logit(p: FloatArray) -> FloatArray:
    return np.asarray(np.log(p) - np.log1p(-p), dtype=np.float64)


def _expit(eta: FloatArray) -> FloatArray:
    with np.errstate(over="ignore"):  # exp overflow gives 1 / inf = 0, the right limit
        return np.asarray(1.0 / (1.0 + np.exp(-eta)), dtype=np.float64)


def _inputs(
    y: ArrayLike, risk: ArrayLike, weights: ArrayLike | None, *, open_interval: bool
) -> tuple[FloatArray, FloatArray, FloatArray]:
    yv = as_outcome(y)
    pv = as_risk(risk, yv.size, open_interval=open_interval)
    return yv, pv, as_weights(weights, yv.size)


def brier(y: ArrayLike, risk: ArrayLike, *, weights: ArrayLike | None = None) -> float:
    """Brier score: the (weighted) mean of ``(risk - y)**2`` [1]_.

    Accepts risks of 0 and 1 and data with a single outcome class.

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row).

    Returns
    -------
    float

    References
    ----------
    .. [1] Brier GW. Mon Weather Rev 1950;78:1-3.
    """
    yv, pv, w = _inputs(y, risk, weights, open_interval=False)
    return float(w @ (pv - yv) ** 2 / w.sum())


def scaled_brier(y: ArrayLike, risk: ArrayLike, *, weights: ArrayLike | None = None) -> float:
    """Scaled Brier score ``1 - Brier / (ybar (1 - ybar))`` [1]_.

    ``ybar`` is the observed (weighted) event proportion, so the reference is the
    Brier score of a model predicting ``ybar`` for everyone. Needs both outcome
    classes. Can be negative (worse than that reference).

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row).

    Returns
    -------
    float

    References
    ----------
    .. [1] Steyerberg EW, et al. Epidemiology 2010;21(1):128-138.
    """
    yv, pv, w = _inputs(y, risk, weights, open_interval=False)
    require_both_classes(yv, w, "the scaled Brier score")
    ybar = float(w @ yv / w.sum())
    return 1.0 - float(w @ (pv - yv) ** 2 / w.sum()) / (ybar * (1.0 - ybar))


def _logliks(
    y: ArrayLike, risk: ArrayLike, weights: ArrayLike | None, what: str
) -> tuple[float, float, float]:
    """``(LL1, LL0, n)``: model and intercept-only log-likelihoods, total weight."""
    yv, pv, w = _inputs(y, risk, weights, open_interval=True)
    require_both_classes(yv, w, what)
    n = float(w.sum())
    ll1 = float(w @ (yv * np.log(pv) + (1.0 - yv) * np.log1p(-pv)))
    ybar = float(w @ yv) / n
    ll0 = n * (ybar * math.log(ybar) + (1.0 - ybar) * math.log1p(-ybar))
    return ll1, ll0, n


def cox_snell_r2(y: ArrayLike, risk: ArrayLike, *, weights: ArrayLike | None = None) -> float:
    """Cox-Snell R² ``1 - exp(2 (LL0 - LL1) / n)`` [1]_.

    ``LL1`` uses the given risks, ``LL0`` the data's own event proportion, so on
    validation data the value can be negative. Needs both outcome classes and
    risks strictly inside (0, 1).

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row).

    Returns
    -------
    float

    References
    ----------
    .. [1] Cox DR, Snell EJ. Analysis of Binary Data, 2nd ed. 1989.
    """
    ll1, ll0, n = _logliks(y, risk, weights, "the Cox-Snell R2")
    return -math.expm1(2.0 * (ll0 - ll1) / n)


def nagelkerke_r2(y: ArrayLike, risk: ArrayLike, *, weights: ArrayLike | None = None) -> float:
    """Nagelkerke R²: Cox-Snell R² divided by its maximum ``1 - exp(2 LL0 / n)`` [1]_.

    Same rules as :func:`cox_snell_r2` (can be negative on validation data).

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row).

    Returns
    -------
    float

    References
    ----------
    .. [1] Nagelkerke NJD. Biometrika 1991;78(3):691-692.
    """
    ll1, ll0, n = _logliks(y, risk, weights, "the Nagelkerke R2")
    return math.expm1(2.0 * (ll0 - ll1) / n) / math.expm1(2.0 * ll0 / n)


def _wald(value: float, se: float, level: float) -> CalibrationEstimate:
    z = NormalDist().inv_cdf(0.5 + level / 2.0)
    return CalibrationEstimate(value, se, value - z * se, value + z * se)


def calibration_intercept(
    y: ArrayLike, risk: ArrayLike, *, weights: ArrayLike | None = None, level: float = 0.95
) -> CalibrationEstimate:
    """Calibration-in-the-large: ``a`` in ``logit P(y=1) = a + LP`` (LP as an offset) [1]_ [2]_.

    Ideal value 0; positive means the risks are too low on average. ``se`` is the
    inverse square root of the Fisher information; the interval is Wald's. This is
    the offset intercept of the calibration-hierarchy papers, not the joint
    intercept of the slope model. Needs both outcome classes (otherwise the
    estimate is infinite) and risks strictly inside (0, 1).

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row).
    level : float
        Confidence level of the Wald interval, strictly inside (0, 1).

    Returns
    -------
    CalibrationEstimate
        ``value``, ``se``, ``low``, ``high``.

    References
    ----------
    .. [1] Cox DR. Biometrika 1958;45:562-565.
    .. [2] Van Calster B, et al. J Clin Epidemiol 2016;74:167-176.
    """
    lvl = check_level(level)
    yv, pv, w = _inputs(y, risk, weights, open_interval=True)
    require_both_classes(yv, w, "the calibration intercept")
    a, info = _offset_intercept(yv, _logit(pv), w)
    return _wald(a, 1.0 / math.sqrt(info), lvl)


def _offset_intercept(y: FloatArray, lp: FloatArray, w: FloatArray) -> tuple[float, float]:
    """Maximum-likelihood ``a`` of ``logit P = a + lp`` and its Fisher information.

    Safeguarded Newton: the score is decreasing in ``a`` and changes sign inside
    ``[logit(ybar) - max lp, logit(ybar) - min lp]``, so a step that leaves the
    current bracket is replaced by bisection; this always converges.
    """
    keep = w > 0
    y, lp, w = y[keep], lp[keep], w[keep]
    ybar = float(w @ y / w.sum())
    base = math.log(ybar) - math.log1p(-ybar)
    lo, hi = base - float(lp.max()), base - float(lp.min())
    a = base - float(w @ lp / w.sum())
    for _ in range(200):
        p = _expit(lp + a)
        score = float(w @ (y - p))
        info = float(w @ (p * (1.0 - p)))
        if score > 0:
            lo = a
        else:
            hi = a
        step = score / info if info > 0 else math.inf
        new = a + step if lo < a + step < hi else 0.5 * (lo + hi)
        if abs(new - a) <= 1e-12 * (1.0 + abs(a)) or lo == hi:
            p = _expit(lp + new)
            return new, float(w @ (p * (1.0 - p)))
        a = new
    raise ConvergenceError(  # pragma: no cover - bisection guarantees convergence
        "the calibration intercept did not converge in 200 safeguarded Newton steps"
    )


def calibration_slope(
    y: ArrayLike, risk: ArrayLike, *, weights: ArrayLike | None = None, level: float = 0.95
) -> CalibrationEstimate:
    """Calibration slope: ``b`` in ``logit P(y=1) = a' + b LP`` [1]_ [2]_.

    Ideal value 1; below 1 means the risks are too extreme (overfitting). ``se``
    comes from the inverse Fisher information of the two-parameter fit; the
    interval is Wald's. Needs both outcome classes, at least two distinct risks
    and risks strictly inside (0, 1). If ``LP`` separates events from non-events
    the slope is infinite and the fit's error is raised.

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    weights : array (n,), optional
        Frequency weights (a weight of 2 equals a duplicated row).
    level : float
        Confidence level of the Wald interval, strictly inside (0, 1).

    Returns
    -------
    CalibrationEstimate
        ``value``, ``se``, ``low``, ``high``.

    References
    ----------
    .. [1] Cox DR. Biometrika 1958;45:562-565.
    .. [2] Van Calster B, et al. J Clin Epidemiol 2016;74:167-176.
    """
    lvl = check_level(level)
    yv, pv, w = _inputs(y, risk, weights, open_interval=True)
    require_both_classes(yv, w, "the calibration slope")
    used = pv[w > 0]
    if used.min() == used.max():
        raise StatsInputError(
            "risk must take at least two distinct values for the calibration slope; "
            f"got every row equal to {float(used[0])!r}"
        )
    try:
        fit = fit_logistic(_logit(pv)[:, None], yv, weights=w)
    except StatsInputError as exc:
        raise type(exc)(f"calibration slope (logistic fit of y on logit(risk)): {exc}") from None
    return _wald(float(fit.coef[1]), math.sqrt(float(fit.cov[1, 1])), lvl)


def _hl_groups(groups: int, n: int, external: bool) -> int:
    smallest = 1 if external else 3
    if isinstance(groups, bool) or not isinstance(groups, int | np.integer):
        raise StatsInputError(f"groups must be a whole number; got {groups!r}")
    if not smallest <= groups <= n:
        raise StatsInputError(
            f"groups must be at least {smallest} ({'external' if external else 'development'} "
            f"data) and at most the number of rows ({n}); got {groups}"
        )
    return int(groups)


def hosmer_lemeshow(
    y: ArrayLike, risk: ArrayLike, *, groups: int = 10, external: bool = False
) -> HosmerLemeshowResult:
    """Hosmer-Lemeshow goodness-of-fit test over groups of sorted risk [1]_ [2]_.

    Grouping rule: rows are sorted by risk (tied risks ordered non-events first, so
    the result does not depend on row order) and split into ``groups`` contiguous
    groups of near-equal size by ``numpy.array_split`` (the first ``n % groups``
    groups hold one row more). Tied risks can therefore fall in adjacent groups.
    With ``O``, ``E`` and ``m`` the events, summed risks and rows of a group::

        C = sum (O - E)**2 / (E (1 - E / m))

    ``df = groups - 2`` on development data and ``df = groups`` with
    ``external=True`` (no parameter estimated on the data); the p-value is the
    upper tail of chi-squared with ``df`` degrees of freedom. ``groups`` must lie in
    ``[3, n]`` (``[1, n]`` when external). A group whose risks are all 0 or all 1
    has no variance and is refused. Accepts a single outcome class.

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    groups : int
        Number of groups.
    external : bool
        ``True`` for data the model was not fitted on (``df = groups``).

    Returns
    -------
    HosmerLemeshowResult
        ``statistic``, ``df``, ``p_value``.

    References
    ----------
    .. [1] Hosmer DW, Lemeshow S. Commun Stat A 1980;9:1043-1069.
    .. [2] Lemeshow S, Hosmer DW. Am J Epidemiol 1982;115:92-106.
    """
    yv = as_outcome(y)
    pv = as_risk(risk, yv.size)
    g = _hl_groups(groups, yv.size, external)
    order = np.lexsort((yv, pv))
    size, extra = divmod(yv.size, g)
    starts = np.arange(g) * size + np.minimum(np.arange(g), extra)
    observed = np.add.reduceat(yv[order], starts)
    expected = np.add.reduceat(pv[order], starts)
    count = np.diff(np.append(starts, yv.size))
    var = expected * (1.0 - expected / count)
    if (var <= 0).any():
        k = int(np.flatnonzero(var <= 0)[0])
        raise StatsInputError(
            f"risk: Hosmer-Lemeshow group {k + 1} of {g} has every risk equal to "
            f"{'0' if expected[k] == 0 else '1'}, so its variance is zero; use fewer groups"
        )
    stat = float(np.sum((observed - expected) ** 2 / var))
    df = g if external else g - 2
    from scipy.stats import chi2

    return HosmerLemeshowResult(stat, df, float(chi2.sf(stat, df)))


def spiegelhalter_z(y: ArrayLike, risk: ArrayLike) -> SpiegelhalterResult:
    """Spiegelhalter's z-test of calibration [1]_, with a two-sided normal p-value.

    ``z = sum (y - p)(1 - 2p) / sqrt(sum (1 - 2p)**2 p (1 - p))``. Accepts risks of
    0 and 1 and a single outcome class, but refuses data whose every risk is 0,
    0.5 or 1 (zero variance).

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.

    Returns
    -------
    SpiegelhalterResult
        ``statistic`` (z) and two-sided ``p_value``.

    References
    ----------
    .. [1] Spiegelhalter DJ. Stat Med 1986;5:421-433.
    """
    yv = as_outcome(y)
    pv = as_risk(risk, yv.size)
    c = 1.0 - 2.0 * pv
    var = float(np.sum(c * c * pv * (1.0 - pv)))
    if var <= 0:
        raise StatsInputError(
            "risk must include a value other than 0, 0.5 and 1 for Spiegelhalter's z "
            "(otherwise its variance is zero); got only such values"
        )
    z = float(np.sum((yv - pv) * c)) / math.sqrt(var)
    return SpiegelhalterResult(z, math.erfc(abs(z) / math.sqrt(2.0)))
