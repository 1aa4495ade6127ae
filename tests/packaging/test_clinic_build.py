"""The standalone clinic build (``packaging/``): its entry point, and a real PyInstaller build.

The fast tests load ``packaging/clinic_main.py`` from its file (``packaging/`` is
not a Python package: its name would shadow the ``packaging`` distribution) and
run its pieces in this process or in a fresh interpreter. ``main()`` itself is
only run in subprocesses, because it installs a network guard that lasts for the
whole process.

The build test is slow (a few minutes: a lean venv, PyInstaller, the SOUP list,
then the program's ``--selftest``). Skip it with ``CALCBUILDER_SKIP_BUILD=1``;
run it by hand with::

    .venv/bin/python -m pytest tests/packaging -m slow -v -s
"""

from __future__ import annotations

import importlib.util
import json
import os
import shutil
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path
from types import ModuleType

import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from calcbuilder.calc.keys import public_key_pem

ROOT = Path(__file__).resolve().parents[2]
MAIN = ROOT / "packaging" / "clinic_main.py"
FIXTURES = Path(__file__).resolve().parent / "fixtures"
CALC = FIXTURES / "selftest.calc.json"
KEY = FIXTURES / "selftest-signer.pub"
BUILD_DIST = ROOT / "build" / "clinic-test-dist"
PROGRAM = BUILD_DIST / "calcbuilder-clinic" / "calcbuilder-clinic"
SKIP_BUILD = os.environ.get("CALCBUILDER_SKIP_BUILD") == "1"


@pytest.fixture(scope="module")
def clinic_main() -> ModuleType:
    spec = importlib.util.spec_from_file_location("clinic_main", MAIN)
    assert spec is not None
    assert spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def run_python(code: str, *args: str, timeout: float = 120) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen", "PYTHONPATH": str(ROOT),
           # never the developer's own trusted keys
           "CALCBUILDER_CONFIG_DIR": str(Path(tempfile.gettempdir()) / "calcbuilder-no-config")}
    return subprocess.run([sys.executable, "-c", textwrap.dedent(code), *args],
                          capture_output=True, text=True, env=env, cwd=ROOT,
                          timeout=timeout, check=False)


def other_key(tmp_path: Path) -> Path:
    path = tmp_path / "someone-else.pub"
    path.write_bytes(public_key_pem(Ed25519PrivateKey.generate().public_key(), "someone"))
    return path


# --- fast: the entry point's pieces, in process -----------------------------------------------

def test_selftest_function_passes_in_process(clinic_main, qapp):
    lines: list[str] = []
    clinic_main.run_selftest(CALC, KEY, out=lines.append)
    text = "\n".join(lines)
    assert "signature verified" in text
    assert "5 test vectors recomputed through ClinicSession" in text
    assert "risk sheet made in memory" in text
    assert "form built and grabbed (1360x900" in text


def test_selftest_refuses_a_calculator_signed_by_another_key(clinic_main, tmp_path):
    with pytest.raises(clinic_main.SelftestError, match="expected verified, got unknown_signer"):
        clinic_main.run_selftest(CALC, other_key(tmp_path), gui=False, out=lambda _line: None)


def test_selftest_refuses_a_changed_calculator(clinic_main, tmp_path):
    doc = json.loads(CALC.read_text("utf-8"))
    doc["about"]["title"] = "changed after signing"
    changed = tmp_path / "changed.calc.json"
    changed.write_text(json.dumps(doc), "utf-8")
    with pytest.raises(clinic_main.SelftestError, match="expected verified, got tampered"):
        clinic_main.run_selftest(changed, KEY, gui=False, out=lambda _line: None)


def test_trusted_keys_beside_the_program_skip_unreadable_files(clinic_main, tmp_path):
    keys = tmp_path / "trusted-keys"
    keys.mkdir()
    shutil.copy(KEY, keys)
    (keys / "broken.pub").write_text("not a key", "utf-8")
    trusted, problems = clinic_main.clinic_trusted_keys(keys)
    assert [e.name for e in trusted.entries() if e.path.parent == keys] == [
        "calcbuilder self-test key (TEST ONLY)"]
    assert len(problems) == 1
    assert "broken.pub" in problems[0]
    assert "not trusted" in problems[0]


def test_check_reports_state_and_refuses_changed_files(clinic_main, tmp_path):
    shutil.copy(CALC, tmp_path / "a.calc.json")
    doc = json.loads(CALC.read_text("utf-8"))
    doc["model"]["intercept"] = 0.0  # vectors no longer reproduce: refused on load
    (tmp_path / "b.calc.json").write_text(json.dumps(doc), "utf-8")
    (tmp_path / "notes.json").write_text("{}", "utf-8")  # not *.calc.json: not opened
    paths = clinic_main.calculators_beside(tmp_path)
    assert [p.name for p in paths] == ["a.calc.json", "b.calc.json"]
    trusted, _problems = clinic_main.clinic_trusted_keys(FIXTURES)
    lines: list[str] = []
    assert clinic_main.check_files(paths, trusted, lines.append) == 1
    text = "\n".join(lines)
    assert "signature:   verified" in text
    assert "review by:   2099-12-31" in text
    assert "REFUSED" in text.split("b.calc.json", 1)[1]


