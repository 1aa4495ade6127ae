"""Upgrade calculator files written in older format versions, one append-only step at a time.

Each step ``STEPS[n]`` turns a version-``n`` document into a version-``n + 1``
document and never changes once released; a new format version appends a step
and a fixture file ``tests/calc/fixtures/format-v<n>.calc.json``. Signatures are
made over the payload as written, so an upgraded document is verified against
its original bytes first (the loader does that) and re-signing is the author's
decision.

Version 1 is the first released version, so there are no steps yet.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from ..errors import CalcFileError
from .schema_check import FORMAT_NAME, FORMAT_VERSION

__all__ = ["STEPS", "read_format_version", "upgrade"]

Document = dict[str, Any]
STEPS: dict[int, Callable[[Document], Document]] = {}


def read_format_version(raw: Any) -> int:
    """The format version, read before anything else; refuses other formats and newer versions."""
    if not isinstance(raw, dict):
        raise CalcFileError(
            f"not a calculator file: the top level must be a JSON object, got {type(raw).__name__}"
        )
    name = raw.get("format")
    if name != FORMAT_NAME:
        raise CalcFileError(f"not a calculator file: format must be {FORMAT_NAME!r}, got {name!r}")
    version = raw.get("format_version")
    if isinstance(version, bool) or not isinstance(version, int) or version < 1:
        raise CalcFileError(f"format_version must be a positive integer; got {version!r}")
    if version > FORMAT_VERSION:
        raise CalcFileError(
            f"format_version {version} is newer than this calcbuilder understands "
            f"({FORMAT_VERSION}); install a newer calcbuilder"
        )
    return version


def upgrade(raw: Document) -> Document:
    """Apply the steps from the document's version up to the current one."""
    version = read_format_version(raw)
    doc = raw
    while version < FORMAT_VERSION:
        doc = STEPS[version](doc)
        version += 1
        doc["format_version"] = version
    return doc
