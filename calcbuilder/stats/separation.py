"""Detection of complete and quasi-complete separation in binary logistic regression.

The maximum-likelihood estimate of a logistic model does not exist when some
direction ``b != 0`` of the design ``Z = [1, X]`` satisfies ``(2 y_i - 1) z_i'b >= 0``
for every row [1]_. If the inequality can be made strict for every row the
separation is *complete*; otherwise it is *quasi-complete* and the rows where it
can be strict are predicted perfectly while the remaining rows lie on the
separating hyperplane. Detection is a linear programme [2]_ solved with
``scipy.optimize.linprog`` (HiGHS).

References
----------
.. [1] Albert A, Anderson JA. On the existence of maximum likelihood estimates in
       logistic regression models. Biometrika 1984;71:1-10.
.. [2] Konis K. Linear programming algorithms for detecting separated data in
       binary logistic regression models. DPhil thesis, University of Oxford, 2007.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._validate import FloatArray, as_outcome, as_weights, check_length, require_both_classes
from .errors import StatsInputError

__all__ = ["SeparationResult", "detect_separation"]

_MARGIN_TOL = 1e-7  # margins (|b_j| <= 1 on the column-scaled design) at or below count as 0
_HIGHS = {"primal_feasibility_tolerance": 1e-10, "dual_feasibility_tolerance": 1e-10}
_SHOWN = 8  # columns named in a message before "and N more"
_ROUNDS = 20  # LP rounds collecting the rows a quasi-complete separation predicts


@dataclass(frozen=True)
class SeparationResult:
    """Result of :func:`detect_separation`.

    ``kind`` is ``"none"``, ``"quasi-complete"`` or ``"complete"``. ``n_separated``
    counts the rows (of ``n_rows`` with positive weight) that can be predicted
    perfectly; ``columns`` lists the X columns (counting from 0) used by the
    separating direction found; ``single_columns`` lists the X columns that
    separate the outcome on their own (with the intercept); ``direction`` is that
    direction on the original scale, intercept first (zeros when ``kind == "none"``).
    """

    kind: Literal["none", "quasi-complete", "complete"]
    n_separated: int
    n_rows: int
    columns: tuple[int, ...]
    single_columns: tuple[int, ...]
    direction: FloatArray

    def message(self) -> str:
        """One sentence describing the separation and what to do about it."""
        if self.kind == "none":
            return "no separation: the maximum-likelihood estimates exist"
        if self.kind == "complete":
            rows = f"all {self.n_rows} rows"
        elif self.n_separated == 0:  # found by the one-column check only
            rows = "some rows (the others tie on the separating boundary)"
        else:
            rows = (
                f"{self.n_separated} of {self.n_rows} rows (the other rows tie on the "
                "separating boundary)"
            )
        alone = ""
        if self.single_columns:
            verb = "separates" if len(self.single_columns) == 1 else "each separate"
            alone = f"; {_names(self.single_columns)} {verb} the outcome on its own"
        return (
            f"{self.kind} separation: {_direction(self.columns)} predicts the outcome "
            f"perfectly in {rows}{alone}; the maximum-likelihood estimates do not exist "
            "(they diverge to infinity). Use firth=True for finite "
            "penalised estimates, or merge sparse categories / remove the column"
        )


def _direction(cols: tuple[int, ...]) -> str:
    if not cols:
        return "the intercept"
    return f"a combination of {_names(cols)} and the intercept"


def _names(cols: tuple[int, ...]) -> str:
    label = "X column" if len(cols) == 1 else "X columns"
    shown = ", ".join(str(c) for c in cols[:_SHOWN])
    more = f" and {len(cols) - _SHOWN} more" if len(cols) > _SHOWN else ""
    return f"{label} {shown}{more}"


def _design_matrix(X: ArrayLike, n: int) -> FloatArray:
    """Validate ``X`` (finite, n rows, 2-D or 1-D) and prepend the intercept column."""
    try:
        arr = np.asarray(X, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise StatsInputError(f"X must be numeric; got {exc}") from None
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise StatsInputError(f"X must be two-dimensional (rows x columns); got shape {arr.shape}")
    check_length(arr, n, "X")
    if not np.isfinite(arr).all():
        r, c = np.argwhere(~np.isfinite(arr))[0]
        raise StatsInputError(f"X must be finite; got {arr[r, c]} at row {r}, column {c}")
    return np.column_stack([np.ones(n), arr])


def detect_separation(
    X: ArrayLike, y: ArrayLike, *, weights: ArrayLike | None = None
) -> SeparationResult:
    """Test whether the logistic maximum-likelihood estimate exists.

    Parameters
    ----------
    X : array (n, p)
        Predictors without a constant column (the intercept is added).
    y : array (n,)
        Outcome coded 0/1.
    weights : array (n,), optional
        Frequency weights; rows with weight 0 are ignored.

    Returns
    -------
    SeparationResult

    Notes
    -----
    With ``s_i = 2 y_i - 1`` and the design scaled to columns of maximum
    absolute value 1, the linear programme of [1]_, ``max sum_i s_i z_i'b``
    subject to ``s_i z_i'b >= 0`` and ``|b_j| <= 1``, is positive exactly when the
    data are separated. A second programme, ``max t`` subject to
    ``s_i z_i'b >= t``, tells complete (``t > 0``) from quasi-complete separation;
    in the quasi-complete case further rounds over the rows not yet strict
    collect the rows that can be predicted perfectly (separating directions
    form a cone, so their sum predicts the union). Margins of at most ``1e-7``
    on the scaled design count as ties. Identical rows are solved once. A
    column separates on its own when ``max(x | y=0) <= min(x | y=1)`` or the
    reverse.

    References
    ----------
    .. [1] Konis K. Linear programming algorithms for detecting separated data in
           binary logistic regression models. DPhil thesis, University of Oxford, 2007.

    Examples
    --------
    >>> detect_separation([[1.0], [2.0], [3.0], [4.0]], [0, 0, 1, 1]).kind
    'complete'
    """
    yv = as_outcome(y)
    n = yv.size
    Z = _design_matrix(X, n)
    w = as_weights(weights, n)
    require_both_classes(yv, w, "separation detection")
    keep = w > 0
    return separation_on_design(Z[keep], yv[keep])


def separation_on_design(Z: FloatArray, y: FloatArray) -> SeparationResult:
    """:func:`detect_separation` on a validated design (intercept first, rows used only)."""
    n, k = Z.shape
    scale = np.max(np.abs(Z), axis=0)
    scale[scale == 0] = 1.0
    S_all = (2.0 * y - 1.0)[:, None] * (Z / scale)
    S = np.unique(S_all, axis=0)  # identical rows give identical constraints
    single = _single_columns(Z, y)
    b = _max_margin(S, np.ones(S.shape[0], dtype=bool))
    if b is None:
        return _none(n, k, single)
    full = _complete(S)
    if full is not None:
        b, kind = full, "complete"
    else:
        kind = "quasi-complete"
        for _ in range(_ROUNDS):  # add directions until no further row can be made strict
            more = _max_margin(S, S @ b <= _MARGIN_TOL)
            if more is None:
                break
            b = b + more
    assert b is not None
    margins = S_all @ b
    big = np.abs(b[1:]) > 1e-6 * np.abs(b).max()
    columns = tuple(int(j) for j in np.flatnonzero(big))
    strict = int(np.sum(margins > _MARGIN_TOL))
    result_kind: Literal["quasi-complete", "complete"] = (
        "complete" if kind == "complete" else "quasi-complete"
    )
    return SeparationResult(result_kind, strict, n, columns, single, b / scale)


def _max_margin(S: FloatArray, rows: NDArray[np.bool_]) -> FloatArray | None:
    """Konis's LP: ``max sum_{rows} S b`` with ``S b >= 0`` and ``|b| <= 1``; None if 0."""
    from scipy.optimize import linprog

    k = S.shape[1]
    res = linprog(
        -S[rows].sum(axis=0),
        A_ub=-S,
        b_ub=np.zeros(S.shape[0]),
        bounds=[(-1.0, 1.0)] * k,
        method="highs",
        options=_HIGHS,
    )
    if res.status != 0 or res.x is None:  # pragma: no cover - bounded and feasible (b = 0)
        return None
    b = np.asarray(res.x, dtype=np.float64)
    margins = S @ b
    if not (margins[rows] > _MARGIN_TOL).any() or margins.min() < -1e-9:
        return None
    return b


