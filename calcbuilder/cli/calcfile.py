"""Commands on calculator files: ``check`` and ``score``.

``calcbuilder check FILE [--trust PUBKEY ...] [--json]``
    Validate schema, meaning and test vectors; verify the signature; print the
    state and fingerprint. Exit 0 when the file may be used (verified, unknown
    signer or unsigned — the state says which), 1 when it is invalid or tampered.

``calcbuilder score FILE PATIENTS.csv -o OUT.csv``
    Score many patients. One column per input id in canonical units; a header
    ``id[unit]`` selects an alternative unit; other columns are carried through.
    OUT.csv keeps the input columns and adds ``risk``, ``risk_low``,
    ``risk_high`` and ``warnings``; a row with bad values gets an empty risk and
    its message, and the other rows are still scored.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
from pathlib import Path
from typing import Any

from ..calc.document import LoadedCalculator, load_calculator
from ..calc.keys import TrustedKeys
from ..calc.signing import TrustState

__all__ = ["register"]


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``check`` and ``score``."""
    check = sub.add_parser(
        "check", help="validate a calculator file and verify its signature",
        description="Validate a calculator file (schema, meaning, test vectors), verify its "
                    "signature against the trusted keys, and print its state and fingerprint.")
    check.add_argument("file", type=Path, metavar="FILE")
    check.add_argument("--trust", type=Path, action="append", default=[], metavar="PUBKEY",
                       help="also trust this public key file for this check (repeatable)")
    check.add_argument("--json", action="store_true", help="print one JSON object")
    check.set_defaults(func=_cmd_check)

    score = sub.add_parser(
        "score", help="score a CSV of patients with a calculator",
        description="Score every row of PATIENTS.csv. Columns are input ids (canonical units); "
                    "a header id[unit] selects an alternative unit; other columns are kept.")
    score.add_argument("file", type=Path, metavar="FILE")
    score.add_argument("patients", type=Path, metavar="PATIENTS.csv")
    score.add_argument("-o", "--output", type=Path, required=True, metavar="OUT.csv")
    score.add_argument("--trust", type=Path, action="append", default=[], metavar="PUBKEY",
                       help="also trust this public key file (repeatable)")
    score.add_argument("--decimal-comma", action="store_true",
                       help="numbers in the CSV use a decimal comma (fields must then be quoted)")
    score.set_defaults(func=_cmd_score)


def _load(args: argparse.Namespace) -> LoadedCalculator:
    trusted = TrustedKeys(extra_files=tuple(args.trust))
    return load_calculator(args.file, trusted=trusted)


def _summary(loaded: LoadedCalculator) -> dict[str, Any]:
    about = loaded.calculator.about
    return {
        "file": str(loaded.path),
        "valid": loaded.state is not TrustState.TAMPERED,
        "state": loaded.state.name.lower(),
        "message": loaded.verification.message,
        "fingerprint": loaded.fingerprint,
        "key_fingerprint": loaded.verification.key_fingerprint,
        "signer": loaded.verification.signer,
        "title": about.title,
        "version": about.version,
        "review_by": about.review_by.isoformat(),
        "expired": loaded.expired,
        "synthetic": about.synthetic,
        "test_vectors": len(loaded.calculator.test_vectors),
    }


def _cmd_check(args: argparse.Namespace) -> int:
    loaded = _load(args)
    info = _summary(loaded)
    if args.json:
        print(json.dumps(info, ensure_ascii=False))
        return 0 if info["valid"] else 1
    print(f"{info['title']} (version {info['version']})")
    print(f"  file:        {info['file']}")
    print(f"  fingerprint: {info['fingerprint']}")
    print(f"  signature:   {info['state'].replace('_', ' ')} - {info['message']}")
    print(f"  test vectors: {info['test_vectors']} reproduced within 1e-9")
    review = f"  review by:   {info['review_by']}"
    if info["expired"]:
        review += f"  PAST ITS REVIEW DATE (today {dt.date.today().isoformat()}): ask the author"
    print(review)
    if info["synthetic"]:
        print("  SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use")
    if not info["valid"]:
        print("  INVALID: this file must not be used to compute risks")
        return 1
    return 0


def _cmd_score(args: argparse.Namespace) -> int:
    from ..calc.batch import score_csv

    loaded = _load(args)
    loaded.require_computable()
    report = score_csv(loaded.calculator, args.patients, args.output,
                       decimal_comma=args.decimal_comma)
    print(f"Scored {report.scored} of {report.rows} rows with {loaded.calculator.about.title} "
          f"(fingerprint {loaded.fingerprint[:16]}...); {report.refused} row(s) refused, "
          f"{report.warned} with warnings; written to {args.output}")
    if report.ignored_columns:
        print(f"Columns carried through unchanged: {', '.join(report.ignored_columns)}")
    if loaded.calculator.about.synthetic:
        print("SYNTHETIC DEMONSTRATION MATERIAL - not for clinical use")
    return 0
