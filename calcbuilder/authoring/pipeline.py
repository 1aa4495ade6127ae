"""The long steps of the workspace as plain functions: the command line's functions, in order.

Each stage takes the calculator document so far (``None`` before the fit), calls
exactly what the matching command calls, and returns a :class:`StageResult`:

========================= =====================================================
stage                     the same as
========================= =====================================================
``fit``                   ``calcbuilder fit DATA --recipe R.toml [--complete-case]``
``import``                ``calcbuilder import table|pmml SOURCE --inputs INPUTS.toml``
``bootstrap``             ``calcbuilder assess FILE --data DATA --bootstrap B``
``external``              ``calcbuilder assess FILE --data D --external --label L``
``recalibrate``           ``calcbuilder recalibrate FILE --data D --method M``
``compare``               ``calcbuilder compare FILE REF --data D --cuts C`` (and the
                          reclassification block kept with the evidence set of D)
========================= =====================================================

with the same ``--seed`` and ``--band-boot`` for every stage. Nothing here
writes a calculator file, touches Qt or keeps state: a stage runs in a worker
thread and its result is applied by the caller. ``report(text, done, total)``
is the progress callback; returning False cancels (the statistics core raises
:class:`calcbuilder.stats.CancelledError`).

ROC points (:func:`calcbuilder.stats.roc_points`) are computed here for the
screen, from the same outcomes and risks the evidence sets were made from.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ..calc.document import Calculator

__all__ = ["STAGES", "Report", "StageResult", "run_stage", "run_stages"]

Report = Callable[[str, int, int], bool | None]
"""``report(what, done, total)``; returning False cancels."""
STAGES = ("fit", "import", "bootstrap", "external", "recalibrate", "compare")


@dataclass(frozen=True)
class StageResult:
    """What one stage made.

    Attributes
    ----------
    document : dict
        The calculator document after the stage (validated, unsigned).
    lines : tuple of str
        What the stage did and found, in words.
    roc : dict
        Evidence id (or ``reference``) -> (false-positive rates, true-positive rates).
    comparison : dict or None
        ``compare`` only: :func:`calcbuilder.evidence.compare.result_dict`.
    """

    document: dict[str, Any]
    lines: tuple[str, ...] = ()
    roc: dict[str, tuple[list[float], list[float]]] = field(default_factory=dict)
    comparison: dict[str, Any] | None = None


def _roc(y: ArrayLike, risk: ArrayLike) -> tuple[list[float], list[float]]:
    from ..stats import roc_points

    points = roc_points(y, risk)
    fpr = np.concatenate([[0.0], 1.0 - points.specificity, [1.0]])
    tpr = np.concatenate([[0.0], points.sensitivity, [1.0]])
    return [round(float(v), 6) for v in fpr], [round(float(v), 6) for v in tpr]


def _progress(report: Report, what: str) -> Callable[[int, int], bool | None]:
    def progress(done: int, total: int) -> bool | None:
        return report(what, done, total)
    return progress


def _calc(document: Mapping[str, Any] | None, stage: str) -> Calculator:
    if document is None:
        from ..errors import CalcbuilderError

        raise CalcbuilderError(f"{stage}: fit the model (or import one) first")
    return Calculator.from_dict(dict(document))


def _metric_line(ev: Mapping[str, Any], name: str, shown: str) -> str | None:
    m = ev.get("metrics", {}).get(name)
    if not m or m.get("value") is None:
        return None
    text = f"{shown} {round(m['value'], 3) + 0.0:.3f}"  # + 0.0: never print -0.000
    if m.get("low") is not None and m.get("high") is not None:
        text += f" ({round(m['low'], 3) + 0.0:.3f} to {round(m['high'], 3) + 0.0:.3f})"
    return text


def fit_stage(data: Path, recipe: Path, *, complete_case: bool, band_boot: int,
              seed: int | None, report: Report) -> StageResult:
    """``calcbuilder fit``: check the data, fit, apparent evidence (nothing written)."""
    from ..evidence.fit import fit_calculator

    result = fit_calculator(data, recipe, complete_case=complete_case, band_boot=band_boot,
                            seed=seed, progress=_progress(report, "Evidence bands"))
    p, s, fit = result.prepared, result.prepared.summary, result.fit
    lines = [f"{s.rows_read:,} rows read, {s.rows_used:,} used; {s.events:,} events "
             f"({s.prevalence:.1%}); {p.n_parameters} parameters, events per parameter "
             f"{p.events_per_parameter:.1f}",
             f"Sample size: {p.sample_size.describe()}",
             *(f"Warning: {w}" for w in p.warnings),
             ("Fitted by Firth's penalised likelihood" if p.recipe.fit.firth else
              "Fitted by maximum likelihood") + f" in {fit.iterations} Newton steps"]
    names = ["(intercept)", *result.column_names]
    lines += [f"  {n}: {c:.6g} (SE {fit.cov[i, i] ** 0.5:.3g})"
              for i, (n, c) in enumerate(zip(names, fit.coef, strict=True))]
    calc = result.calculator
    ev_id = calc.evidence[0].id
    return StageResult(calc.to_dict(), tuple(lines), {ev_id: _roc(p.y, result.risk)})


def import_stage(kind: str, source: Path, inputs: Path, *, report: Report) -> StageResult:
    """``calcbuilder import table|pmml SOURCE --inputs INPUTS.toml`` (nothing written)."""
    from ..calc.importers import import_pmml, import_table

    report("Importing the model", 0, 1)
    calc = (import_table if kind == "table" else import_pmml)(source, inputs)
    report("Importing the model", 1, 1)
    lines = (f"Imported {source.name} ({'coefficient table' if kind == 'table' else 'PMML'}) "
             f"with {len(calc.model.terms)} terms; {len(calc.test_vectors)} test vectors "
             "re-scored within 1e-9",)
    return StageResult(calc.to_dict(), lines)


def bootstrap_stage(document: Mapping[str, Any] | None, data: Path, *, n_boot: int,
                    seed: int | None, report: Report) -> StageResult:
    """``calcbuilder assess FILE --data DATA --bootstrap B``: optimism correction."""
    from ..evidence.assess import assess_bootstrap

    result = assess_bootstrap(_calc(document, "bootstrap"), data, n_boot=n_boot, seed=seed,
                              progress=_progress(report, "Bootstrap resamples"))
    ev = result.evidence
    lines = [ev["label"], *result.notes]
    lines += [line for name, shown in (("auc", "Corrected AUC"),
                                       ("calibration_slope", "Corrected calibration slope"))
              if (line := _metric_line(ev, name, shown))]
    return StageResult(result.calculator.to_dict(), tuple(lines))


def _outcome(column: str, event: str, calcs: Sequence[Calculator]) -> Any:
    from ..evidence.scoring_data import resolve_outcome

    return resolve_outcome(column.strip() or None, event.strip() or None, list(calcs))


def external_stage(document: Mapping[str, Any] | None, data: Path, *, label: str,
                   outcome: str, event: str, band_boot: int, seed: int | None,
                   report: Report) -> StageResult:
    """``calcbuilder assess FILE --data D --external --label L``."""
    from ..evidence.assess import assess_external
    from ..evidence.scoring_data import load_scored_data

    calc = _calc(document, "external validation")
    result = assess_external(calc, data, label=label, outcome=outcome.strip() or None,
                             event=event.strip() or None, band_boot=band_boot, seed=seed,
                             progress=_progress(report, f"Evidence bands ({label})"))
    ev = result.evidence
    scored = load_scored_data([calc], data, _outcome(outcome, event, [calc]))
    lines = [f"{ev['label']}: {ev['dataset']['n']:,} rows, {ev['dataset']['events']:,} events"]
    lines += [line for name, shown in (("auc", "AUC"), ("calibration_slope", "Calibration slope"),
                                       ("calibration_intercept", "Calibration intercept"))
              if (line := _metric_line(ev, name, shown))]
    return StageResult(result.calculator.to_dict(), tuple(lines),
                       {ev["id"]: _roc(scored.y, scored.risks[0])})


def recalibrate_stage(document: Mapping[str, Any] | None, data: Path, *, method: str,
                      label: str, outcome: str, event: str, band_boot: int,
                      seed: int | None, report: Report) -> StageResult:
    """``calcbuilder recalibrate FILE --data D --method M --label L``."""
    from ..evidence.recalibrate import recalibrate
    from ..evidence.scoring_data import load_scored_data

    calc = _calc(document, "recalibration")
    data_set = load_scored_data([calc], data, _outcome(outcome, event, [calc]))
    name = label.strip() or data.name
    result = recalibrate(calc, data_set, method, name=name, seed=seed, band_boot=band_boot,
                         progress=_progress(report, f"Evidence bands ({name})"))
    b, a = result.before, result.after
    lines = [f"Recalibrated on {name} ({method}): a = {result.fit.intercept:.4f}, "
             f"b = {result.fit.slope:.4f}; {data_set.n:,} rows, {data_set.events:,} events",
             f"Calibration slope before {b.slope.value:.3f}, after {a.slope.value:.3f}; "
             f"observed/expected before {b.observed_expected:.2f}, after "
             f"{a.observed_expected:.2f} (after: on the data it was fitted to)",
             f"Evidence added: {', '.join(result.evidence_ids)}"]
    after = load_scored_data([result.calculator], data, data_set.outcome)
    roc = {result.evidence_ids[-1]: _roc(after.y, after.risks[0])}
    if result.added_external:
        roc[result.evidence_ids[0]] = _roc(data_set.y, data_set.risks[0])
    return StageResult(result.calculator.to_dict(), tuple(lines), roc)


def compare_stage(document: Mapping[str, Any] | None, data: Path, *, reference: Path,
                  cuts: str, outcome: str, event: str, report: Report) -> StageResult:
    """``calcbuilder compare FILE REF --data D``; the block is kept with D's evidence set."""
    from ..calc.document import load_calculator
    from ..errors import CalcbuilderError
    from ..evidence.compare import (
        compare_risks,
        comparison_thresholds,
        default_cuts,
        parse_cuts,
        reclassification_block,
        result_dict,
    )
    from ..evidence.scoring_data import load_scored_data

    report("Comparing with the reference", 0, 1)
    new = _calc(document, "comparison")
    ref = load_calculator(reference)
    ref.require_computable()
    chosen = parse_cuts(cuts) if cuts.strip() else default_cuts(new.decision)
    if chosen is None:
        raise CalcbuilderError("give the risk category cuts (percent, e.g. 10,20): the "
                               "decision step has no risk bands")
    refc = ref.calculator
    scored = load_scored_data([new, refc], data, _outcome(outcome, event, [new, refc]))
    result = compare_risks(
        scored.y, scored.risks[0], scored.risks[1], cuts=chosen,
        thresholds=comparison_thresholds(new.decision),
        new_name=f"{new.about.title} {new.about.version}",
        ref_name=f"{refc.about.title} {refc.about.version}", ref_fingerprint=ref.fingerprint)
    doc = new.to_dict()
    kept = [e for e in doc["evidence"] if e.get("dataset", {}).get("sha256") == scored.sha256]
    lines = [f"Compared on {data.name}: {result.n:,} rows, {result.events:,} events",
             f"AUC new {result.auc.auc_a:.3f}, reference {result.auc.auc_b:.3f}, difference "
             f"{result.auc.difference:+.3f}", *result.warnings]
    if kept:
        kept[-1]["reclassification"] = reclassification_block(result)
        doc = Calculator.from_dict(doc).to_dict()
        lines.append(f"Reclassification kept with evidence set '{kept[-1]['id']}'")
    else:
        lines.append("No evidence set was made on these data, so the comparison is shown "
                     "here only and not kept in the calculator")
    report("Comparing with the reference", 1, 1)
    roc = {"reference": _roc(scored.y, scored.risks[1])}
    return StageResult(doc, tuple(lines), roc, result_dict(result))


