"""Restricted (natural) cubic splines in Harrell's parameterisation.

A restricted cubic spline with knots ``t_1 < ... < t_k`` is a cubic spline that
is linear below ``t_1`` and above ``t_k`` [1]_ [2]_. With an intercept it has
``k`` coefficients: ``x`` itself and ``k - 2`` non-linear columns [3]_.

References
----------
.. [1] Stone CJ, Koo CY. Additive splines in statistics. Proceedings of the
       Statistical Computing Section, American Statistical Association 1985:45-48.
.. [2] Devlin TF, Weeks BJ. Spline functions for logistic regression modeling.
       Proceedings of the 11th Annual SAS Users Group International Conference 1986:646-651.
.. [3] Harrell FE Jr. Regression Modeling Strategies, 2nd ed. Springer 2015, section 2.4.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ._validate import FloatArray, as_vector
from .errors import StatsInputError

__all__ = ["DEFAULT_KNOT_QUANTILES", "rcs_basis", "rcs_knots"]

_OUTER = {3: 0.10, 4: 0.05, 5: 0.05, 6: 0.05, 7: 0.025}
DEFAULT_KNOT_QUANTILES: dict[int, tuple[float, ...]] = {
    k: tuple(float(q) for q in np.linspace(outer, 1 - outer, k)) for k, outer in _OUTER.items()
}
"""Harrell's default knot quantiles by number of knots (3 to 7) [3]_."""

SMALL_N = 100
"""Below this many values the outer knots are the 5th smallest and 5th largest value."""


def _finite(values: ArrayLike, name: str) -> FloatArray:
    """A finite 1-D float array (a scalar becomes length 1)."""
    try:
        scalar = np.ndim(values) == 0
    except ValueError:  # ragged nesting: as_vector reports it
        scalar = False
    arr = as_vector(np.atleast_1d(values) if scalar else values, name)
    bad = ~np.isfinite(arr)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise StatsInputError(f"{name} must be finite (no NaN or inf); got {arr[i]} at row {i}")
    return arr


def rcs_knots(x: ArrayLike, n_knots: int = 4) -> FloatArray:
    """Default knots for a restricted cubic spline of ``x`` (Harrell's table).

    Parameters
    ----------
    x : array (n,)
        Finite values of the predictor.
    n_knots : int
        Number of knots, 3 to 7.

    Returns
    -------
    array (n_knots,)
        Strictly increasing knots.

    Raises
    ------
    StatsInputError
        ``n_knots`` outside 3..7; fewer than 10 values; fewer distinct values
        than knots; or knots that coincide (see Notes).

    Notes
    -----
    The knots are the sample quantiles (numpy's default ``method="linear"``,
    R's type 7) at ``linspace(outer, 1 - outer, n_knots)``, with
    ``outer = 0.10`` for 3 knots, ``0.05`` for 4 to 6 and ``0.025`` for 7 [1]_.
    When ``n < 100`` the outer knots are replaced by the 5th smallest and the
    5th largest value [2]_.

    Ties: the knots are not moved or merged. If tied values (or few rows) make
    two default knots equal or out of order, the function refuses and names
    them; choose fewer knots or give the knots explicitly.

    References
    ----------
    .. [1] Harrell FE Jr. Regression Modeling Strategies, 2nd ed. Springer 2015,
           section 2.4.6.
    .. [2] Harrell FE Jr. Hmisc R package, function ``rcspline.eval`` (default knots).

    Examples
    --------
    >>> np.round(rcs_knots(np.arange(1.0, 201.0), 3), 6).tolist()
    [20.9, 100.5, 180.1]
    """
    if isinstance(n_knots, bool) or not isinstance(n_knots, int | np.integer):
        raise StatsInputError(f"n_knots must be an integer from 3 to 7; got {n_knots!r}")
    if n_knots not in _OUTER:
        raise StatsInputError(
            f"n_knots must be from 3 to 7 for default knots; got {n_knots} (give the knots "
            "explicitly for other numbers)"
        )
    xv = _finite(x, "x")
    n = xv.size
    if n < 10:
        raise StatsInputError(
            f"x must have at least 10 values for default knots (the outer knots are the 5th "
            f"smallest and 5th largest value); got {n}"
        )
    distinct = np.unique(xv).size
    if distinct < n_knots:
        raise StatsInputError(
            f"x must have at least n_knots = {n_knots} distinct values for default knots; got "
            f"{distinct}"
        )
    knots = np.quantile(xv, DEFAULT_KNOT_QUANTILES[n_knots])
    if n < SMALL_N:
        ordered = np.sort(xv)
        knots[0], knots[-1] = ordered[4], ordered[-5]
    _require_increasing(knots, f"the default knots of x for n_knots = {n_knots}", tied=True)
    return np.asarray(knots, dtype=np.float64)


