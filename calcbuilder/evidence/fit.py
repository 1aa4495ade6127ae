"""``calcbuilder fit``: fit a recipe's logistic model to a data file and build the calculator.

Steps (each step's problems are reported at once, and nothing is written unless
the whole calculator validates):

1. read the recipe and the data, check the data against the recipe
   (:func:`calcbuilder.evidence.prepare`: counts, missing values, events per
   parameter, Riley et al.'s criteria, warnings);
2. fit ``logit P(y=1) = b0 + X b`` on :meth:`Prepared.design_matrix` by maximum
   likelihood, or Firth's penalised likelihood when the recipe asks
   (:func:`calcbuilder.stats.fit_logistic`); separation, a singular design and
   non-convergence are explained with the design columns named;
3. the model section (intercept, terms with their coefficients, covariance =
   inverse Fisher information), inputs (developed ranges), about, decision,
   cautions;
4. test vectors: the rows at the 0, 10, 25, 50, 75, 90 and 100% points of the
   fitted linear predictor, in canonical units, each with the risk computed
   by numpy as ``1 / (1 + exp(-(b0 + x'b)))`` on the fitted design row -- the
   route of the fit itself, independent of the calculator's JSON model and of
   its scoring code, so a mistyped coefficient, knot or level is caught;
5. an ``apparent`` evidence set on the development data
   (:func:`calcbuilder.evidence.metrics.evidence_set`) holding the provenance
   in its ``dataset`` (name, sha256 of the data file, rows excluded) and
   ``settings`` (data file, rows read/used/dropped/blank, outcome column and
   event value, the recipe file, its sha256 and its full content as JSON,
   calcbuilder version, fitting method, events per parameter, Riley numbers);
6. :meth:`Calculator.from_dict` (schema, meaning, test vectors re-scored), then
   an atomic write.

References
----------
.. [1] McCullagh P, Nelder JA. Generalized Linear Models, 2nd ed. Chapman & Hall 1989, ch. 4.
.. [2] Firth D. Bias reduction of maximum likelihood estimates. Biometrika 1993;80:27-38.
.. [3] Riley RD, Ensor J, Snell KIE, et al. Calculating the sample size required for
       developing a clinical prediction model. BMJ 2020;368:m441.
"""

from __future__ import annotations

import datetime as dt
import json
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .. import __version__
from ..calc.document import Calculator, save_calculator
from ..stats import (
    ConvergenceError,
    LogisticFit,
    SeparationError,
    SingularDesignError,
    fit_logistic,
)
from .datacheck import Prepared, prepare
from .dataset import file_sha256, read_table
from .errors import DataError
from .metrics import evidence_set
from .recipe import Recipe, load_recipe

__all__ = [
    "VECTOR_QUANTILES",
    "FitResult",
    "fit_calculator",
    "fit_model",
    "make_test_vectors",
    "provenance_settings",
    "recipe_json",
]

VECTOR_QUANTILES = (0.0, 0.10, 0.25, 0.50, 0.75, 0.90, 1.0)
"""Points of the fitted linear predictor whose rows become test vectors."""
Progress = Callable[[int, int], bool | None]


@dataclass(frozen=True, eq=False)
class FitResult:
    """Everything ``calcbuilder fit`` computed.

    Attributes
    ----------
    calculator : Calculator
        The validated calculator (test vectors re-scored).
    prepared : Prepared
        The checked data (counts, warnings, sample size).
    fit : LogisticFit
        The fitted coefficients (intercept first) and their covariance.
    column_names : list of str
        Design column names in coefficient order (without the intercept).
    risk : ndarray
        Apparent predicted risks of the rows used.
    data_sha256 : str
        SHA-256 of the data file.
    """

    calculator: Calculator
    prepared: Prepared
    fit: LogisticFit
    column_names: list[str]
    risk: NDArray[np.float64]
    data_sha256: str