def run_stage(spec: Mapping[str, Any], document: Mapping[str, Any] | None, *,
              band_boot: int, seed: int | None, report: Report) -> StageResult:
    """Run one stage described by ``spec`` (``{"stage": name, ...}``, see :data:`STAGES`)."""
    kind = spec["stage"]
    outcome, event = str(spec.get("outcome", "")), str(spec.get("event", ""))
    if kind == "fit":
        return fit_stage(Path(spec["data"]), Path(spec["recipe"]),
                         complete_case=bool(spec.get("complete_case")), band_boot=band_boot,
                         seed=seed, report=report)
    if kind == "import":
        return import_stage(spec["kind"], Path(spec["source"]), Path(spec["inputs"]),
                            report=report)
    if kind == "bootstrap":
        return bootstrap_stage(document, Path(spec["data"]), n_boot=int(spec["n_boot"]),
                               seed=seed, report=report)
    if kind == "external":
        return external_stage(document, Path(spec["data"]), label=spec["label"],
                              outcome=outcome, event=event, band_boot=band_boot, seed=seed,
                              report=report)
    if kind == "recalibrate":
        return recalibrate_stage(document, Path(spec["data"]), method=spec["method"],
                                 label=spec.get("label", ""), outcome=outcome, event=event,
                                 band_boot=band_boot, seed=seed, report=report)
    if kind == "compare":
        return compare_stage(document, Path(spec["data"]), reference=Path(spec["reference"]),
                             cuts=spec.get("cuts", ""), outcome=outcome, event=event,
                             report=report)
    raise ValueError(f"unknown stage {kind!r}")


def run_stages(specs: Sequence[Mapping[str, Any]], *, band_boot: int, seed: int | None,
               report: Report, document: Mapping[str, Any] | None = None) -> StageResult:
    """Run stages in order, each on the previous one's document; the last result, with
    every stage's lines and ROC points."""
    lines: list[str] = []
    roc: dict[str, tuple[list[float], list[float]]] = {}
    result = StageResult(dict(document or {}))
    for k, spec in enumerate(specs, start=1):
        def step(what: str, done: int, total: int, k: int = k) -> bool | None:
            return report(f"Step {k} of {len(specs)}: {what}", done, total)
        result = run_stage(spec, result.document if k > 1 else document, band_boot=band_boot,
                           seed=seed, report=step)
        lines += result.lines
        roc.update(result.roc)
    return StageResult(result.document, tuple(lines), roc, result.comparison)
