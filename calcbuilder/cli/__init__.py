"""Command line of calcbuilder: a thin adapter over the library functions.

One error boundary: our errors print as one line on stderr and exit 1; usage
errors exit 2 (argparse); success exits 0. Each command group lives in its own
module exposing ``register(subparsers)``; tests call :func:`main` with argv.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from .. import __version__

# Modules under calcbuilder.cli that register commands, in --help order.
COMMAND_MODULES = ("calcfile", "keys", "importing", "clinic", "form", "updating", "authoring",
                   "reporting", "demo", "author")

EXIT_OK, EXIT_FAILED, EXIT_USAGE = 0, 1, 2


def build_parser() -> argparse.ArgumentParser:
    """The top-level parser with every command group registered."""
    parser = argparse.ArgumentParser(
        prog="calcbuilder",
        description="Build, check and use signed clinical risk calculators.",
    )
    parser.add_argument("--version", action="version", version=f"calcbuilder {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; return its exit code (0 ok, 1 failed, 2 bad usage)."""
    from ..errors import CalcbuilderError
    from ..stats.errors import CancelledError, StatsInputError

    parser = build_parser()
    try:
        args = parser.parse_args(list(argv) if argv is not None else None)
    except SystemExit as exc:  # argparse: --help / --version exit 0, usage errors exit 2
        return int(exc.code or 0)
    try:
        return int(args.func(args) or 0)
    except (CalcbuilderError, StatsInputError) as exc:
        print(f"calcbuilder {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_FAILED
    except CancelledError:
        print(f"calcbuilder {args.command}: cancelled; nothing was written", file=sys.stderr)
        return EXIT_FAILED
    except KeyboardInterrupt:
        print(f"calcbuilder {args.command}: interrupted; nothing was written", file=sys.stderr)
        return EXIT_FAILED
    except OSError as exc:
        print(f"calcbuilder {args.command}: error: {exc.strerror or exc}: {exc.filename or ''}",
              file=sys.stderr)
        return EXIT_FAILED
