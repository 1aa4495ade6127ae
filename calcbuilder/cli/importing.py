"""Command group ``import``: build a calculator file from an existing model.

``calcbuilder import table COEFS.csv --inputs INPUTS.toml -o OUT [--json]``
``calcbuilder import pmml MODEL.pmml --inputs INPUTS.toml -o OUT [--json]``

Each reads the model source and the inputs description, validates the whole
calculator (test vectors re-scored) and only then writes OUT atomically; on
any problem nothing is written and the command exits 1. Formats:
``docs/importing.md``.

Adding a source is a few lines: write ``_register_<source>(actions)`` that adds
its sub-parser and ``set_defaults(func=...)``, and append it to :data:`SOURCES`.
"""

from __future__ import annotations

import argparse
import json
from collections.abc import Callable
from pathlib import Path

from .authoring import register_import_evidence

__all__ = ["SOURCES", "register"]


def _add_output(parser: argparse.ArgumentParser, *, inputs: bool = True) -> None:
    """The options every import shares: --inputs, -o/--output, --json."""
    if inputs:
        parser.add_argument("--inputs", required=True, type=Path, metavar="INPUTS.toml",
                            help="the inputs description (about, inputs, decision, cautions, "
                                 "test vectors)")
    parser.add_argument("-o", "--output", required=True, type=Path, metavar="OUT",
                        help="where to write the calculator file (.calc.json)")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")


def _report(args: argparse.Namespace, fingerprint: str) -> int:
    if args.json:
        print(json.dumps({"output": str(args.output), "file_fingerprint": fingerprint},
                         indent=2))
        return 0
    print(f"Calculator written to {args.output}")
    print(f"file fingerprint: {fingerprint}")
    print("It is not signed yet: check it, then sign it with calcbuilder sign.")
    return 0


def _cmd_table(args: argparse.Namespace) -> int:
    from ..calc.importers import import_table

    calc = import_table(args.coefficients, args.inputs, args.output)
    return _report(args, calc.fingerprint)


def _cmd_pmml(args: argparse.Namespace) -> int:
    from ..calc.importers import import_pmml

    calc = import_pmml(args.pmml, args.inputs, args.output)
    return _report(args, calc.fingerprint)


def _register_table(actions: argparse._SubParsersAction) -> None:
    table = actions.add_parser(
        "table", help="import a coefficient table (CSV)",
        description="Build a calculator from a coefficient table (term, coefficient"
                    "[, std_error]) and an inputs description.")
    table.add_argument("coefficients", type=Path, metavar="COEFS.csv",
                       help="the coefficient table")
    _add_output(table)
    table.set_defaults(func=_cmd_table)


def _register_pmml(actions: argparse._SubParsersAction) -> None:
    pmml = actions.add_parser(
        "pmml", help="import a PMML 4.x logistic regression",
        description="Build a calculator from a PMML 4.0-4.4 RegressionModel or "
                    "GeneralRegressionModel (logit) and an inputs description.")
    pmml.add_argument("pmml", type=Path, metavar="MODEL.pmml", help="the PMML document")
    _add_output(pmml)
    pmml.set_defaults(func=_cmd_pmml)


#: One function per import source, in --help order; each adds its sub-parser.
SOURCES: list[Callable[[argparse._SubParsersAction], None]] = [
    _register_table, _register_pmml, register_import_evidence]


def register(sub: argparse._SubParsersAction) -> None:
    """Register the ``import`` command group and every source in :data:`SOURCES`."""
    parser = sub.add_parser("import", help="bring in an existing model or its evidence",
                            description="Build a calculator file from an existing model (a "
                                        "coefficient table or a PMML document, with an inputs "
                                        "description in TOML), or bring in other existing "
                                        "work; one SOURCE per kind.")
    actions = parser.add_subparsers(dest="import_source", metavar="SOURCE")
    actions.required = True
    for add in SOURCES:
        add(actions)
