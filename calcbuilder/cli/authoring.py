"""Authoring commands: ``fit`` and ``assess``.

``calcbuilder fit DATA --recipe RECIPE.toml -o OUT.calc.json [--complete-case] [--json]``
    Check the data against the recipe (counts, missing values, events per
    parameter, Riley et al.'s minimum sample size with the binding criterion,
    warnings), fit the logistic model, and write the calculator with its test
    vectors and its apparent evidence set.

``calcbuilder assess FILE --data DATA [--outcome COL] [--bootstrap B] [--seed S]
[--recipe RECIPE.toml] -o OUT``
    Bootstrap optimism correction on the development data (recipe re-run per
    resample); ``--external --label TEXT`` validates on other data instead.

``calcbuilder assess FILE --predictions PRED.csv [--outcome COL] [--risk-column COL]
--label TEXT -o OUT``
    An ``imported`` evidence set from outcomes and risks computed elsewhere.

``calcbuilder import evidence FILE SUMMARY.(csv|json) -o OUT [--json]``
    Attach evidence computed elsewhere (``docs/evidence-import.md``), checked for
    consistency, as an ``imported`` evidence set (registered in the ``import``
    group by :func:`register_import_evidence`).

Each assess run adds one evidence set and writes a new file; a signature on
the input file is removed (the new file must be signed again). Long steps show
a progress bar with ETA on a terminal; Ctrl-C stops without writing anything.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from .progress import progress_bar

__all__ = ["register", "register_import_evidence"]

SYNTHETIC = "SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use"
SHOWN = ("auc", "calibration_intercept", "calibration_slope", "brier", "scaled_brier", "ici",
         "oe_ratio")
NAMES = {"auc": "AUC", "calibration_intercept": "Calibration intercept",
         "calibration_slope": "Calibration slope", "brier": "Brier score",
         "scaled_brier": "Scaled Brier score", "ici": "ICI", "oe_ratio": "O:E ratio"}


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``fit`` and ``assess``."""
    fit = sub.add_parser(
        "fit", help="fit a recipe's model to a data file and write a calculator",
        description="Check DATA against the recipe, fit the logistic model and write the "
                    "calculator file with test vectors and apparent performance evidence.")
    fit.add_argument("data", type=Path, metavar="DATA", help="CSV, Parquet or Excel data file")
    fit.add_argument("--recipe", type=Path, required=True, metavar="RECIPE.toml")
    fit.add_argument("-o", "--output", type=Path, required=True, metavar="OUT.calc.json")
    fit.add_argument("--complete-case", action="store_true",
                     help="leave out rows with a missing value (the number is recorded)")
    _common(fit)
    fit.set_defaults(func=_cmd_fit)
    _register_assess(sub)


def _common(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--band-boot", type=int, default=200, metavar="B",
                        help="resamples for the bands of the evidence curves (default 200)")
    parser.add_argument("--seed", type=int, default=None, metavar="S",
                        help="seed of the resamples (default: drawn and recorded)")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")


def _register_assess(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "assess", help="add performance evidence to a calculator file",
        description="Add an evidence set: bootstrap optimism correction on the development "
                    "data (--data), external validation (--data --external --label) or "
                    "supplied predictions (--predictions --label). Writes a new file; a "
                    "signature is removed, so sign the new file again.")
    p.add_argument("file", type=Path, metavar="FILE", help="the calculator file")
    source = p.add_mutually_exclusive_group(required=True)
    source.add_argument("--data", type=Path, metavar="DATA", help="data with outcome and inputs")
    source.add_argument("--predictions", type=Path, metavar="PRED.csv",
                        help="data with outcome and predicted risk only")
    p.add_argument("-o", "--output", type=Path, required=True, metavar="OUT.calc.json")
    p.add_argument("--outcome", metavar="COL", help="outcome column (default: as fitted)")
    p.add_argument("--event", metavar="VALUE", help="outcome value meaning the event "
                   "(default: as fitted, else 1)")
    p.add_argument("--bootstrap", type=int, default=200, metavar="B",
                   help="bootstrap resamples for the optimism correction (default 200)")
    p.add_argument("--recipe", type=Path, metavar="RECIPE.toml",
                   help="recipe re-run per resample (default: the one stored by fit)")
    p.add_argument("--external", action="store_true", help="DATA are not the development data")
    p.add_argument("--label", metavar="TEXT", help="label of an external or supplied set")
    p.add_argument("--population", metavar="TEXT",
                   help="who the external data describe (shown with the evidence)")
    p.add_argument("--period", metavar="TEXT", help="when the external data were collected")
    p.add_argument("--risk-column", default="risk", metavar="COL",
                   help="predicted-risk column of --predictions (default 'risk')")
    p.add_argument("--drop-refused", action="store_true",
                   help="leave out rows with a refused value or a missing outcome (recorded)")
    _common(p)
    p.set_defaults(func=_cmd_assess, parser=p)