def _named(message: str, names: Sequence[str]) -> str:
    """Replace the statistics core's ``X column k`` with design column names."""
    def one(match: re.Match[str]) -> str:
        k = int(match.group(1))
        return f"column '{names[k]}'" if 0 <= k < len(names) else match.group(0)

    def many(match: re.Match[str]) -> str:
        ks = [int(k) for k in match.group(1).split(", ")]
        return "columns " + ", ".join(f"'{names[k]}'" if 0 <= k < len(names) else str(k)
                                      for k in ks)

    message = re.sub(r"X columns ((?:\d+, )*\d+)", many, message)
    message = re.sub(r"X column (\d+)", one, message)
    return message.replace("Use firth=True", "Set fit.firth = true in the recipe")


def fit_model(prepared: Prepared, *, firth: bool | None = None) -> tuple[LogisticFit, list[str]]:
    """Fit the prepared design by maximum likelihood (or Firth's method).

    Parameters
    ----------
    prepared : Prepared
        Data checked against the recipe.
    firth : bool, optional
        Override the recipe's ``fit.firth``.

    Returns
    -------
    (LogisticFit, list of str)
        The fit (intercept first) and the design column names.

    Raises
    ------
    DataError
        Separation, a singular design or no convergence, explained with the
        design columns named and the way out.
    """
    X, names = prepared.design_matrix()
    use_firth = prepared.recipe.fit.firth if firth is None else firth
    try:
        return fit_logistic(X, prepared.y, firth=use_firth), names
    except SeparationError as exc:
        raise DataError(f"the model cannot be fitted: {_named(str(exc), names)}") from None
    except SingularDesignError as exc:
        raise DataError(f"the model cannot be fitted: the design is singular: "
                        f"{_named(str(exc), names)}; change the recipe so that no "
                        "input or level is implied by the others") from None
    except ConvergenceError as exc:
        raise DataError(f"the model cannot be fitted: {_named(str(exc), names)}; check "
                        "for inputs with extreme values or very rare levels, or set "
                        "fit.firth = true in the recipe") from None


def _expit(eta: NDArray[np.float64]) -> NDArray[np.float64]:
    with np.errstate(over="ignore"):
        return np.asarray(1.0 / (1.0 + np.exp(-eta)), dtype=np.float64)


def _canonical(prepared: Prepared, input_id: str, row: int) -> Any:
    kind = prepared.recipe.input(input_id).kind
    value = prepared.values[input_id][row]
    if kind == "yes_no":
        return bool(value == 1)
    if kind == "choice":
        return str(value)
    return float(value)


def make_test_vectors(prepared: Prepared, fit: LogisticFit) -> list[dict[str, Any]]:
    """Rows at the :data:`VECTOR_QUANTILES` points of the linear predictor, with their risks.

    The risk is ``1 / (1 + exp(-(b0 + x'b)))`` computed by numpy on the fitted
    design row (see the module notes); values are canonical (yes/no as
    true/false, choices as their values).
    """
    X, _ = prepared.design_matrix()
    eta = fit.coef[0] + X @ fit.coef[1:]
    order = np.argsort(eta, kind="stable")
    picks: dict[int, float] = {}
    for q in VECTOR_QUANTILES:
        row = int(order[round(q * (eta.size - 1))])
        picks.setdefault(row, q)
    out = []
    for row, q in picks.items():
        values = {e.id: _canonical(prepared, e.id, row) for e in prepared.recipe.inputs}
        out.append({"name": f"file row {int(prepared.rows[row])} (linear predictor at its "
                            f"{q:.0%} point)",
                    "values": values, "risk": float(_expit(eta[row:row + 1])[0])})
    return out


def recipe_json(recipe: Recipe) -> str:
    """The recipe with every default written out, as compact JSON (dates as ISO text)."""
    return json.dumps(recipe.to_dict(), default=str, ensure_ascii=False, separators=(",", ":"))


