"""Model updating and comparison: ``recalibrate`` and ``compare``.

``calcbuilder recalibrate FILE --data DATA --method intercept|slope [--outcome COL]
[--event VALUE] [--label TEXT] [--seed N] [--boot N] [--json] -o OUT``
    Update a logistic calculator for a new setting (methods.md section 8): fit
    ``logit P = a + eta`` (intercept) or ``a + b eta`` (slope) on DATA, store the
    recalibration (composed with an earlier one), keep the evidence (an
    ``external`` set before, a ``recalibrated`` set after), recompute the test
    vectors, drop the signature and write OUT atomically.

``calcbuilder compare NEW REF --data DATA [--cuts 10,20] [--outcome COL]
[--event VALUE] [--json]``
    Both calculators on the same patients: AUCs and their DeLong difference,
    NRI (event and non-event parts), continuous NRI, IDI, net benefit in NEW's
    reasonable range, and the calibration of both. Writes nothing.

Each calculator reads its own inputs from DATA by input id (``id[unit]`` for an
alternative unit); rows that a calculator refuses or whose outcome is empty are
excluded and counted. Bad input prints one message, exits 1 and writes nothing.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from ..calc.document import LoadedCalculator, load_calculator, save_calculator

__all__ = ["register"]

DEFAULT_SEED = 20261202
READING = ("DATA columns are named by input id (id[unit] for an alternative unit); every value "
           "is checked as on the clinic form, and rows with a refused or missing required value "
           "or an empty outcome are excluded and counted.")
CAUTION = ("These numbers describe the models on these data; they support, and do not "
           "replace, clinical judgement.")


def _data_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--data", required=True, type=Path, metavar="DATA",
                        help="CSV, Parquet or Excel file; one column per input id")
    parser.add_argument("--outcome", metavar="COL",
                        help="the outcome column (default: the one recorded in the "
                             "calculator's evidence)")
    parser.add_argument("--event", metavar="VALUE",
                        help="the outcome value that means the event happened (default 1)")
    parser.add_argument("--sheet", metavar="NAME", help="Excel only: the sheet to read")
    parser.add_argument("--json", action="store_true", help="print one JSON object")


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``recalibrate`` and ``compare``."""
    rec = sub.add_parser(
        "recalibrate", help="update a calculator's calibration for a new setting",
        description="Recalibrate a logistic calculator on new data: 'intercept' fits "
                    "logit P = a + eta (eta as offset), 'slope' fits logit P = a + b*eta. "
                    "Evidence before and after is kept; the output is unsigned.",
        epilog=READING)
    rec.add_argument("file", type=Path, metavar="FILE", help="the calculator file")
    rec.add_argument("--method", required=True, choices=("intercept", "slope"),
                     help="intercept: update the intercept only; slope: intercept and slope")
    _data_options(rec)
    rec.add_argument("--label", metavar="TEXT",
                     help="name of the new data, e.g. 'Hospital B, 2025' (default: file name)")
    rec.add_argument("--seed", type=int, default=DEFAULT_SEED,
                     help="random seed of the bootstrap bands in the evidence")
    rec.add_argument("--boot", type=int, default=200, metavar="N",
                     help="bootstrap resamples for the evidence bands (default 200)")
    rec.add_argument("-o", "--output", required=True, type=Path, metavar="OUT",
                     help="where to write the updated calculator file")
    rec.set_defaults(func=_cmd_recalibrate)

    cmp_ = sub.add_parser(
        "compare", help="compare a new calculator with a reference on the same patients",
        description="AUCs (paired DeLong), NRI, continuous NRI, IDI, net benefit and "
                    "calibration of two calculators on the same rows. Writes nothing.",
        epilog=READING + " A row refused by either calculator is excluded from both.")
    cmp_.add_argument("new", type=Path, metavar="NEW", help="the new calculator")
    cmp_.add_argument("ref", type=Path, metavar="REF", help="the reference calculator")
    cmp_.add_argument("--cuts", metavar="PCTS",
                      help="risk category cuts in percent, e.g. 10,20 (default: NEW's bands)")
    _data_options(cmp_)
    cmp_.set_defaults(func=_cmd_compare)


def _load(path: Path) -> LoadedCalculator:
    loaded = load_calculator(path)
    loaded.require_computable()
    return loaded


def _name(loaded: LoadedCalculator) -> str:
    about = loaded.calculator.about
    return f"{about.title} {about.version}"


def _est(e: Any, digits: int = 2) -> str:
    return f"{e.value:.{digits}f} ({e.low:.{digits}f} to {e.high:.{digits}f})"


