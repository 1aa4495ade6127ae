"""Assemble the published calculator-file schema from its section fragments.

The fragments (``calcbuilder/calc/schema/*.defs.json``) are the sources; the
published schema ``calculator-v1.schema.json`` is generated from them and
committed. ``tests/calc/test_schema.py`` fails when the two drift apart.

Usage: python scripts/build_schema.py [--check]
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

SCHEMA_DIR = Path(__file__).resolve().parents[1] / "calcbuilder" / "calc" / "schema"
PUBLISHED = SCHEMA_DIR / "calculator-v1.schema.json"
FRAGMENTS = ("document", "inputs", "model")


def build() -> dict:
    defs: dict = {}
    for name in FRAGMENTS:
        part = json.loads((SCHEMA_DIR / f"{name}.defs.json").read_text("utf-8"))["$defs"]
        clash = set(part) & set(defs)
        if clash:
            raise SystemExit(f"schema fragment {name}: $defs already defined: {sorted(clash)}")
        defs.update(part)
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "urn:calcbuilder:calculator:v1",
        "title": "calcbuilder calculator file, format version 1",
        "description": "See calcbuilder/calc/FORMAT.md. Everything except 'signature' is signed.",
        "type": "object",
        "additionalProperties": False,
        "required": ["format", "format_version", "about", "inputs", "model", "decision",
                     "cautions", "test_vectors"],
        "properties": {
            "format": {"const": "calcbuilder-calculator"},
            "format_version": {"const": 1},
            "about": {"$ref": "#/$defs/about"},
            "inputs": {"$ref": "#/$defs/inputs"},
            "model": {"$ref": "#/$defs/model"},
            "evidence": {"type": "array", "maxItems": 100,
                         "items": {"$ref": "#/$defs/evidenceSet"}},
            "decision": {"$ref": "#/$defs/decision"},
            "cautions": {"type": "array", "minItems": 1, "maxItems": 50,
                         "items": {"$ref": "#/$defs/nonEmptyString"}},
            "test_vectors": {"type": "array", "minItems": 5, "maxItems": 1000,
                             "items": {"$ref": "#/$defs/testVector"}},
            "signature": {"$ref": "#/$defs/signature"},
        },
        "$defs": defs,
    }


def render() -> str:
    return json.dumps(build(), indent=2, ensure_ascii=False) + "\n"


if __name__ == "__main__":
    text = render()
    if "--check" in sys.argv:
        sys.exit(0 if PUBLISHED.read_text("utf-8") == text else 1)
    PUBLISHED.write_text(text, "utf-8")
    print(f"wrote {PUBLISHED}")
