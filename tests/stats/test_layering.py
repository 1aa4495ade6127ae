"""The statistics core imports neither Qt nor pandas nor any calcbuilder layer above it."""

import json
import subprocess
import sys

import pytest

PROBE = """
import json, sys
import calcbuilder.stats
mods = sorted(sys.modules)
print(json.dumps(mods))
"""


@pytest.fixture(scope="module")
def loaded_modules() -> list[str]:
    out = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True, check=True)
    return json.loads(out.stdout)


@pytest.mark.parametrize("forbidden", ["PySide6", "pandas", "statsmodels", "matplotlib", "sklearn"])
def test_stats_does_not_import_heavy_or_gui_libraries(loaded_modules, forbidden):
    assert not [m for m in loaded_modules if m == forbidden or m.startswith(forbidden + ".")]


def test_stats_imports_nothing_of_ours_outside_stats(loaded_modules):
    ours = [m for m in loaded_modules if m.startswith("calcbuilder")]
    outside = [m for m in ours if m != "calcbuilder" and not m.startswith("calcbuilder.stats")]
    assert outside == []


def test_stats_has_no_import_of_other_layers_in_source():
    """Static check as well: no module under stats names another calcbuilder layer."""
    from pathlib import Path

    from calcbuilder import stats

    root = Path(stats.__file__).parent
    offenders = []
    for path in root.rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        for layer in ("calc", "evidence", "plots", "reports", "gui", "cli", "demo", "errors"):
            if f"calcbuilder.{layer}" in text or f"from ..{layer}" in text:
                offenders.append((path.name, layer))
    assert offenders == [], json.dumps(offenders)


def test_every_public_name_resolves():
    from calcbuilder import stats

    missing = [name for name in stats.__all__ if getattr(stats, name, None) is None]
    assert missing == []


def test_spline_basis_loads_without_scipy():
    """The clinic form scores spline terms; that must not pull scipy in (start-up time)."""
    probe = "import sys, calcbuilder.stats.splines; print(any(m == 'scipy' for m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
