"""The published schema: a valid draft 2020-12 schema, generated from its fragments."""

import subprocess
import sys
from pathlib import Path

from jsonschema import Draft202012Validator

from calcbuilder.calc.schema_check import load_schema

ROOT = Path(__file__).parents[2]


def test_published_schema_is_a_valid_draft_2020_12_schema():
    Draft202012Validator.check_schema(load_schema(1))


def test_published_schema_matches_its_fragments():
    """scripts/build_schema.py --check fails when a fragment changed without a rebuild."""
    script = ROOT / "scripts" / "build_schema.py"
    done = subprocess.run([sys.executable, str(script), "--check"], check=False)
    assert done.returncode == 0, "run: python scripts/build_schema.py"