def _metric(m: dict[str, Any] | None) -> str:
    if not m or m.get("value") is None:
        return "-"
    text = f"{m['value']:.3f}"
    if m.get("low") is not None and m.get("high") is not None:
        text += f" ({m['low']:.3f} to {m['high']:.3f})"
    return text


def _fit_lines(result: Any) -> list[str]:
    p, s = result.prepared, result.prepared.summary
    lines = [f"Data: {s.rows_read:,} rows read, {s.rows_used:,} used ({s.rows_dropped:,} left "
             f"out, {s.blank_rows:,} empty); {s.events:,} events ({s.prevalence:.1%})"]
    missing = ", ".join(f"'{k}' {v}" for k, v in s.missing.items() if v)
    lines.append(f"Missing values: {missing or 'none'}")
    lines.append(f"Parameters: {p.n_parameters}; events per parameter "
                 f"{p.events_per_parameter:.1f}")
    lines.append(f"Sample size: {p.sample_size.describe()}")
    lines += ["Warnings:", *(f"  - {w}" for w in p.warnings)] if p.warnings else []
    fit, names = result.fit, ["(intercept)", *result.column_names]
    how = "Firth's penalised likelihood" if p.recipe.fit.firth else "maximum likelihood"
    lines.append(f"Fitted by {how} in {fit.iterations} Newton steps:")
    width = max(len(n) for n in names)
    lines += [f"  {n:<{width}}  {c: .6g}  (SE {fit.cov[i, i] ** 0.5:.3g})"
              for i, (n, c) in enumerate(zip(names, fit.coef, strict=True))]
    ev = result.calculator.evidence[0]
    lines.append("Apparent performance (development data, not corrected for optimism):")
    lines += [f"  {NAMES[k]}: {_metric(ev.metric(k))}" for k in SHOWN if ev.metric(k)]
    lines.append(f"Test vectors: {len(result.calculator.test_vectors)} rows, re-scored "
                 "within 1e-9")
    return lines


def _cmd_fit(args: argparse.Namespace) -> int:
    from ..evidence.fit import fit_calculator

    with progress_bar("Evidence bands", enabled=None if not args.json else False) as bar:
        result = fit_calculator(args.data, args.recipe, complete_case=args.complete_case,
                                band_boot=args.band_boot, seed=args.seed, progress=bar,
                                output=args.output)
    calc = result.calculator
    if args.json:
        ev = calc.evidence[0]
        print(json.dumps({
            "output": str(args.output), "file_fingerprint": calc.fingerprint,
            "rows_used": result.prepared.summary.rows_used,
            "events": result.prepared.summary.events, "warnings": list(result.prepared.warnings),
            "coefficients": dict(zip(["(intercept)", *result.column_names],
                                     result.fit.coef.tolist(), strict=True)),
            "apparent": {k: dict(ev.metric(k) or {}) for k in SHOWN if ev.metric(k)},
            "synthetic": calc.about.synthetic}, indent=2, ensure_ascii=False))
        return 0
    print("\n".join(_fit_lines(result)))
    print(f"Calculator written to {args.output}")
    print(f"file fingerprint: {calc.fingerprint}")
    print("It is not signed yet: check it, then sign it with calcbuilder sign.")
    print(f"Next: calcbuilder assess {args.output} --data {args.data} -o OUT  "
          "(bootstrap optimism correction)")
    if calc.about.synthetic:
        print(SYNTHETIC)
    return 0


def _usage(args: argparse.Namespace, message: str) -> int:
    args.parser.print_usage(sys.stderr)
    print(f"calcbuilder assess: error: {message}", file=sys.stderr)
    return 2


def _usage_problem(args: argparse.Namespace) -> str | None:
    if args.predictions is not None:
        rules = [(args.external or args.recipe is not None,
                  "--external and --recipe go with --data, not --predictions"),
                 (not args.label, "--predictions needs --label TEXT")]
    else:
        rules = [(args.external and not args.label,
                  "--external needs --label TEXT naming the dataset"),
                 (args.external and args.recipe is not None,
                  "--recipe is for the bootstrap on the development data, not with --external"),
                 (bool(args.label) and not args.external,
                  "--label goes with --external or --predictions")]
    rules.append((args.bootstrap < 1, f"--bootstrap must be at least 1; got {args.bootstrap}"))
    return next((text for broken, text in rules if broken), None)


