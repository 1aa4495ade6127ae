"""Structural validation of a calculator payload against the published JSON Schema.

The schema (draft 2020-12) ships as ``calcbuilder/calc/schema/calculator-v<N>.schema.json``.
Every violation is reported with a JSON path in our notation
(``inputs[3].limits.low``), all at once.
"""

from __future__ import annotations

import json
from functools import cache
from importlib import resources
from typing import Any

from .problems import Problems, join

__all__ = ["FORMAT_NAME", "FORMAT_VERSION", "check_structure", "load_schema"]

FORMAT_NAME = "calcbuilder-calculator"
FORMAT_VERSION = 1
MAX_REPORTED = 50


@cache
def load_schema(version: int = FORMAT_VERSION) -> dict[str, Any]:
    """The published schema of one format version, as a dict."""
    name = f"calculator-v{version}.schema.json"
    text = resources.files("calcbuilder.calc").joinpath("schema", name).read_text("utf-8")
    schema: dict[str, Any] = json.loads(text)
    return schema


@cache
def _validator(version: int) -> Any:
    from jsonschema import Draft202012Validator

    # the schema itself is checked once by tests/calc/test_schema.py, not at every start
    return Draft202012Validator(load_schema(version))


def _path_of(parts: Any) -> str:
    path = ""
    for part in parts:
        path = join(path, part)
    return path


def _message(error: Any) -> str:
    """Rewrite jsonschema's messages in our plainer words where it helps."""
    if error.validator == "additionalProperties":
        extra = sorted(set(error.instance) - set(error.schema.get("properties", {})))
        return f"unknown field(s) {', '.join(map(repr, extra))}; remove them (typo?)"
    if error.validator == "required":
        return error.message.replace("is a required property", "is required")
    if error.validator == "type":
        return f"must be of type {error.validator_value}; got {type(error.instance).__name__}"
    at_version = bool(error.absolute_path) and error.absolute_path[-1] == "version"
    if error.validator == "pattern" and at_version:
        return f"must be a semantic version like 1.2.0; got {error.instance!r}"
    text: str = error.message
    return text if len(text) < 300 else text[:300] + "..."


def check_structure(payload: Any, problems: Problems, version: int = FORMAT_VERSION) -> None:
    """Add one problem per schema violation (at most ``MAX_REPORTED``) to ``problems``."""
    errors = sorted(
        _validator(version).iter_errors(payload), key=lambda e: [str(p) for p in e.absolute_path]
    )
    for error in errors[:MAX_REPORTED]:
        problems.add(_path_of(error.absolute_path), _message(error))
    if len(errors) > MAX_REPORTED:
        problems.add("$", f"... and {len(errors) - MAX_REPORTED} more schema problems")