def _require_increasing(knots: FloatArray, what: str, *, tied: bool = False) -> None:
    steps = np.diff(knots)
    if (steps > 0).all():
        return
    i = int(np.flatnonzero(steps <= 0)[0])
    cause = (
        " because of tied values in x (or too few values for this many knots); use fewer "
        "knots or give the knots explicitly"
        if tied
        else ""
    )
    raise StatsInputError(
        f"{what} must be strictly increasing; got {knots[i]:g} then {knots[i + 1]:g} at "
        f"positions {i} and {i + 1}{cause}"
    )


def rcs_basis(x: ArrayLike, knots: ArrayLike) -> FloatArray:
    """Restricted cubic spline basis in Harrell's parameterisation (``norm=2``).

    Parameters
    ----------
    x : array (n,) or scalar
        Finite values at which to evaluate the basis; values outside the
        boundary knots are allowed (the spline is linear there).
    knots : array (k,)
        At least 3 finite, strictly increasing knots ``t_1 < ... < t_k``.

    Returns
    -------
    array (n, k - 1)
        Column 0 is ``x``; column ``j`` (1 to k-2) is [1]_ [2]_

        ``[(x - t_j)+^3 - (x - t_{k-1})+^3 (t_k - t_j) / (t_k - t_{k-1})
        + (x - t_k)+^3 (t_{k-1} - t_j) / (t_k - t_{k-1})] / (t_k - t_1)^2``.

    Notes
    -----
    Above ``t_k`` each column is computed from its exact linear form
    ``f(t_k) + f'(t_k) (x - t_k)``, which avoids cancellation between large
    cubes far outside the knots; below ``t_1`` the non-linear columns are 0.

    References
    ----------
    .. [1] Harrell FE Jr. Regression Modeling Strategies, 2nd ed. Springer 2015, section 2.4.5.
    .. [2] Devlin TF, Weeks BJ. Proc SUGI 1986;11:646-651.

    Examples
    --------
    >>> rcs_basis([3.0], [0.0, 1.0, 2.0]).tolist()
    [[3.0, 3.0]]
    """
    xv = _finite(x, "x")
    t = _finite(knots, "knots")
    if t.size < 3:
        raise StatsInputError(f"knots must number at least 3; got {t.size}")
    _require_increasing(t, "knots")
    tj, t_km1, t_k = t[:-2], t[-2], t[-1]
    norm = (t_k - t[0]) ** 2
    last = t_k - t_km1

    def cube(u: FloatArray) -> FloatArray:
        return np.asarray(np.maximum(u, 0.0) ** 3, dtype=np.float64)

    inside = np.minimum(xv, t_k)[:, None]
    cols = (
        cube(inside - tj)
        - cube(inside - t_km1) * ((t_k - tj) / last)
        + cube(inside - t_k) * ((t_km1 - tj) / last)
    )
    slope_at_tk = 3.0 * (t_k - tj) * (t_km1 - tj)
    cols = cols + np.maximum(xv - t_k, 0.0)[:, None] * slope_at_tk
    return np.column_stack([xv, cols / norm])
