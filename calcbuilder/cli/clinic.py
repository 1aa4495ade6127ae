"""Clinic commands: ``sheet`` (one patient's risk sheet to PDF, headless).

``calcbuilder sheet FILE --value ID=VALUE ... [--unit ID=UNIT ...] [--threshold PCT]
[--patient-ref TEXT] [--page A4|Letter] [--trust PUBKEY ...] [--decimal-comma]
[--json] -o SHEET.pdf``

Values are given as they would be typed on the form (numbers in the input's
canonical unit unless ``--unit`` names another; yes/no as ``yes``/``no``;
choices by their value). When any value is refused, every message is printed,
nothing is written and the exit code is 1. ``--threshold`` is a percentage
(default: the calculator's default threshold). The patient reference is printed
on the sheet and nowhere else.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from ..calc.document import load_calculator
from ..calc.keys import TrustedKeys
from ..clinic.session import ClinicSession
from ..errors import CalcbuilderError

__all__ = ["register"]

EXIT_FAILED = 1


def _pair(text: str) -> tuple[str, str]:
    """``ID=VALUE`` -> ``(ID, VALUE)`` (argparse type; a bad form is a usage error)."""
    key, sep, value = text.partition("=")
    if not sep or not key.strip():
        raise argparse.ArgumentTypeError(f"expected ID=VALUE, e.g. age=72; got {text!r}")
    return key.strip(), value


def _percent(text: str) -> float:
    """``15`` or ``15%`` -> 15.0 (argparse type)."""
    try:
        return float(text.strip().removesuffix("%"))
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected a percentage such as 15 or 12.5; got {text!r}") from None


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``sheet``."""
    sheet = sub.add_parser(
        "sheet", help="write one patient's risk sheet (PDF) without opening the form",
        description="Check one patient's values with a calculator and write the one-page risk "
                    "sheet. Nothing is written when a value is refused.")
    sheet.add_argument("file", type=Path, metavar="FILE", help="the calculator file")
    sheet.add_argument("--value", type=_pair, action="append", default=[], metavar="ID=VALUE",
                       help="a patient value as typed (repeatable)")
    sheet.add_argument("--unit", type=_pair, action="append", default=[], metavar="ID=UNIT",
                       help="the unit a number is given in, when not the calculator's own")
    sheet.add_argument("--threshold", type=_percent, metavar="PCT",
                       help="decision threshold in percent (default: the calculator's)")
    sheet.add_argument("--patient-ref", default="", metavar="TEXT",
                       help="a reference printed on the sheet (never stored)")
    sheet.add_argument("--page", choices=("A4", "Letter"), default="A4")
    sheet.add_argument("--trust", type=Path, action="append", default=[], metavar="PUBKEY",
                       help="also trust this public key file (repeatable)")
    sheet.add_argument("--decimal-comma", action="store_true",
                       help="numbers are written with a decimal comma")
    sheet.add_argument("--json", action="store_true", help="print the result as one JSON object")
    sheet.add_argument("-o", "--output", type=Path, required=True, metavar="SHEET.pdf")
    sheet.set_defaults(func=_cmd_sheet)


def _session(args: argparse.Namespace) -> ClinicSession:
    loaded = load_calculator(args.file, trusted=TrustedKeys(extra_files=tuple(args.trust)))
    session = ClinicSession(loaded, decimal_comma=args.decimal_comma or None)
    known = {spec.id for spec in session.inputs}
    strangers = [key for key, _ in (*args.value, *args.unit) if key not in known]
    if strangers:
        raise CalcbuilderError(f"not inputs of this calculator: {', '.join(strangers)}; its "
                               f"inputs are: {', '.join(spec.id for spec in session.inputs)}")
    for key, unit in args.unit:
        session.set_unit(key, unit)
    for key, value in args.value:
        session.set_value(key, value)
    session.set_patient_ref(args.patient_ref)
    return session


def _cmd_sheet(args: argparse.Namespace) -> int:
    from ..clinic.threshold import Threshold
    from ..reports.sheet import make_sheet

    session = _session(args)
    result = session.result()
    if not result.ok:
        for message in result.all_messages:
            if message.blocking:
                print(f"calcbuilder sheet: {message.text}", file=sys.stderr)
        print("calcbuilder sheet: nothing was written", file=sys.stderr)
        return EXIT_FAILED
    threshold = Threshold.from_percent(args.threshold) if args.threshold is not None else None
    info = make_sheet(session, args.output, page=args.page, threshold=threshold)
    chosen = threshold or session.threshold
    if args.json:
        print(json.dumps({"output": str(args.output), "pages": info.pages,
                          "risk": result.risk, "low": result.low, "high": result.high,
                          "threshold": chosen.pt, "state": session.loaded.state.value,
                          "fingerprint": session.loaded.fingerprint,
                          "synthetic": session.synthetic}))
        return 0
    for notice in session.banners:
        print(f"note: {notice}", file=sys.stderr)
    for message in result.all_messages:
        print(f"warning: {message.text}", file=sys.stderr)
    pages = f"{info.pages} page{'s' if info.pages > 1 else ''}"
    print(f"Risk sheet written to {args.output} ({pages}, {args.page}): estimated "
          f"risk {result.risk:.1%}, threshold {chosen.percent_text()}.")
    return 0
