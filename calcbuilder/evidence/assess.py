"""``calcbuilder assess``: add an evidence set to a calculator file from data.

Three ways, each adding one evidence set under a unique id and writing a new
file (any signature is removed: the file must be signed again):

* :func:`assess_bootstrap` (``--data``, kind ``bootstrap``): Harrell's bootstrap
  optimism correction on the development data [1]_ [2]_. The recipe (``--recipe``,
  else the one stored by ``calcbuilder fit``) is re-run on every resample
  (:mod:`calcbuilder.evidence.procedure`); without any recipe the calculator's
  knots and levels are treated as pre-specified (fast path, with a note). The
  refit on the data must reproduce the calculator's risks (within
  :data:`REPRODUCE_TOLERANCE`), otherwise these are not its development data.
  The set stores, per metric, the corrected value (``auc``), the apparent
  value with its interval (``auc_apparent``) and the optimism
  (``auc_optimism``), and the optimism-corrected decision curve (apparent net
  benefit minus its optimism at every threshold; no band). No corrected
  calibration curve is computed (the apparent set holds the apparent one).
* :func:`assess_external` (``--data --external --label``, kind ``external``):
  the calculator's risks on other data, with every part of
  :func:`calcbuilder.evidence.metrics.evidence_set`.
* :func:`assess_predictions` (``--predictions``, kind ``imported``): outcomes
  and risks computed elsewhere. calcbuilder cannot tell which model made
  those risks, so the set is ``imported`` (the least trusted kind), with the
  source "predictions supplied".

Data rules: the outcome column is the one recorded by ``calcbuilder fit``
(``--outcome`` overrides it; required when none is recorded), read with the
recorded event value (``--event`` overrides; default 1). Input columns are
found by input id (else by the recipe's column name) and checked exactly as
the clinic form checks a patient (:func:`calcbuilder.calc.checking.check_columns`).
Rows with a refused value or a missing outcome stop the run with their counts
and first rows, unless ``drop_refused`` leaves them out (the number is
recorded as ``dataset.excluded``).

References
----------
.. [1] Harrell FE Jr, Lee KL, Mark DB. Stat Med 1996;15:361-387.
.. [2] Efron B, Gong G. Am Stat 1983;37:36-48.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from .. import __version__
from ..calc.document import Calculator, load_calculator, save_calculator
from ..calc.scoring import design_matrix as calc_design
from ..calc.scoring import score
from ..stats import bootstrap_optimism, fit_logistic
from ._assess_data import (
    DataRows,
    outcome_for,
    read_outcome_and_inputs,
    read_predictions,
    recipe_columns,
    stored_recipe,
    stored_settings,
)
from ._recipe_sections import Outcome
from .datacheck import prepare
from .dataset import file_sha256, read_table
from .errors import DataError
from .fit import fit_model
from .metrics import evidence_set, number, with_evidence_set
from .procedure import (
    ICI_MAX_ROWS,
    Procedure,
    bootstrap_metrics,
    choose_procedure,
    fixed_design,
    net_benefit_name,
)
from .recipe import Recipe, load_recipe

if TYPE_CHECKING:
    import pandas as pd

__all__ = [
    "REPRODUCE_TOLERANCE",
    "AssessResult",
    "assess_bootstrap",
    "assess_external",
    "assess_predictions",
    "stored_settings",
]

REPRODUCE_TOLERANCE = 1e-6
"""Largest risk difference allowed between the calculator and the refit on its development data."""
OPTIMISM_METRICS = ("auc", "brier", "scaled_brier", "calibration_intercept",
                    "calibration_slope", "ici")
Progress = Callable[[int, int], bool | None]


@dataclass(frozen=True, eq=False)
class AssessResult:
    """What one assess run added.

    Attributes
    ----------
    calculator : Calculator
        The new calculator (validated), with the set added.
    evidence : dict
        The evidence set added (with its id).
    signature_removed : bool
        The input file was signed; the new one is not.
    rows : DataRows
        Rows read, used and left out.
    notes : list of str
        What the run did, in words (path taken, recipe used, ...).
    """

    calculator: Calculator
    evidence: dict[str, Any]
    signature_removed: bool
    rows: DataRows
    notes: list[str] = field(default_factory=list)


def _load(path: str | Path | Calculator) -> Calculator:
    if isinstance(path, Calculator):
        return path
    loaded = load_calculator(path)
    loaded.require_computable()
    return loaded.calculator


def _finish(calc: Calculator, evidence: dict[str, Any], rows: DataRows, notes: list[str],
            output: str | Path | None) -> AssessResult:
    doc, removed = with_evidence_set(calc.to_dict(), evidence)
    new = Calculator.from_dict(doc)
    if output is not None:
        save_calculator(new, output)
    return AssessResult(new, doc["evidence"][-1], removed, rows, notes)


def _provenance(data: Path, outcome: Outcome, rows: DataRows) -> dict[str, Any]:
    return {"data_file": data.name, "outcome_column": outcome.column,
            "outcome_event": outcome.to_dict()["event"], "rows_read": rows.read,
            "rows_used": rows.used, "rows_dropped": rows.dropped,
            "calcbuilder_version": __version__}


def assess_external(calc: str | Path | Calculator, data: str | Path, *, label: str,
                    outcome: str | None = None, event: Any = None, drop_refused: bool = False,
                    band_boot: int = 200, seed: int | None = None,
                    progress: Progress | None = None, output: str | Path | None = None,
                    population: str | None = None, period: str | None = None,
                    ) -> AssessResult:
    """External validation: the calculator's risks against outcomes in other data.

    Parameters
    ----------
    calc : path or Calculator
        The calculator (a file whose signature does not verify is refused).
    data : path
        CSV, Parquet or Excel file with the outcome and one column per input.
    label : str
        Label of the evidence set (also the dataset name).
    outcome, event : optional
        Outcome column and event value (default: as recorded by ``fit``).
    drop_refused : bool
        Leave out rows with a refused value or a missing outcome (recorded).
    band_boot, seed, progress
        As in :func:`calcbuilder.evidence.metrics.evidence_set`.
    output : path, optional
        Where to write the new calculator (atomically).
    population, period : str, optional
        Who the external data describe and when they were collected; shown with the
        evidence on the clinic form, the risk sheet and the evidence report.
    """
    c = _load(calc)
    data = Path(data)
    out = outcome_for(c, outcome, event)
    table = read_table(data)
    y, values, rows = read_outcome_and_inputs(c, table, out, drop_refused, recipe_columns(c))
    risk = score(c.model, values).risk
    dataset = {"name": label, "sha256": file_sha256(data), "excluded": rows.dropped}
    dataset |= {k: v for k, v in (("population", population), ("period", period)) if v}
    ev = evidence_set(y, risk, kind="external", label=label, dataset=dataset,
                      settings=_provenance(data, out, rows), band_boot=band_boot, seed=seed,
                      progress=progress)
    return _finish(c, ev, rows, [], output)


def assess_predictions(calc: str | Path | Calculator, predictions: str | Path, *, label: str,
                       outcome: str | None = None, event: Any = None,
                       risk_column: str = "risk", drop_refused: bool = False,
                       band_boot: int = 200, seed: int | None = None,
                       progress: Progress | None = None, output: str | Path | None = None,
                       ) -> AssessResult:
    """An ``imported`` evidence set from outcome and predicted-risk columns alone.

    The risks are taken as given (proportions in [0, 1]); calcbuilder cannot
    check that this calculator's model made them, hence kind ``imported``.
    Parameters are those of :func:`assess_external`, plus ``risk_column``.
    """
    c = _load(calc)
    predictions = Path(predictions)
    out = outcome_for(c, outcome, event)
    y, risk, rows = read_predictions(read_table(predictions), out, risk_column, drop_refused)
    sha = file_sha256(predictions)
    dataset = {"name": label, "sha256": sha, "excluded": rows.dropped}
    settings = _provenance(predictions, out, rows) | {"risk_column": risk_column}
    ev = evidence_set(y, risk, kind="imported", label=label, dataset=dataset, settings=settings,
                      band_boot=band_boot, seed=seed, progress=progress)
    ev["source"] = (f"predictions supplied in {predictions.name} (sha256 {sha[:16]}...); the "
                    "risks were not computed by calcbuilder from this calculator's model")
    return _finish(c, ev, rows, [], output)


@dataclass(frozen=True, eq=False)
class _Development:
    """The development data, ready for the bootstrap."""

    y: NDArray[np.float64]
    risk: NDArray[np.float64]
    procedure: Procedure
    rows: DataRows


def _check_reproduces(calc_risk: NDArray[np.float64], refit: NDArray[np.float64],
                      data: Path, calc: Calculator) -> None:
    gap = float(np.max(np.abs(calc_risk - refit)))
    if gap > REPRODUCE_TOLERANCE:
        why = (" The calculator has been recalibrated, so its risks are no longer those of the "
               "development fit." if calc.model.recalibration is not None else "")
        raise DataError(
            f"refitting on {data.name} does not reproduce the calculator's risks (largest "
            f"difference {gap:.3g} > {REPRODUCE_TOLERANCE:g}).{why} The bootstrap optimism "
            "correction needs the development data and the recipe the calculator was fitted "
            "with; to evaluate the calculator on other data use --external --label TEXT")


def _with_recipe(calc: Calculator, table: pd.DataFrame, recipe: Recipe, outcome: Outcome, *,
                 drop: bool, data: Path) -> _Development:
    prepared = prepare(table, replace(recipe, outcome=outcome), complete_case=drop)
    s = prepared.summary
    rows = DataRows(s.rows_read, s.rows_used, s.rows_dropped, s.blank_rows)
    fit, _ = fit_model(prepared)
    X, _ = prepared.design_matrix()
    with np.errstate(over="ignore"):
        refit = 1.0 / (1.0 + np.exp(-(fit.coef[0] + X @ fit.coef[1:])))
    calc_risk = score(calc.model, prepared.values).risk
    _check_reproduces(calc_risk, refit, data, calc)
    return _Development(prepared.y, calc_risk, choose_procedure(prepared), rows)


def _without_recipe(calc: Calculator, table: pd.DataFrame, outcome: Outcome, *, drop: bool,
                    data: Path) -> _Development:
    y, values, rows = read_outcome_and_inputs(calc, table, outcome, drop, {})
    X = calc_design(calc.model, values)
    refit = fit_logistic(X, y)
    with np.errstate(over="ignore"):
        risk = 1.0 / (1.0 + np.exp(-(refit.coef[0] + X @ refit.coef[1:])))
    calc_risk = score(calc.model, values).risk
    _check_reproduces(calc_risk, risk, data, calc)
    note = ("no recipe is known, so the calculator's knots and reference levels are treated as "
            "pre-specified; if they were chosen from these data the optimism is understated")
    return _Development(y, calc_risk, fixed_design(X, note), rows)


def _recipe_for(calc: Calculator, recipe: str | Path | Recipe | None) -> tuple[Recipe | None,
                                                                                 str]:
    if isinstance(recipe, Recipe):
        return recipe, "the recipe given"
    if recipe is not None:
        return load_recipe(recipe), f"the recipe {Path(recipe).name}"
    raw = stored_settings(calc).get("recipe")
    if raw:
        return stored_recipe(raw), "the recipe stored in the calculator by calcbuilder fit"
    return None, ""


def _bootstrap_metrics(res: Any, apparent: Mapping[str, Any], names: tuple[str, ...], B: int
                       ) -> dict[str, dict[str, Any]]:
    out: dict[str, dict[str, Any]] = {}
    for name in names:
        est = res[name]
        out[name] = {"value": number(est.corrected),
                     "note": f"optimism-corrected: apparent {est.apparent:.4g} minus optimism "
                             f"{est.optimism:.4g} ({est.n_used} of {B} resamples)"}
    for name in names:
        out[f"{name}_apparent"] = dict(apparent.get(name) or {"value": number(res[name].apparent)})
        out[f"{name}_optimism"] = {
            "value": number(res[name].optimism),
            "note": "mean over resamples of performance on the resample minus performance "
                    "on the original data"}
    return out


def _bootstrap_set(res: Any, base: Mapping[str, Any], names: tuple[str, ...], *,
                   settings: dict[str, Any], notes: list[str]) -> dict[str, Any]:
    B = res.n_boot
    thresholds = base["decision_curve"]["thresholds"]
    corrected = [number(res[net_benefit_name(t)].corrected) for t in thresholds]
    return {
        "id": "bootstrap-1", "kind": "bootstrap",
        "label": f"Development data, optimism-corrected (bootstrap, {B} resamples)",
        "created": dt.datetime.now(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "dataset": base["dataset"], "source": f"calcbuilder {__version__}",
        "settings": settings, "metrics": _bootstrap_metrics(res, base["metrics"], names, B),
        "decision_curve": {"thresholds": thresholds, "model": corrected,
                           "treat_all": base["decision_curve"]["treat_all"]},
        "risk_histogram": base["risk_histogram"], "notes": notes,
    }


def _dataset(c: Calculator, data: Path, dropped: int) -> dict[str, Any]:
    """The development dataset's description: from the evidence set made on the same file."""
    sha = file_sha256(data)
    out: dict[str, Any] = {"name": data.name}
    for e in c.evidence:
        if e.raw["dataset"].get("sha256") == sha:
            out = {k: v for k, v in e.raw["dataset"].items()
                   if k in ("name", "period", "population")}
            break
    out |= {"sha256": sha, "excluded": dropped}
    if c.about.synthetic:
        out["synthetic"] = True
    return out