# --- fast: the command line and the network guard, in fresh interpreters --------------------

def test_command_line_check_and_usage():
    done = run_python("import runpy, sys; sys.argv[0] = 'calcbuilder-clinic'; "
                      f"runpy.run_path({str(MAIN)!r}, run_name='__main__')", "--check", str(CALC))
    assert done.returncode == 0, done.stderr
    assert "unknown_signer" in done.stdout  # the self-test key is not trusted beside packaging/
    done = run_python(f"import runpy; runpy.run_path({str(MAIN)!r}, run_name='__main__')",
                      "--screenshot", "x.png")
    assert done.returncode == 2
    assert "--screenshot needs --selftest" in done.stderr


def test_network_guard_refuses_connections_and_lookups():
    done = run_python(f"""
        import importlib.util, socket
        spec = importlib.util.spec_from_file_location("clinic_main", {str(MAIN)!r})
        main = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(main)
        main.install_network_guard()
        for attempt in (lambda: socket.create_connection(("127.0.0.1", 9), timeout=0.5),
                        lambda: socket.getaddrinfo("localhost", 80)):
            try:
                attempt()
            except main.NetworkRefusedError as exc:
                print("refused:", exc)
    """)
    assert done.returncode == 0, done.stderr
    assert done.stdout.count("refused:") == 2


def test_spline_terms_score_without_scipy():
    """Calculators with spline terms must load in the build, which has no scipy."""
    done = run_python("""
        import sys

        class NoScipy:  # as in the standalone build, where scipy is left out
            def find_spec(self, name, path=None, target=None):
                if name == "scipy" or name.startswith("scipy."):
                    raise ModuleNotFoundError(f"No module named {name!r}")

        sys.meta_path.insert(0, NoScipy())
        import numpy as np
        from calcbuilder.calc.transforms import rcs_columns
        print(rcs_columns(np.array([70.0]), (68.0, 74.0, 79.0, 88.0)).shape)
    """)
    assert done.returncode == 0, done.stderr


# --- slow: the real build ---------------------------------------------------------------------

def build(*args: str, timeout: float) -> subprocess.CompletedProcess[str]:
    return subprocess.run(["bash", str(ROOT / "packaging" / "build_clinic.sh"), *args],
                          capture_output=True, text=True, cwd=ROOT, timeout=timeout,
                          check=False)


@pytest.mark.slow
@pytest.mark.skipif(SKIP_BUILD, reason="CALCBUILDER_SKIP_BUILD=1: standalone build skipped")
def test_build_runs_selftest_and_lists_its_soup():
    started = time.perf_counter()
    prepared = build("--prepare", timeout=900)
    venv_python = ROOT / "build" / "clinic-venv" / "bin" / "python"
    has_pyinstaller = venv_python.exists() and subprocess.run(
        [str(venv_python), "-c", "import PyInstaller"], check=False).returncode == 0
    if prepared.returncode != 0 and not has_pyinstaller:
        pytest.skip("PyInstaller could not be installed into build/clinic-venv: "
                    + prepared.stderr.strip()[-500:])
    assert prepared.returncode == 0, prepared.stderr[-3000:]
    built = build("--no-selftest", "--distpath", str(BUILD_DIST), str(CALC), str(KEY),
                  timeout=1200)
    assert built.returncode == 0, built.stdout[-3000:] + built.stderr[-3000:]
    build_seconds = time.perf_counter() - started
    # --check ran on the calculator and key put beside the program
    assert "signature:   verified" in built.stdout

    started = time.perf_counter()
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen"}
    done = subprocess.run([str(PROGRAM), "--selftest"], capture_output=True, text=True,
                          env=env, timeout=300, check=False)
    selftest_seconds = time.perf_counter() - started
    assert done.returncode == 0, done.stdout + done.stderr
    assert "selftest ok" in done.stdout
    assert "spline basis matches" in done.stdout
    assert "network access refused by the guard" in done.stdout

    soup = PROGRAM.parent / "SOUP.txt"
    assert soup.is_file()
    names = {c["name"].lower().replace("_", "-") for c in
             json.loads((PROGRAM.parent / "soup.json").read_text("utf-8"))["components"]}
    text = soup.read_text("utf-8")
    for wanted in ("pyside6-essentials", "numpy"):
        assert wanted in names
        assert wanted.split("-")[0] in text.lower()
    for forbidden in ("pandas", "scipy", "statsmodels", "scikit-learn"):
        assert forbidden not in names
        assert f"\n{forbidden} " not in text.lower()
    size = sum(f.lstat().st_size for f in PROGRAM.parent.rglob("*")
               if f.is_file() and not f.is_symlink())
    print(f"\nclinic build: {build_seconds:.0f} s, {size / 2**20:.0f} MiB; "
          f"selftest {selftest_seconds:.1f} s")
