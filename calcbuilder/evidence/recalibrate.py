"""Updating a logistic model for a new setting: intercept update and logistic recalibration.

methods.md section 8, methods 1 and 2 [1]_ [2]_ [3]_, fitted on new data with the
calculator's current ``eta`` (logit of its risk, after any earlier recalibration):

* ``intercept`` (recalibration-in-the-large): ``logit P = a + 1 * eta`` (``eta`` as an
  offset); updated ``eta' = a + eta``;
* ``slope`` (logistic recalibration): ``logit P = a + b * eta``; ``eta' = a + b * eta``.

A model that already carries a recalibration ``(a1, b1)`` gets the composition
``eta'' = a2 + b2 (a1 + b1 eta) = (a2 + b2 a1) + b2 b1 eta``; the method is then
``slope`` unless both slopes are 1.

The updated calculator keeps every earlier evidence set, gains an ``external``
set for the new data before updating (unless one for the same data is already
there) and a ``recalibrated`` set after it; its test vectors are recomputed by
an independent route, ``expit(a + b * logit(stored risk))``, and checked against
our scoring; its signature is removed (the file must be signed again).

References
----------
.. [1] Steyerberg EW, Borsboom GJ, van Houwelingen HC, Eijkemans MJ, Habbema JD.
       Validation and updating of predictive logistic regression models: a study
       on sample size and shrinkage. Stat Med 2004;23:2567-2586.
.. [2] Janssen KJ, Moons KG, Kalkman CJ, Grobbee DE, Vergouwe Y. Updating methods
       improved the performance of a clinical prediction model in new patients.
       J Clin Epidemiol 2008;61:76-86.
.. [3] Steyerberg EW. Clinical Prediction Models, 2nd ed. Springer 2019 (updating chapter).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..calc.document import Calculator
from ..calc.model import Recalibration
from ..calc.problems import Problems
from ..calc.vectors import TOLERANCE, vector_risks
from ..errors import CalcbuilderError
from ..stats import CalibrationEstimate, calibration_intercept, calibration_slope, fit_logistic
from .errors import DataError

if TYPE_CHECKING:
    from .scoring_data import ScoredData

__all__ = [
    "METHODS",
    "CalibrationSummary",
    "RecalibrationFit",
    "RecalibrationResult",
    "compose",
    "fit_recalibration",
    "recalibrate",
    "updated_vector_risks",
]

METHODS = ("intercept", "slope")
"""The updating methods offered (methods.md section 8, methods 1 and 2)."""

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class RecalibrationFit:
    """The fitted update ``eta' = intercept + slope * eta`` on the new data.

    ``cov`` is the inverse Fisher information of the fitted parameters
    (1 x 1 for ``intercept``: the slope is fixed at 1; 2 x 2 for ``slope``).
    """

    method: str
    intercept: float
    slope: float
    cov: FloatArray
    loglik: float
    n: int
    events: int

    @property
    def intercept_se(self) -> float:
        """Standard error of the intercept."""
        return math.sqrt(float(self.cov[0, 0]))

    @property
    def slope_se(self) -> float | None:
        """Standard error of the slope (None when the slope was fixed at 1)."""
        return math.sqrt(float(self.cov[1, 1])) if self.cov.shape[0] > 1 else None


def fit_recalibration(y: ArrayLike, eta: ArrayLike, method: str) -> RecalibrationFit:
    """Fit an intercept update or a logistic recalibration on new data.

    Parameters
    ----------
    y : array (n,)
        Outcome coded 0/1 (1 = event) in the new data; both classes must occur.
    eta : array (n,)
        The model's current linear predictor (logit of its risk) for the same rows.
    method : {"intercept", "slope"}
        ``intercept``: ``logit P = a + eta`` (eta as an offset); ``slope``:
        ``logit P = a + b eta``.

    Returns
    -------
    RecalibrationFit

    Raises
    ------
    CalcbuilderError
        Unknown method, or a fitted slope that is not positive (the model would
        rank patients the wrong way round, or not at all, in the new data).
    StatsInputError
        Bad data (single outcome class, separation, all ``eta`` equal for ``slope``).

    Notes
    -----
    With ``method="intercept"`` the score equation gives
    ``sum(expit(a + eta)) = sum(y)``; when every ``eta`` equals ``c``,
    ``a = logit(mean(y)) - c`` (methods.md section 8 analytic checks).

    References
    ----------
    .. [1] Steyerberg EW et al. Stat Med 2004;23:2567-2586.
    .. [2] Janssen KJ et al. J Clin Epidemiol 2008;61:76-86.
    """
    if method not in METHODS:
        raise CalcbuilderError(f"method must be 'intercept' or 'slope'; got {method!r}")
    yv = np.asarray(y, dtype=float)
    ev = np.asarray(eta, dtype=float)
    if method == "intercept":
        fit = fit_logistic(np.empty((ev.size, 0)), yv, offset=ev)
        a, b = float(fit.coef[0]), 1.0
    else:
        fit = fit_logistic(ev[:, None], yv)
        a, b = float(fit.coef[0]), float(fit.coef[1])
        if not b > 0:
            raise CalcbuilderError(
                f"the fitted calibration slope is {b:.4g}: in the new data the model does not "
                "rank patients in the right direction, so it cannot be recalibrated; "
                "consider a new model instead")
    return RecalibrationFit(method, a, b, np.asarray(fit.cov, dtype=float), fit.loglik,
                            int(yv.size), int(yv.sum()))


def compose(previous: Recalibration | None, fit: RecalibrationFit, *, dataset: str,
            ) -> Recalibration:
    """The recalibration to store: ``fit`` alone, or ``fit`` after ``previous``.

    ``eta'' = a2 + b2 (a1 + b1 eta)``: intercept ``a2 + b2 a1``, slope ``b2 b1``.
    The method is ``intercept`` only when the resulting slope is exactly 1.
    """
    a, b = fit.intercept, fit.slope
    where = dataset
    if previous is not None:
        a, b = fit.intercept + fit.slope * previous.intercept, fit.slope * previous.slope
        where = f"{dataset} (after an earlier recalibration on {previous.dataset})"[:500]
    method = "intercept" if b == 1.0 else "slope"
    return Recalibration(method, a, b, where, fit.n, fit.events)


def _expit(x: float) -> float:
    return 1.0 / (1.0 + math.exp(-x)) if x >= 0 else math.exp(x) / (1.0 + math.exp(x))


def updated_vector_risks(calc: Calculator, fit: RecalibrationFit) -> list[float]:
    """Each test vector's risk after the update, ``expit(a + b * logit(stored risk))``.

    Computed from the stored risks only (not by our scoring), so that loading
    the updated file checks our scoring against an independent route.
    """
    out = []
    for vec in calc.test_vectors:
        r = vec.risk
        if not 0.0 < r < 1.0:
            raise CalcbuilderError(
                f"test vector {vec.name!r} states risk {r!r}; a risk of exactly 0 or 1 cannot "
                "be recalibrated on the logit scale")
        out.append(_expit(fit.intercept + fit.slope * (math.log(r) - math.log1p(-r))))
    return out


@dataclass(frozen=True)
class CalibrationSummary:
    """Calibration of risks on one dataset: intercept (CITL), slope and observed/expected.

    ``intercept`` is the offset intercept ``a`` of ``logit P = a + LP`` and
    ``slope`` is ``b`` of ``logit P = a' + b LP`` (methods.md 3.3), each with a 95%
    Wald interval; ``observed_expected`` is ``sum(y) / sum(risk)``.
    """

    intercept: CalibrationEstimate
    slope: CalibrationEstimate
    observed_expected: float

    @classmethod
    def of(cls, y: ArrayLike, risk: ArrayLike) -> CalibrationSummary:
        """Compute the three summaries with :mod:`calcbuilder.stats`."""
        yv, rv = np.asarray(y, dtype=float), np.asarray(risk, dtype=float)
        return cls(calibration_intercept(yv, rv), calibration_slope(yv, rv),
                   float(yv.sum() / rv.sum()))

    @property
    def miscalibrated(self) -> bool:
        """True when the slope's 95% CI excludes 1 or the intercept's excludes 0."""
        return (not self.slope.low <= 1.0 <= self.slope.high
                or not self.intercept.low <= 0.0 <= self.intercept.high)

    def to_dict(self) -> dict[str, Any]:
        """Plain numbers for JSON output."""
        def est(e: CalibrationEstimate) -> dict[str, float]:
            return {"value": e.value, "se": e.se, "low": e.low, "high": e.high}
        return {"intercept": est(self.intercept), "slope": est(self.slope),
                "observed_expected": self.observed_expected,
                "miscalibrated": self.miscalibrated}


@dataclass(frozen=True)
class RecalibrationResult:
    """What :func:`recalibrate` did; ``calculator`` is validated and unsigned.

    ``evidence_ids`` are the ids of the evidence sets added (``external`` first when
    ``added_external``, then ``recalibrated``).
    """

    calculator: Calculator
    fit: RecalibrationFit
    recalibration: Recalibration
    previous: Recalibration | None
    before: CalibrationSummary
    after: CalibrationSummary
    added_external: bool
    was_signed: bool
    evidence_ids: tuple[str, ...] = ()


def _unique_id(kind: str, taken: set[str]) -> str:
    k = 1
    while f"{kind}-{k}" in taken:
        k += 1
    return f"{kind}-{k}"


def _has_external(calc: Calculator, dataset: dict[str, Any]) -> bool:
    """An ``external`` set for the same data (same SHA-256, else same name, n and events)."""
    for e in calc.evidence:
        if e.kind != "external":
            continue
        theirs = e.raw["dataset"]
        if dataset.get("sha256") and theirs.get("sha256"):
            if theirs["sha256"] == dataset["sha256"]:
                return True
        elif (theirs["name"], e.n, e.events) == (dataset["name"], dataset["n"],
                                                 dataset["events"]):
            return True
    return False


@dataclass
class _EvidenceMaker:
    """Builds evidence sets for one dataset with unique ids (``taken`` grows)."""

    data: ScoredData
    dataset: dict[str, Any]
    taken: set[str]
    opts: dict[str, Any]

    def make(self, risk: FloatArray, kind: str, label: str,
             extra: dict[str, Any] | None = None) -> dict[str, Any]:
        from .metrics import evidence_set

        settings = {"outcome_column": self.data.outcome.column,
                    "outcome_event": self.data.outcome.event_value, **(extra or {})}
        made = evidence_set(self.data.y, risk, kind=kind, label=label, dataset=self.dataset,
                            settings=settings, **self.opts)
        made["id"] = _unique_id(kind, self.taken)
        self.taken.add(made["id"])
        return made


def _new_evidence(calc: Calculator, maker: _EvidenceMaker, after: FloatArray,
                  method: str) -> tuple[list[dict[str, Any]], bool]:
    name = maker.dataset["name"]
    out = []
    added = not _has_external(calc, maker.dataset)
    if added:
        out.append(maker.make(maker.data.risks[0], "external", f"{name} (before updating)"))
    note = ("recalibrated and assessed on the same data: calibration in the large is right "
            "by construction; judge the updated model on other data")
    out.append(maker.make(after, "recalibrated", f"{name} (after {method} update)",
                          {"recalibration_method": method, "note": note}))
    return out, added


def _rebuild(calc: Calculator, recal: Recalibration, evidence: Sequence[dict[str, Any]],
             vectors: list[float]) -> Calculator:
    payload = calc.payload()
    payload["model"] = dataclasses.replace(calc.model, recalibration=recal).to_dict()
    payload["evidence"] = [*payload["evidence"], *evidence]
    for vec, risk in zip(payload["test_vectors"], vectors, strict=True):
        vec["risk"] = risk
    updated = Calculator.from_dict(payload, check_vectors=False)
    _verify_vectors(updated)
    return updated


def _verify_vectors(calc: Calculator) -> None:
    """Our scoring must reproduce the independently recomputed vector risks."""
    problems = Problems()
    ours = vector_risks(calc, problems)
    problems.raise_if_any("the recalibrated test vectors cannot be scored")
    for i, risk in ours.items():
        vec = calc.test_vectors[i]
        if not abs(risk - vec.risk) <= TOLERANCE:
            raise CalcbuilderError(
                f"test vector {vec.name!r}: the recalibrated model computes {risk:.12g} but "
                f"expit(a + b * logit(stored risk)) gives {vec.risk:.12g} (difference "
                f"{abs(risk - vec.risk):.3g} > {TOLERANCE:g}); nothing was written")


def recalibrate(calc: Calculator, data: ScoredData, method: str, *, name: str,
                seed: int | None = None, band_boot: int = 200,
                progress: Callable[..., Any] | None = None) -> RecalibrationResult:
    """Update ``calc`` on new data and return the updated, unsigned calculator.

    Parameters
    ----------
    calc : Calculator
        A logistic calculator (``data.risks[0]`` and ``data.etas[0]`` are its scores).
    data : ScoredData
        The new data scored by ``calc`` (:func:`~calcbuilder.evidence.scoring_data.score_table`).
    method : {"intercept", "slope"}
        See :func:`fit_recalibration`.
    name : str
        Name of the new data (the recalibration's ``dataset`` and the evidence sets').
    seed, band_boot, progress
        Passed to :func:`calcbuilder.evidence.metrics.evidence_set`.

    Returns
    -------
    RecalibrationResult

    Raises
    ------
    CalcbuilderError
        Not a logistic model, a slope that is not positive, or test vectors
        that our scoring does not reproduce after the update.

    References
    ----------
    .. [1] Steyerberg EW et al. Stat Med 2004;23:2567-2586.
    """
    if calc.model.family != "logistic":
        raise DataError(
            f"{calc.about.title} is a {calc.model.family.replace('_', ' ')} model; recalibrate "
            "updates logistic models only (a model at a horizon needs censoring-aware updating)")
    fit = fit_recalibration(data.y, data.etas[0], method)
    recal = compose(calc.model.recalibration, fit, dataset=name)
    with np.errstate(over="ignore"):  # exp overflow gives risk 0, the right limit
        after = 1.0 / (1.0 + np.exp(-(fit.intercept + fit.slope * data.etas[0])))
    maker = _EvidenceMaker(data, data.dataset(name), {e.id for e in calc.evidence},
                           {"seed": seed, "band_boot": band_boot, "progress": progress})
    evidence, added = _new_evidence(calc, maker, after, method)
    updated = _rebuild(calc, recal, evidence, updated_vector_risks(calc, fit))
    return RecalibrationResult(
        calculator=updated, fit=fit, recalibration=recal,
        previous=calc.model.recalibration,
        before=CalibrationSummary.of(data.y, data.risks[0]),
        after=CalibrationSummary.of(data.y, after),
        added_external=added, was_signed=calc.signature is not None,
        evidence_ids=tuple(e["id"] for e in evidence),
    )
