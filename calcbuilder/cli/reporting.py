"""Reporting command: ``report`` (the evidence report of a calculator file, as PDF).

``calcbuilder report FILE -o REPORT.pdf [--trust PUBKEY ...] [--page A4|Letter] [--json]``

The file is loaded exactly as the clinic form loads it (schema, meaning, test
vectors, signature against the trusted keys plus any ``--trust`` key). A file
that cannot be loaded, or whose signature does not verify, gets no report:
the reason is printed, nothing is written and the exit code is 1. The PDF is
written atomically, so an existing report is replaced only by a complete one.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from ..calc.document import load_calculator
from ..calc.keys import TrustedKeys

__all__ = ["register"]


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``report``."""
    report = sub.add_parser(
        "report", help="write the evidence report (PDF) of a calculator file",
        description="Write the evidence report of a calculator file for reviewers and "
                    "governance: the full equation, coefficients, evidence, test vectors, "
                    "fingerprint and signature. Nothing is written when the file is refused.")
    report.add_argument("file", type=Path, metavar="FILE", help="the calculator file")
    report.add_argument("-o", "--output", type=Path, required=True, metavar="REPORT.pdf")
    report.add_argument("--trust", type=Path, action="append", default=[], metavar="PUBKEY",
                        help="also trust this public key file (repeatable)")
    report.add_argument("--page", choices=("A4", "Letter"), default="A4")
    report.add_argument("--json", action="store_true", help="print the result as one JSON object")
    report.set_defaults(func=_cmd_report)


def _cmd_report(args: argparse.Namespace) -> int:
    from ..reports.evidence_report import make_report

    loaded = load_calculator(args.file, trusted=TrustedKeys(extra_files=tuple(args.trust)))
    info = make_report(loaded, args.output, page=args.page)
    about = loaded.calculator.about
    if args.json:
        print(json.dumps({"output": str(args.output), "pages": info.pages,
                          "sections": list(info.sections), "title": about.title,
                          "version": about.version, "fingerprint": loaded.fingerprint,
                          "state": loaded.state.value, "synthetic": about.synthetic}))
        return 0
    pages = f"{info.pages} page{'s' if info.pages != 1 else ''}"
    print(f"Evidence report written to {args.output} ({pages}, {args.page}) for "
          f"{about.title} {about.version}, file {loaded.fingerprint[:16]}, "
          f"signature: {loaded.state.value.replace('_', ' ')}.")
    return 0