def _progress() -> Callable[[int, int], None] | None:
    """A one-line progress count of the evidence resamples on a terminal (None otherwise)."""
    if not sys.stderr.isatty():
        return None

    def show(done: int, total: int) -> None:
        end = "\n" if done == total else ""
        print(f"\r  evidence bands: resample {done} of {total}", end=end, file=sys.stderr,
              flush=True)
    return show


# ----------------------------------------------------------------- recalibrate

def _cmd_recalibrate(args: argparse.Namespace) -> int:
    from ..evidence.recalibrate import recalibrate
    from ..evidence.scoring_data import load_scored_data, resolve_outcome

    loaded = _load(args.file)
    calc = loaded.calculator
    outcome = resolve_outcome(args.outcome, args.event, [calc])
    data = load_scored_data([calc], args.data, outcome, sheet=args.sheet)
    name = (args.label or args.data.name).strip() or args.data.name
    result = recalibrate(calc, data, args.method, name=name, seed=args.seed,
                         band_boot=args.boot, progress=_progress())
    save_calculator(result.calculator, args.output)
    summary = _recal_summary(args, loaded, data, result)
    if args.json:
        print(json.dumps(summary, ensure_ascii=False, allow_nan=False))
    else:
        _print_recal(summary, data, result)
    return 0


def _recal_summary(args: argparse.Namespace, loaded: LoadedCalculator, data: Any,
                   result: Any) -> dict[str, Any]:
    fit, rec = result.fit, result.recalibration
    return {
        "input": str(args.file), "output": str(args.output), "calculator": _name(loaded),
        "method": args.method, "data": str(args.data), "n": data.n, "events": data.events,
        "excluded": data.excluded, "outcome_column": data.outcome.column,
        "fitted": {"intercept": fit.intercept, "intercept_se": fit.intercept_se,
                   "slope": fit.slope, "slope_se": fit.slope_se},
        "stored": rec.to_dict(), "composed": result.previous is not None,
        "before": result.before.to_dict(), "after": result.after.to_dict(),
        "evidence_added": list(result.evidence_ids),
        "fingerprint": result.calculator.fingerprint, "signed": False,
        "version": result.calculator.about.version,
        "synthetic": result.calculator.about.synthetic,
    }


def _print_recal(s: dict[str, Any], data: Any, result: Any) -> None:
    fit = result.fit
    print(f"Recalibrated {s['calculator']} on {s['data']}: {data.n} rows used, "
          f"{data.events} events (outcome column '{data.outcome.column}').")
    if data.excluded:
        print(f"  Excluded: {data.exclusion_note()}")
    if fit.method == "intercept":
        print(f"  Intercept update, logit P = a + eta (eta as offset): a = {fit.intercept:.4f} "
              f"(SE {fit.intercept_se:.4f})")
    else:
        print(f"  Logistic recalibration, logit P = a + b*eta: a = {fit.intercept:.4f} "
              f"(SE {fit.intercept_se:.4f}), b = {fit.slope:.4f} (SE {fit.slope_se:.4f})")
    if result.previous is not None:
        rec = result.recalibration
        print(f"  The model already had a recalibration (a = {result.previous.intercept:.4f}, "
              f"b = {result.previous.slope:.4f}); composed: eta'' = {rec.intercept:.4f} + "
              f"{rec.slope:.4f} * eta ({rec.method})")
    b, a = result.before, result.after
    print(f"  {'':24}{'before':>26}{'after':>26}")
    print(f"  {'calibration intercept':24}{_est(b.intercept):>26}{_est(a.intercept):>26}")
    print(f"  {'calibration slope':24}{_est(b.slope):>26}{_est(a.slope):>26}")
    print(f"  {'observed / expected':24}{b.observed_expected:>26.2f}"
          f"{a.observed_expected:>26.2f}")
    print("  (95% Wald intervals; 'after' is on the data it was fitted to, so it is right by "
          "construction)")
    print(f"  Evidence kept; added: {', '.join(s['evidence_added'])}.")
    print("  Test vectors recomputed as expit(a + b*logit(stored risk)) and reproduced by the "
          "calculator's scoring within 1e-9.")
    print(f"Written to {s['output']} (fingerprint {s['fingerprint']}).")
    signed = "The signature was removed: " if result.was_signed else "It is unsigned: "
    print(signed + "the file must be re-signed (calcbuilder sign) before clinic use. "
          f"about.version is still {s['version']}; consider a new version.")
    if s["synthetic"]:
        print("SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use")


# --------------------------------------------------------------------- compare

