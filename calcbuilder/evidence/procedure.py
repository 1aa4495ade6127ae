"""The modelling procedure re-run on every bootstrap resample, and what each resample measures.

Harrell's optimism correction is honest only when every data-driven step of the
development is repeated on each resample [1]_ [2]_. For a recipe those steps are:

* restricted cubic spline knots given as a count: placed at Harrell's default
  quantiles (:func:`calcbuilder.stats.rcs_knots`) of the resample, after
  truncation;
* a ``levels`` term whose reference is not named: the most frequent choice of
  the resample;
* the coefficients: refitted by maximum likelihood, or Firth's penalised
  likelihood when the recipe asks.

Resamples arrive as frequency weights (a weight of k means k copies of the row,
:mod:`calcbuilder.stats.resampling`); the data-driven steps see the rows repeated
by their weights, the fit sees the weights. Choices are those of the calculator
in every resample (a choice absent from a resample makes its column constant,
so that resample fails and is counted). Developed ranges do not change the model.

Two paths: when nothing is data-driven and the fit is plain maximum likelihood,
:class:`calcbuilder.stats.PlainLogistic` refits the fixed design matrix in
batches (fast path); otherwise :class:`RecipeProcedure` re-runs the recipe per
resample (slow path). :func:`choose_procedure` says which ran and why.

Per resample, :func:`bootstrap_metrics` measures the AUC, Brier score, scaled
Brier score, calibration intercept and slope, optionally the ICI (one lowess per
resample and weighting, so only up to :data:`ICI_MAX_ROWS` rows by default) and
the model's net benefit at every decision-curve threshold (one
:func:`calcbuilder.stats.decision_curve` per resample and weighting, shared by
all thresholds).

References
----------
.. [1] Harrell FE Jr, Lee KL, Mark DB. Stat Med 1996;15:361-387.
.. [2] Steyerberg EW, Harrell FE Jr, Borsboom GJ, et al. J Clin Epidemiol 2001;54:774-781.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from itertools import pairwise
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .. import stats as st
from ..stats import Metric, PlainLogistic
from ._recipe_transform import PlannedTerm
from ._terms import ResolvedTerm, design_matrix, resolve_terms
from .datacheck import Prepared

__all__ = [
    "ICI_MAX_ROWS",
    "Procedure",
    "RecipeProcedure",
    "bootstrap_metrics",
    "choose_procedure",
    "data_driven_steps",
    "fixed_design",
    "net_benefit_name",
]

ICI_MAX_ROWS = 50_000
"""Largest data for which the ICI's optimism is estimated by default (cost: 2 lowess fits
per resample)."""
FloatArray = NDArray[np.float64]


def _expit(eta: FloatArray) -> FloatArray:
    with np.errstate(over="ignore"):
        return np.asarray(1.0 / (1.0 + np.exp(-eta)), dtype=np.float64)


def _counts(weights: FloatArray) -> NDArray[np.int64]:
    w = np.asarray(weights, dtype=float)
    counts = np.rint(w)
    if (counts < 0).any() or not np.array_equal(counts, w):
        raise ValueError("the recipe procedure needs whole-number frequency weights")
    return counts.astype(np.int64)


class RecipeProcedure:
    """``fit(X, y, weights) -> predict``: the recipe re-run on weighted rows (slow path).

    ``X`` must be the row positions ``numpy.arange(n)`` of the prepared data (the
    procedure reads the values from ``prepared``); ``predict(X)`` returns the
    risks of those original rows under the model refitted on the resample.

    Parameters
    ----------
    prepared : Prepared
        The development data checked against the recipe.
    """

    def __init__(self, prepared: Prepared) -> None:
        self.prepared = prepared
        self.firth = prepared.recipe.fit.firth
        self._plans = prepared.recipe.term_plan
        self._driven = [_is_data_driven(plan) for plan in self._plans]
        X, names = prepared.design_matrix()
        self._names = names
        self._blocks = _split(X, prepared.terms)
        self._has_products = any(plan.type == "product" for plan in self._plans)

    def _resolve(self, counts: NDArray[np.int64]) -> list[ResolvedTerm]:
        """The terms with every data-driven setting placed on the weighted rows."""
        p = self.prepared
        terms = list(p.terms)
        problems: list[str] = []
        for i, plan in enumerate(self._plans):
            if self._driven[i] and plan.input is not None:
                values = {plan.input: np.repeat(p.values[plan.input], counts)}
                found = resolve_terms([plan], values, p.choices, problems)
                if found is None:
                    raise ValueError("; ".join(problems))
                terms[i] = found[0]
        return terms

    def design(self, weights: FloatArray) -> tuple[FloatArray, list[str]]:
        """The design of the original rows with knots and references placed on the resample."""
        p = self.prepared
        terms = self._resolve(_counts(weights))
        changed = [t != o for t, o in zip(terms, p.terms, strict=True)]
        if self._has_products and any(changed):
            return design_matrix(terms, p.values, p.choices)
        blocks = [design_matrix([t], p.values, p.choices)[0] if c else b
                  for t, c, b in zip(terms, changed, self._blocks, strict=True)]
        return np.hstack(blocks), self._names

    def __call__(self, X: Any, y: FloatArray, weights: FloatArray
                 ) -> Callable[[Any], FloatArray]:
        del X  # the values come from ``prepared``; X only names the rows
        Z, _ = self.design(weights)
        coef = st.fit_logistic(Z, y, weights=weights, firth=self.firth).coef
        risk = _expit(coef[0] + Z @ coef[1:])

        def predict(rows: Any) -> FloatArray:
            return risk[np.asarray(rows, dtype=np.intp)]

        return predict


def _is_data_driven(plan: PlannedTerm) -> bool:
    return plan.knots_from_data is not None or (
        plan.type == "levels" and plan.settings.get("reference") is None)


def _split(X: FloatArray, terms: Sequence[ResolvedTerm]) -> list[FloatArray]:
    edges = np.cumsum([0, *(t.n_columns for t in terms)])
    return [X[:, a:b] for a, b in pairwise(edges)]


def data_driven_steps(prepared: Prepared) -> list[str]:
    """The recipe's data-driven steps, in words (empty: a fixed design)."""
    steps = []
    for plan in prepared.recipe.term_plan:
        if plan.knots_from_data is not None:
            steps.append(f"the {plan.knots_from_data} spline knots of '{plan.name}' are placed "
                         "at quantiles of each resample")
        if plan.type == "levels" and plan.settings.get("reference") is None:
            steps.append(f"the reference level of '{plan.name}' is the most frequent choice of "
                         "each resample")
    return steps