def _development(c: Calculator, data: Path, out: Outcome, recipe: str | Path | Recipe | None,
                 drop: bool) -> tuple[_Development, str]:
    if c.model.family != "logistic":
        raise DataError("the bootstrap optimism correction is available for logistic models "
                        f"only; this calculator's model is {c.model.family}")
    chosen, where = _recipe_for(c, recipe)
    stored = stored_settings(c)
    drop = drop or bool(stored.get("complete_case"))
    table = read_table(data)
    if chosen is None:
        return _without_recipe(c, table, out, drop=drop, data=data), "no recipe"
    return _with_recipe(c, table, chosen, out, drop=drop, data=data), where


def assess_bootstrap(calc: str | Path | Calculator, data: str | Path, *,
                     outcome: str | None = None, event: Any = None,
                     recipe: str | Path | Recipe | None = None, n_boot: int = 200,
                     seed: int | None = None, drop_refused: bool = False,
                     ici: bool | None = None, progress: Progress | None = None,
                     output: str | Path | None = None) -> AssessResult:
    """Harrell's bootstrap optimism correction on the development data (kind ``bootstrap``).

    Parameters
    ----------
    calc, data, outcome, event, drop_refused, output
        As in :func:`assess_external`; with a recipe, the data are read by the
        recipe's rules (complete case when ``drop_refused`` or when the fit was).
    recipe : path or Recipe, optional
        Default: the recipe stored by ``calcbuilder fit``; none: fixed design.
    n_boot : int
        Bootstrap resamples B.
    seed : int, optional
        Seed of the resamples (drawn and recorded when None).
    ici : bool, optional
        Estimate the ICI's optimism (default: up to :data:`ICI_MAX_ROWS` rows).
    progress : callable, optional
        ``progress(done, total)``; returning False cancels.
    """
    c = _load(calc)
    data = Path(data)
    out = outcome_for(c, outcome, event)
    dev, where = _development(c, data, out, recipe, drop_refused)
    use_ici = dev.y.size <= ICI_MAX_ROWS if ici is None else ici
    names = OPTIMISM_METRICS if use_ici else OPTIMISM_METRICS[:-1]
    dataset = _dataset(c, data, dev.rows.dropped)
    base = evidence_set(dev.y, dev.risk, kind="apparent", label="apparent", dataset=dataset,
                        band_boot=0)
    metrics = bootstrap_metrics(base["decision_curve"]["thresholds"], ici=use_ici)
    res = bootstrap_optimism(dev.procedure.X, dev.y, dev.procedure.procedure, metrics,
                             n_boot=n_boot, seed=seed, progress=progress)
    settings = _provenance(data, out, dev.rows) | {
        "bootstrap": res.n_boot, "seed": res.seed, "resampling": res.resampling,
        "failed_resamples": res.n_failed, "path": dev.procedure.path,
        "procedure": dev.procedure.description, "recipe_source": where,
        "ici_optimism": "estimated" if use_ici else f"not estimated (more than {ICI_MAX_ROWS} "
                                                    "rows: one lowess per resample)"}
    notes = [dev.procedure.description,
             "No optimism-corrected calibration curve is computed; the apparent evidence set "
             "holds the apparent curve.",
             "The decision curve is the apparent net benefit minus its bootstrap optimism at "
             "each threshold; no band is given."]
    if res.failures:
        notes.append(f"{res.n_failed} of {res.n_boot} resamples failed and were left out; the "
                     f"first: {res.failures[0].reason}")
    ev = _bootstrap_set(res, base, names, settings=settings, notes=notes)
    return _finish(c, ev, dev.rows, [dev.procedure.description, f"recipe: {where}"], output)
