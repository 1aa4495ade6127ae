"""Smoothed calibration curve and its errors, on a vectorised lowess smoother.

The smoothed calibration curve is lowess [1]_ of the outcome (0/1, 1 = event) on
the predicted risk; ICI, E50, E90 and Emax [4]_ summarise its distance from the
diagonal. Both accept risks of 0 and 1 and data with a single outcome class.

The smoother is Cleveland's lowess [1]_ with ``it=0`` (no robustness reweighting),
written to give the same numbers as ``statsmodels.nonparametric.lowess(y, x, frac=frac,
it=0, delta=delta)`` [2]_, which in turn is the port of R's ``lowess(x, y,
iter=0)`` [3]_, but vectorised so that a 200,000-row calibration curve takes a
fraction of a second.

Algorithm (rows sorted by ``x``; ``n`` rows):

* Neighbourhood size ``k = int(frac * n + 1e-10)``, then clipped to ``[2, n]``
  (statsmodels' rule; R adds ``1e-7`` instead of ``1e-10``).
* The neighbourhood of a point ``v`` is the ``k`` consecutive sorted rows
  ``[L, L + k)`` with ``L`` the first index for which ``v <= (x[L] + x[L + k]) / 2``
  (or ``n - k`` if there is none): the ``k`` nearest neighbours, ties at the far
  edge resolved to the left. The radius ``h`` is the larger distance from ``v`` to
  the two ends of that window.
* Weights are tricube ``(1 - (|x - v| / h)**3)**3``; the fit is the weighted
  least-squares line evaluated at ``v``, with the weighted variance of ``x``
  floored at ``1e-12``.
* ``delta`` skipping: a local fit is computed at the first row, then at the last
  row within ``delta`` of the previous fit (or the next row if that is further);
  rows in between are linearly interpolated, and rows tied with a fitted row copy
  its value. Rows with equal ``x`` therefore always get equal fitted values.

Ties and degenerate windows. Rows with equal ``x`` are processed once, with a
count, which changes nothing numerically: a tie group cut by the edge of a window
always lies at distance ``h`` and has weight 0. When fewer than two rows in the
window have a weight above ``1e-12`` (a window made of a single row plus rows at
distance ``h``, or a window whose ``k`` rows all equal ``v`` so that ``h = 0``),
the fitted value is the mean of ``y`` over all rows with ``x == v``. For ``h > 0``
that row is unique and this is statsmodels' and R's rule (``y`` at that row). For
``h = 0`` it is R's rule (weights 1 for every tied row); statsmodels instead
returns ``y`` of whichever tied row its sort put first, which depends on row order.

Known differences from R's C code (read in ``src/library/stats/src/lowess.c``),
where statsmodels and this module agree with each other: R gives weight 1 within
``0.001 h`` and weight 0 beyond ``0.999 h``; R drops the slope (local mean) when the
weighted standard deviation of ``x`` is below ``0.001 * range(x)``; and when every
remaining row lies within ``delta``, R fits the last row directly while statsmodels
also fits the row before it. Results can therefore differ slightly from R's; the
tests compare with statsmodels.

References
----------
.. [1] Cleveland WS. Robust locally weighted regression and smoothing scatterplots.
       J Am Stat Assoc 1979;74(368):829-836.
.. [2] statsmodels ``nonparametric/_smoothers_lowess.pyx`` (statsmodels 0.15).
.. [3] R Core Team. R ``stats::lowess``, ``src/library/stats/src/lowess.c``.
.. [4] Austin PC, Steyerberg EW. The Integrated Calibration Index (ICI) and related
       metrics for quantifying the calibration of logistic regression models.
       Stat Med 2019;38(21):4051-4065.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._validate import FloatArray, as_outcome, as_risk, as_vector, check_length
from .errors import StatsInputError

__all__ = [
    "CalibrationCurve",
    "CalibrationErrors",
    "calibration_curve",
    "calibration_errors",
    "lowess",
]

_MIN_WEIGHT = 1e-12  # statsmodels: a weight counts as non-zero above this
_MIN_VAR = 1e-12  # statsmodels: floor of the weighted variance of x


@dataclass(frozen=True)
class CalibrationCurve:
    """Smoothed calibration curve: ``observed`` (lowess of y) at each distinct ``risk``.

    ``frac`` and ``delta`` record the smoother settings that produced it.
    """

    risk: FloatArray
    observed: FloatArray
    frac: float
    delta: float


@dataclass(frozen=True)
class CalibrationErrors:
    """Mean, median, 90th percentile and maximum absolute calibration error."""

    ici: float
    e50: float
    e90: float
    emax: float


@dataclass(frozen=True)
class _Sorted:
    """Rows sorted by x and collapsed to distinct x values."""

    xs: FloatArray  # sorted x, one per row
    group: NDArray[np.intp]  # distinct-value index of each sorted row
    xu: FloatArray  # distinct x values, increasing
    count: FloatArray  # rows per distinct value
    ysum: FloatArray  # sum of y per distinct value
    inverse: NDArray[np.intp]  # distinct-value index of each row in input order


def calibration_curve(
    y: ArrayLike, risk: ArrayLike, *, frac: float = 2.0 / 3.0
) -> CalibrationCurve:
    """Smoothed calibration curve: lowess of ``y`` on ``risk`` [1]_.

    The smoother is R's ``lowess(risk, y, iter=0)``: span ``frac``, local linear,
    tricube weights, no robustness iterations, interpolation step ``delta = 0.01 *
    (max(risk) - min(risk))``; it equals statsmodels ``lowess(y, risk, frac=frac,
    it=0, delta=delta)`` (see :mod:`calcbuilder.stats.lowess` for the neighbourhood,
    tie and degenerate-window rules).

    Returns one point per **distinct** risk, sorted by risk (rows with equal risk
    always get equal smoothed values). ``observed`` is not clipped to [0, 1]:
    a local line can leave that range near the ends. Accepts risks of 0 and 1 and
    data with a single outcome class (the curve is then constant).

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.
    frac : float
        Span of the smoother, ``0 < frac <= 1``.

    Returns
    -------
    CalibrationCurve
        ``risk`` (distinct, increasing), ``observed``, ``frac``, ``delta``.

    References
    ----------
    .. [1] Cleveland WS. J Am Stat Assoc 1979;74(368):829-836.
    """
    yv = as_outcome(y)
    pv = as_risk(risk, yv.size)
    span = check_frac(frac)
    delta = 0.01 * float(np.ptp(pv))
    srt = sort_rows(pv, yv)
    xu, fitted = srt.xu, smooth_distinct(srt, span, delta)
    xu.flags.writeable = False
    fitted.flags.writeable = False
    return CalibrationCurve(xu, fitted, span, delta)


def calibration_errors(y: ArrayLike, risk: ArrayLike) -> CalibrationErrors:
    """ICI, E50, E90 and Emax [1]_ from the curve of :func:`calibration_curve`.

    With ``d_i = |curve(risk_i) - risk_i|`` over **every row** (tied risks count
    once per row), ICI is the mean, E50 the median, E90 the 90th percentile (numpy's
    default linear, type-7 quantile) and Emax the maximum of ``d``. The curve uses
    lowess with span 2/3 (R's ``lowess`` with ``iter=0``, as in rms ``val.prob``),
    not the loess (span 0.75, degree 2) of the original paper, so values differ
    from that paper's in about the third decimal. Same input rules as the curve.

    Parameters
    ----------
    y, risk : array (n,)
        Outcome coded 0/1 (1 = event) and predicted risks.

    Returns
    -------
    CalibrationErrors
        ``ici``, ``e50``, ``e90``, ``emax``.

    References
    ----------
    .. [1] Austin PC, Steyerberg EW. Stat Med 2019;38(21):4051-4065.
    """
    yv = as_outcome(y)
    pv = as_risk(risk, yv.size)
    srt = sort_rows(pv, yv)
    fitted = smooth_distinct(srt, 2.0 / 3.0, 0.01 * float(np.ptp(pv)))
    d = np.abs(fitted - srt.xu)[srt.inverse]
    return CalibrationErrors(
        float(d.mean()), float(np.median(d)), float(np.quantile(d, 0.9)), float(d.max())
    )


def lowess(
    x: ArrayLike, y: ArrayLike, *, frac: float = 2.0 / 3.0, delta: float | None = None
) -> FloatArray:
    """Lowess fitted values (local linear, no robustness iterations), in input order.

    Parameters
    ----------
    x, y : array (n,)
        Finite numbers; ``y`` is smoothed on ``x``.
    frac : float
        Span: the fraction of rows in each local fit, ``0 < frac <= 1``.
    delta : float, optional
        Interpolation step (see the module notes); ``None`` means
        ``0.01 * (max(x) - min(x))``, R's default. ``0`` fits at every distinct ``x``.

    Returns
    -------
    array (n,)
        Fitted value for each row, in the order given. Equals
        ``statsmodels.nonparametric.lowess(y, x, frac=frac, it=0, delta=delta,
        return_sorted=False)`` up to rounding, except in the degenerate windows
        described in the module notes.

    References
    ----------
    .. [1] Cleveland WS. J Am Stat Assoc 1979;74(368):829-836.
    """
    yv = as_vector(y, "y")
    xv = as_vector(x, "x")
    check_length(xv, yv.size, "x")
    for name, arr in (("x", xv), ("y", yv)):
        bad = ~np.isfinite(arr)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise StatsInputError(f"{name} must be finite (no NaN or inf); got {arr[i]} at row {i}")
    span = check_frac(frac)
    step = 0.01 * float(np.ptp(xv)) if delta is None else _check_delta(delta)
    srt = sort_rows(xv, yv)
    return smooth_distinct(srt, span, step)[srt.inverse]


def check_frac(frac: float) -> float:
    """The span: a real number with ``0 < frac <= 1``."""
    if isinstance(frac, bool) or not isinstance(frac, int | float) or not 0 < frac <= 1:
        raise StatsInputError(f"frac must be a number with 0 < frac <= 1; got {frac!r}")
    return float(frac)


def _check_delta(delta: float) -> float:
    if (
        isinstance(delta, bool)
        or not isinstance(delta, int | float)
        or not math.isfinite(delta)
        or delta < 0
    ):
        raise StatsInputError(f"delta must be a finite number >= 0; got {delta!r}")
    return float(delta)


def sort_rows(x: FloatArray, y: FloatArray) -> _Sorted:
    """Sort rows by ``x`` and collapse equal ``x`` values (trusted, validated input)."""
    order = np.argsort(x, kind="stable")
    xs = x[order]
    new = np.empty(xs.size, dtype=bool)
    new[0] = True
    np.not_equal(xs[1:], xs[:-1], out=new[1:])
    starts = np.flatnonzero(new)
    group = np.cumsum(new) - 1
    inverse = np.empty(xs.size, dtype=np.intp)
    inverse[order] = group
    count = np.diff(np.append(starts, xs.size)).astype(np.float64)
    ysum = np.add.reduceat(y[order], starts)
    return _Sorted(xs, group, xs[starts], count, ysum, inverse)


def smooth_distinct(srt: _Sorted, frac: float, delta: float) -> FloatArray:
    """Lowess fitted value at each distinct x (``srt.xu``)."""
    n = srt.xs.size
    k = min(max(int(frac * n + 1e-10), 2), n)
    anchors = _anchor_rows(srt.xs, delta)
    values = srt.xs[anchors]
    fits = _anchor_fits(srt, k, values, srt.group[anchors])
    return _interpolate(srt.xu, srt.group[anchors], fits)


def _anchor_rows(xs: FloatArray, delta: float) -> NDArray[np.intp]:
    """Sorted-row indices where a local fit is computed (statsmodels' delta rule)."""
    n = xs.size
    rows = [0]
    i = 0
    while True:
        last = int(np.searchsorted(xs, xs[i], side="right")) - 1  # ties copy the fit
        if last >= n - 1:
            break
        beyond = int(np.searchsorted(xs, xs[i] + delta, side="right"))
        k = beyond if beyond < n else n - 1
        i = max(k - 1, last + 1)
        rows.append(i)
    return np.asarray(rows, dtype=np.intp)


def _anchor_fits(srt: _Sorted, k: int, values: FloatArray, groups: NDArray[np.intp]) -> FloatArray:
    """Local linear fits at the anchor values (windows found all at once)."""
    xs = srt.xs
    n = xs.size
    mid = (xs[: n - k] + xs[k:]) / 2.0
    left = np.minimum(np.searchsorted(mid, values, side="left"), n - k)
    right = left + k - 1  # inclusive
    radius = np.maximum(values - xs[left], xs[right] - values)
    lo = srt.group[left]
    hi = srt.group[right] + 1
    # three work buffers reused by every window: no allocation inside the loop
    buf = np.empty((3, int((hi - lo).max())))
    fits = np.empty(values.size)
    for j in range(values.size):
        fits[j] = _local_fit(
            srt, float(values[j]), float(radius[j]), int(lo[j]), int(hi[j]), buf=buf
        )
    own_mean = srt.ysum[groups] / srt.count[groups]
    return np.where(np.isnan(fits), own_mean, fits)


def _dot(a: FloatArray, b: FloatArray) -> float:
    """Inner product without BLAS: with threaded BLAS dot products the whole curve ran
    7-40 times slower (measured) while other processes shared the two cores."""
    return float(np.einsum("i,i->", a, b))


def _local_fit(srt: _Sorted, v: float, h: float, lo: int, hi: int, *, buf: FloatArray) -> float:
    """Tricube-weighted local linear fit at ``v``; NaN flags a degenerate window."""
    if h <= 0:
        return math.nan
    m = hi - lo
    u, w, t = buf[0, :m], buf[1, :m], buf[2, :m]
    np.subtract(srt.xu[lo:hi], v, out=u)
    np.abs(u, out=t)
    t *= 1.0 / h
    np.multiply(t, t, out=w)
    w *= t
    np.subtract(1.0, w, out=w)
    np.multiply(w, w, out=t)
    w *= t  # w is now the tricube weight (1 - (|u| / h)**3)**3
    c = srt.count[lo:hi]
    s0 = _dot(w, c)
    # the row at v has weight 1, so s0 can only be this small if at most one row
    # has weight > 1e-12; only then count the rows exactly as statsmodels does
    if s0 <= 1.0 + 1.0001 * srt.xs.size * _MIN_WEIGHT and float(c[w > _MIN_WEIGHT].sum()) < 2:
        return math.nan
    ys = srt.ysum[lo:hi]
    ybar = _dot(w, ys) / s0
    np.multiply(w, u, out=t)  # t = w * u
    mean_u = _dot(t, c) / s0
    cov = _dot(t, ys) / s0 - mean_u * ybar
    np.multiply(u, c, out=w)  # w = u * count (weights no longer needed)
    var = max(_dot(t, w) / s0 - mean_u * mean_u, _MIN_VAR)
    return ybar - mean_u * cov / var


def _interpolate(xu: FloatArray, agroups: NDArray[np.intp], fits: FloatArray) -> FloatArray:
    """Fill distinct values between anchors by linear interpolation."""
    out = np.empty(xu.size)
    out[agroups] = fits
    if agroups.size < 2:
        return out
    idx = np.arange(xu.size)
    pos = np.clip(np.searchsorted(agroups, idx, side="right") - 1, 0, agroups.size - 2)
    g0 = agroups[pos]
    g1 = agroups[pos + 1]
    between = (idx > g0) & (idx < g1)
    a = (xu[between] - xu[g0[between]]) / (xu[g1[between]] - xu[g0[between]])
    out[between] = a * fits[pos[between] + 1] + (1.0 - a) * fits[pos[between]]
    return out