@dataclass(frozen=True, eq=False)
class Procedure:
    """The procedure handed to :func:`calcbuilder.stats.bootstrap_optimism`.

    Attributes
    ----------
    procedure : PlainLogistic or callable
    X : array
        What the procedure is given: the design matrix (fast path) or the row
        positions (slow path).
    path : str
        ``"fast"`` or ``"slow"``.
    description : str
        One sentence: what is refitted per resample and how.
    """

    procedure: PlainLogistic | Callable[..., Any]
    X: Any
    path: str
    description: str


def fixed_design(X: FloatArray, why: str) -> Procedure:
    """The fast path on a fixed design matrix (no intercept column)."""
    return Procedure(PlainLogistic(), np.asarray(X, dtype=float), "fast",
                     "fast path: maximum-likelihood refits of the fixed design matrix, batched "
                     f"Newton steps (calcbuilder.stats.PlainLogistic); {why}")


def choose_procedure(prepared: Prepared) -> Procedure:
    """The fast path when nothing is data-driven and the fit is plain ML, else the recipe."""
    steps = data_driven_steps(prepared)
    firth = prepared.recipe.fit.firth
    if not steps and not firth:
        X, _ = prepared.design_matrix()
        return fixed_design(X, "the recipe fixes every knot and reference level")
    fit = "Firth's penalised likelihood" if firth else "maximum likelihood"
    what = "; ".join(steps) if steps else "the coefficients are refitted"
    return Procedure(RecipeProcedure(prepared), np.arange(prepared.y.size), "slow",
                     f"slow path: the recipe is re-run on every resample ({what}; {fit} refit)")


def net_benefit_name(threshold: float) -> str:
    """Internal metric name of the model's net benefit at one threshold."""
    return f"net_benefit_{threshold:.6f}"


class _NetBenefits:
    """Net benefit at every threshold from one decision curve per (risk row, weighting)."""

    def __init__(self, thresholds: FloatArray) -> None:
        self.thresholds = np.asarray(thresholds, dtype=float)
        self._R: FloatArray | None = None
        self._Ws: list[FloatArray] = []
        self._values: list[FloatArray] = []

    def _fresh(self, R: FloatArray, Ws: Sequence[FloatArray]) -> bool:
        return (self._R is R and len(Ws) == len(self._Ws)
                and all(np.array_equal(a, b) for a, b in zip(Ws, self._Ws, strict=True)))

    def _compute(self, y: FloatArray, R: FloatArray, Ws: Sequence[FloatArray]) -> None:
        self._values = []
        for W in Ws:
            Wb = np.broadcast_to(W, R.shape)
            ones = [bool(np.all(Wb[i] == 1.0)) for i in range(R.shape[0])]
            self._values.append(np.array([  # unit weights: the faster unweighted path
                st.decision_curve(y, R[i], self.thresholds,
                                  weights=None if ones[i] else Wb[i]).model
                for i in range(R.shape[0])]).reshape(R.shape[0], self.thresholds.size))
        self._R, self._Ws = R, [np.array(W) for W in Ws]

    def metric(self, j: int) -> Metric:
        def rows(y: FloatArray, R: FloatArray, L: FloatArray, Ws: Sequence[FloatArray]
                 ) -> list[tuple[FloatArray, NDArray[np.bool_]]]:
            del L
            if not self._fresh(R, Ws):
                self._compute(y, R, Ws)
            return [(v[:, j].copy(), np.ones(R.shape[0], bool)) for v in self._values]

        return Metric(net_benefit_name(float(self.thresholds[j])), rows)


def _ici(y: FloatArray, risk: FloatArray, weights: FloatArray) -> float:
    counts = _counts(weights)
    return st.calibration_errors(np.repeat(y, counts), np.repeat(risk, counts)).ici


def _scaled(y: FloatArray, risk: FloatArray, weights: FloatArray) -> float:
    return st.scaled_brier(y, risk, weights=weights)


def _citl(y: FloatArray, risk: FloatArray, weights: FloatArray) -> float:
    return st.calibration_intercept(y, risk, weights=weights).value


def bootstrap_metrics(thresholds: Sequence[float] | FloatArray, *, ici: bool
                      ) -> list[str | Metric]:
    """What each resample measures, on its own rows and on the original data.

    Returns the built-in ``auc``, ``brier``, ``calibration_slope``; then
    ``scaled_brier``, ``calibration_intercept``, ``ici`` (when ``ici``) and one
    net benefit per threshold (:func:`net_benefit_name`).
    """
    out: list[str | Metric] = [
        "auc", "brier", "calibration_slope",
        Metric.from_scalar("scaled_brier", _scaled),
        Metric.from_scalar("calibration_intercept", _citl),
    ]
    if ici:
        out.append(Metric.from_scalar("ici", _ici))
    nets = _NetBenefits(np.asarray(thresholds, dtype=float))
    out += [nets.metric(j) for j in range(nets.thresholds.size)]
    return out