def _cmd_compare(args: argparse.Namespace) -> int:
    from ..errors import CalcbuilderError
    from ..evidence.compare import (
        compare_risks,
        comparison_thresholds,
        default_cuts,
        parse_cuts,
        result_dict,
    )
    from ..evidence.scoring_data import load_scored_data, resolve_outcome

    cuts = parse_cuts(args.cuts) if args.cuts is not None else None
    new, ref = _load(args.new), _load(args.ref)
    if cuts is None:
        cuts = default_cuts(new.calculator.decision)
        if cuts is None:
            raise CalcbuilderError("give the risk category cuts with --cuts (percent, e.g. "
                                   "--cuts 10,20): the new calculator has no risk bands")
    outcome = resolve_outcome(args.outcome, args.event, [new.calculator, ref.calculator])
    data = load_scored_data([new.calculator, ref.calculator], args.data, outcome,
                            sheet=args.sheet)
    result = compare_risks(data.y, data.risks[0], data.risks[1], cuts=cuts,
                           thresholds=comparison_thresholds(new.calculator.decision),
                           new_name=_name(new), ref_name=_name(ref),
                           ref_fingerprint=ref.fingerprint)
    if args.json:
        out = {**result_dict(result), "data": str(args.data), "excluded": data.excluded,
               "excluded_note": data.exclusion_note(), "outcome_column": outcome.column,
               "new_fingerprint": new.fingerprint, "ref_fingerprint": ref.fingerprint}
        print(json.dumps(out, ensure_ascii=False, allow_nan=False))
        return 0
    _print_compare(result, data, new, args.data)
    return 0


def _p(p: float) -> str:
    if not math.isfinite(p):
        return "n/a"
    return "<0.001" if p < 0.001 else f"{p:.3f}"


def _print_compare(r: Any, data: Any, new: LoadedCalculator, path: Path) -> None:
    print(f"NEW: {r.new_name}\nREF: {r.ref_name}")
    print(f"Data: {path}, {r.n} rows used, {r.events} events "
          f"(outcome column '{data.outcome.column}').")
    if data.excluded:
        print(f"Excluded from both models: "
              f"{data.exclusion_note()}")
    auc = r.auc
    print(f"\n{'':26}{'NEW':>24}{'REF':>24}")
    print(f"{'AUC':26}{auc.auc_a:>24.3f}{auc.auc_b:>24.3f}")
    cn, cr = r.calibration_new, r.calibration_ref
    print(f"{'calibration intercept':26}{_est(cn.intercept):>24}{_est(cr.intercept):>24}")
    print(f"{'calibration slope':26}{_est(cn.slope):>24}{_est(cr.slope):>24}")
    print(f"{'observed / expected':26}{cn.observed_expected:>24.2f}"
          f"{cr.observed_expected:>24.2f}")
    ci = (f"95% CI {auc.low:.3f} to {auc.high:.3f}" if math.isfinite(auc.low)
          else "no interval: the DeLong standard error is 0")
    print(f"\nAUC difference (NEW - REF): {auc.difference:.3f} ({ci}), paired DeLong "
          f"p = {_p(auc.p_value)}")
    cuts = ", ".join(f"{c * 100:g}%" for c in r.cuts)
    print(f"Reclassification (NEW vs REF) at cuts {cuts}:")
    print(f"  NRI events {r.nri.events:+.3f}, non-events {r.nri.nonevents:+.3f}, total "
          f"{r.nri.total:+.3f} (SE {r.nri.se:.3f}, p = {_p(r.nri.p_value)})")
    c = r.continuous_nri
    print(f"  continuous NRI {c.total:+.3f} (events {c.events:+.3f}, non-events "
          f"{c.nonevents:+.3f}, p = {_p(c.p_value)})")
    print(f"  IDI {r.idi.value:+.4f} (95% CI {r.idi.low:+.4f} to {r.idi.high:+.4f}, "
          f"p = {_p(r.idi.p_value)})")
    low, high = new.calculator.decision.reasonable_range
    print(f"\nNet benefit in NEW's reasonable range ({low * 100:g}% to {high * 100:g}%):")
    print(f"  {'threshold':>9}{'NEW':>10}{'REF':>10}{'treat all':>11}{'NEW - REF':>11}")
    for t, a, b, all_, d in zip(r.thresholds, r.nb_new, r.nb_ref, r.nb_treat_all,
                                r.nb_difference, strict=True):
        print(f"  {t * 100:>8g}%{a:>10.4f}{b:>10.4f}{all_:>11.4f}{d:>+11.4f}")
    for w in r.warnings:
        print(f"\nWARNING: {w}")
    print(f"\n{CAUTION}")
    if new.calculator.about.synthetic:
        print("SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use")