def _run_assess(args: argparse.Namespace, bar: Any) -> Any:
    from ..evidence import assess

    common = {"outcome": args.outcome, "event": args.event, "seed": args.seed,
              "drop_refused": args.drop_refused, "progress": bar, "output": args.output}
    if args.predictions is not None:
        return assess.assess_predictions(args.file, args.predictions, label=args.label,
                                         risk_column=args.risk_column,
                                         band_boot=args.band_boot, **common)
    if args.external:
        return assess.assess_external(args.file, args.data, label=args.label,
                                      band_boot=args.band_boot, population=args.population,
                                      period=args.period, **common)
    return assess.assess_bootstrap(args.file, args.data, recipe=args.recipe,
                                   n_boot=args.bootstrap, **common)


def _assess_lines(args: argparse.Namespace, result: Any) -> list[str]:
    ev, rows = result.evidence, result.rows
    lines = [f"Added evidence set '{ev['id']}' ({ev['kind']}: {ev['label']}) to {args.output}",
             f"Rows: {rows.read:,} read, {rows.used:,} used, {rows.dropped:,} left out, "
             f"{rows.blank:,} empty; {ev['dataset']['events']:,} events"]
    lines += result.notes
    metrics = ev["metrics"]
    if ev["kind"] == "bootstrap":
        lines.append(f"  {'':<22}{'apparent':>10}{'optimism':>10}{'corrected':>11}")
        lines += [f"  {NAMES[k]:<22}{metrics[k + '_apparent']['value']:>10.4f}"
                  f"{metrics[k + '_optimism']['value']:>10.4f}{metrics[k]['value']:>11.4f}"
                  for k in SHOWN if k in metrics and metrics[k]["value"] is not None]
        lines.append(f"Seed {ev['settings']['seed']}: --seed {ev['settings']['seed']} "
                     "reproduces these resamples")
    else:
        lines += [f"  {NAMES[k]}: {_metric(metrics.get(k))}" for k in SHOWN if k in metrics]
    return lines


def _cmd_assess(args: argparse.Namespace) -> int:
    problem = _usage_problem(args)
    if problem:
        return _usage(args, problem)
    what = "Bootstrap" if args.data is not None and not args.external else "Evidence bands"
    with progress_bar(what, enabled=None if not args.json else False) as bar:
        result = _run_assess(args, bar)
    calc = result.calculator
    if args.json:
        print(json.dumps({"output": str(args.output), "evidence_id": result.evidence["id"],
                          "kind": result.evidence["kind"], "file_fingerprint": calc.fingerprint,
                          "signature_removed": result.signature_removed,
                          "rows": vars(result.rows), "metrics": result.evidence["metrics"]},
                         indent=2, ensure_ascii=False))
        return 0
    print("\n".join(_assess_lines(args, result)))
    print(f"file fingerprint: {calc.fingerprint}")
    if result.signature_removed:
        print("Note: the input file was signed; its signature no longer applies and was "
              "removed. Sign the new file with calcbuilder sign.")
    else:
        print("It is not signed yet: check it, then sign it with calcbuilder sign.")
    if calc.about.synthetic:
        print(SYNTHETIC)
    return 0


def register_import_evidence(actions: argparse._SubParsersAction) -> None:
    """Add ``import evidence`` to the ``import`` command group."""
    p = actions.add_parser(
        "evidence", help="attach evidence computed elsewhere (JSON or CSV summary)",
        description="Attach performance evidence computed elsewhere, checked for consistency, "
                    "as an 'imported' evidence set. Formats: docs/evidence-import.md.")
    p.add_argument("file", type=Path, metavar="FILE", help="the calculator file")
    p.add_argument("summary", type=Path, metavar="SUMMARY", help="the summary (.json or .csv)")
    p.add_argument("-o", "--output", type=Path, required=True, metavar="OUT.calc.json")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.set_defaults(func=_cmd_import_evidence)


def _cmd_import_evidence(args: argparse.Namespace) -> int:
    from ..evidence.imported import import_evidence

    calc, evidence, removed = import_evidence(args.file, args.summary, output=args.output)
    if args.json:
        print(json.dumps({"output": str(args.output), "evidence_id": evidence["id"],
                          "kind": "imported", "file_fingerprint": calc.fingerprint,
                          "signature_removed": removed}, indent=2))
        return 0
    print(f"Added evidence set '{evidence['id']}' (imported: {evidence['label']}; source: "
          f"{evidence['source']}) to {args.output}")
    print(f"file fingerprint: {calc.fingerprint}")
    if removed:
        print("Note: the input file was signed; its signature no longer applies and was "
              "removed. Sign the new file with calcbuilder sign.")
    else:
        print("It is not signed yet: check it, then sign it with calcbuilder sign.")
    return 0
