"""Commands on calculator files: check, keys, sign, import, score (being written)."""

from __future__ import annotations

import argparse


def register(sub: argparse._SubParsersAction) -> None:
    """Register this module's commands (none yet)."""
    del sub