def provenance_settings(prepared: Prepared, fit: LogisticFit, data: Path,
                        recipe_path: Path | None) -> dict[str, Any]:
    """Scalar provenance recorded in the apparent evidence set's ``settings``."""
    s, size = prepared.summary, prepared.sample_size
    recipe = prepared.recipe
    event = recipe.outcome.to_dict()["event"]
    out: dict[str, Any] = {
        "data_file": data.name, "rows_read": s.rows_read, "blank_rows": s.blank_rows,
        "rows_used": s.rows_used, "rows_dropped": s.rows_dropped,
        "complete_case": s.complete_case, "outcome_column": recipe.outcome.column,
        "outcome_event": event, "calcbuilder_version": __version__,
        "fit_method": ("Firth penalised likelihood" if recipe.fit.firth else
                       "maximum likelihood") + f", Newton-Raphson, {fit.iterations} steps",
        "log_likelihood": float(fit.loglik), "parameters": prepared.n_parameters,
        "events_per_parameter": float(size.events_per_parameter),
        "anticipated_r2_cs": float(size.r2_cs), "riley_minimum_rows": int(size.required.n),
        "riley_binding_criterion": size.required.criterion,
        "test_vector_route": "numpy 1/(1+exp(-(b0 + x'b))) on the fitted design rows",
        "recipe": recipe_json(recipe),
    }
    if recipe_path is not None:
        out["recipe_file"] = recipe_path.name
        out["recipe_sha256"] = file_sha256(recipe_path)
    return out


def _document(prepared: Prepared, fit: LogisticFit, vectors: list[dict[str, Any]],
              evidence: dict[str, Any], released: dt.date | None) -> dict[str, Any]:
    recipe = prepared.recipe
    model = {"family": "logistic", "intercept": float(fit.coef[0]),
             "terms": prepared.model_terms(fit.coef[1:].tolist()), "covariance": fit.cov.tolist()}
    return {
        "format": "calcbuilder-calculator", "format_version": 1,
        "about": recipe.about_dict(released), "inputs": prepared.inputs, "model": model,
        "evidence": [evidence], "decision": dict(recipe.decision),
        "cautions": list(recipe.cautions), "test_vectors": vectors,
    }


def fit_calculator(
    data: str | Path,
    recipe: str | Path | Recipe,
    *,
    complete_case: bool = False,
    released: dt.date | None = None,
    band_boot: int = 200,
    seed: int | None = None,
    progress: Progress | None = None,
    output: str | Path | None = None,
) -> FitResult:
    """Fit a recipe to a data file and build (and optionally write) the calculator.

    Parameters
    ----------
    data : str or Path
        CSV, Parquet or Excel data file.
    recipe : str, Path or Recipe
        The recipe file (or a checked recipe; then no recipe file is recorded).
    complete_case : bool
        Leave out rows with a missing value (recorded) instead of refusing them.
    released : datetime.date, optional
        Release date when the recipe gives none (default: today).
    band_boot, seed, progress
        Passed to :func:`calcbuilder.evidence.metrics.evidence_set` for the
        apparent evidence set.
    output : str or Path, optional
        Where to write the calculator atomically; nothing is written when any
        step fails or is interrupted.

    Returns
    -------
    FitResult

    Raises
    ------
    RecipeError, DataError
        Listing every problem found.
    """
    recipe_path = None if isinstance(recipe, Recipe) else Path(recipe)
    checked = recipe if isinstance(recipe, Recipe) else load_recipe(recipe)
    data = Path(data)
    prepared = prepare(read_table(data), checked, complete_case=complete_case)
    fit, names = fit_model(prepared)
    X, _ = prepared.design_matrix()
    risk = _expit(fit.coef[0] + X @ fit.coef[1:])
    sha = file_sha256(data)
    info = checked.dataset
    dataset: dict[str, Any] = {"name": info.name or data.name, "sha256": sha,
                               "excluded": prepared.summary.rows_dropped}
    dataset |= {k: v for k, v in (("period", info.period), ("population", info.population))
                if v}
    if checked.about.get("synthetic"):
        dataset["synthetic"] = True
    evidence = evidence_set(
        prepared.y, risk, kind="apparent", label="Development data (apparent)",
        dataset=dataset, settings=provenance_settings(prepared, fit, data, recipe_path),
        band_boot=band_boot, seed=seed, progress=progress)
    doc = _document(prepared, fit, make_test_vectors(prepared, fit), evidence, released)
    calc = Calculator.from_dict(doc)
    if output is not None:
        save_calculator(calc, output)
    return FitResult(calc, prepared, fit, names, risk, sha)
