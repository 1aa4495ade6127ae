"""Command ``author``: open the authoring workspace.

``calcbuilder author [PROJECT.cbproject.json]``
    The desktop workspace that goes from the data to a signed calculator file
    and its evidence report, step by step, with the same functions as ``fit``,
    ``assess``, ``recalibrate``, ``compare``, ``sign`` and ``report``. A project
    file saves the workspace; the recipe it fits with is written beside it.
"""

from __future__ import annotations

import argparse
from pathlib import Path

__all__ = ["register"]


def register(sub: argparse._SubParsersAction) -> None:
    """Register ``author``."""
    p = sub.add_parser(
        "author", help="open the authoring workspace (data to signed calculator)",
        description="Open the authoring workspace: data, inputs, fit and assess, about and "
                    "cautions, decision, publish. PROJECT is a project file to reopen.")
    p.add_argument("project", nargs="?", type=Path, metavar="PROJECT",
                   help="a project file (*.cbproject.json) to open")
    p.set_defaults(func=_cmd_author)


def _cmd_author(args: argparse.Namespace) -> int:
    from ..errors import CalcbuilderError

    if args.project is not None and not args.project.is_file():
        raise CalcbuilderError(f"project file not found: {args.project}")
    from ..gui.authoring.app import run_workspace

    return run_workspace(args.project)