def _complete(S: FloatArray) -> FloatArray | None:
    """A direction with ``S b >= t > 0`` for every row, if one exists (max t, ``|b| <= 1``)."""
    from scipy.optimize import linprog

    n, k = S.shape
    A_ub = np.column_stack([-S, np.ones(n)])  # t - S b <= 0
    cost = np.zeros(k + 1)
    cost[-1] = -1.0
    res = linprog(
        cost,
        A_ub=A_ub,
        b_ub=np.zeros(n),
        bounds=[(-1.0, 1.0)] * k + [(None, 1.0)],
        method="highs",
        options=_HIGHS,
    )
    if res.status != 0 or res.x is None or res.x[-1] <= _MARGIN_TOL:
        return None
    return np.asarray(res.x[:k], dtype=np.float64)


def _none(n: int, k: int, single: tuple[int, ...]) -> SeparationResult:
    if single:  # the one-column check is exact; trust it if the LP was inconclusive
        return SeparationResult("quasi-complete", 0, n, single, single, np.zeros(k))
    return SeparationResult("none", 0, n, (), (), np.zeros(k))


def _single_columns(Z: FloatArray, y: FloatArray) -> tuple[int, ...]:
    """X columns (counting from 0) that separate y on their own, with an intercept."""
    events, nonevents = Z[y == 1, 1:], Z[y == 0, 1:]
    up = nonevents.max(axis=0) <= events.min(axis=0)
    down = events.max(axis=0) <= nonevents.min(axis=0)
    const = np.ptp(Z[:, 1:], axis=0) == 0 if Z.shape[1] > 1 else np.zeros(0, dtype=bool)
    return tuple(int(j) for j in np.flatnonzero((up | down) & ~const))
