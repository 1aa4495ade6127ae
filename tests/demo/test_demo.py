"""``calcbuilder demo``: every promised file, the signature, the sheet, the summary, the evidence.

The demo runs once per module with ``--bootstrap 20`` and ``--json`` (fast), and
once more with the default 200 resamples and the text summary, in an
environment without any display, to check that no window is tried.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import math
import stat
import time
from pathlib import Path

import numpy as np
import pytest
from pypdf import PdfReader

from calcbuilder.calc.document import Calculator, load_calculator
from calcbuilder.calc.keys import (
    CONFIG_DIR_ENV,
    TrustedKeys,
    key_fingerprint,
    load_private_key,
    load_public_key,
    private_key_is_encrypted,
    public_key_label,
)
from calcbuilder.calc.signing import TrustState
from calcbuilder.cli import demo as cli_demo
from calcbuilder.cli import main
from calcbuilder.demo.cohort_files import clean_columns
from calcbuilder.demo.pipeline import DEMO_PATIENT, FILE_NAMES
from calcbuilder.demo.reference import REFERENCE_VECTORS, reference_document, reference_risk
from calcbuilder.demo.scenario import make_cohort
from calcbuilder.evidence import load_recipe

PROMISED = ("demo.calc.json", "demo-key.pub", "demo-evidence.pdf", "demo-sheet.pdf",
            "cohort-development.csv", "cohort-external.csv", "reference.calc.json")
NO_DISPLAY = ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM")


def _run(*argv: str) -> tuple[int, str]:
    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer):
        code = main(list(argv))
    return code, buffer.getvalue()


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """(folder, parsed --json summary) of one fast demo run."""
    root = tmp_path_factory.mktemp("demo")
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv(CONFIG_DIR_ENV, str(root / "config"))
        code, out = _run("demo", "--no-window", "--out", str(root / "out"), "--bootstrap", "20",
                         "--json")
    assert code == 0
    return root / "out", json.loads(out)


def _trusted(folder: Path) -> TrustedKeys:
    return TrustedKeys(folder / "no-trusted-keys", extra_files=(folder / "demo-key.pub",))


def test_every_promised_file_exists(demo):
    folder, summary = demo
    for name in (*PROMISED, *FILE_NAMES.values()):
        assert (folder / name).is_file(), name
    assert {f["name"] for f in summary["files"]} == set(FILE_NAMES.values())
    assert all(f["made"] for f in summary["files"])
    assert summary["missing"] == []


def test_calculator_verifies_with_the_demo_key_only(demo):
    folder, summary = demo
    calc = folder / "demo.calc.json"
    assert load_calculator(calc, trusted=_trusted(folder)).state is TrustState.VERIFIED
    stranger = TrustedKeys(folder / "no-trusted-keys")
    assert load_calculator(calc, trusted=stranger).state is TrustState.UNKNOWN_SIGNER
    assert summary["signature_state"] == "verified"
    code, _ = _run("check", str(calc), "--trust", str(folder / "demo-key.pub"))
    assert code == 0


def test_demo_key_is_unencrypted_and_says_demo(demo):
    folder, _ = demo
    key, pub = folder / "demo-key.key", folder / "demo-key.pub"
    assert not private_key_is_encrypted(key)
    assert stat.S_IMODE(key.stat().st_mode) == 0o600
    assert "DEMO" in key.read_text("utf-8").split("-----BEGIN")[0]
    assert "demo" in public_key_label(pub).lower()
    public = load_private_key(key, None).public_key()
    assert key_fingerprint(public) == key_fingerprint(load_public_key(pub))


def test_sheet_is_one_synthetic_page(demo):
    folder, summary = demo
    reader = PdfReader(folder / "demo-sheet.pdf")
    assert len(reader.pages) == 1
    text = reader.pages[0].extract_text()
    assert "SYNTHETIC" in text
    assert "made up" in text
    assert summary["numbers"]["sheet_pages"] == 1


def test_report_is_written_and_synthetic(demo):
    folder, summary = demo
    reader = PdfReader(folder / "demo-evidence.pdf")
    assert len(reader.pages) == summary["numbers"]["report_pages"] > 1
    assert "SYNTHETIC" in reader.pages[0].extract_text()


def test_summary_matches_the_files(demo):
    folder, summary = demo
    by_role = {f["role"]: f for f in summary["files"]}
    for f in summary["files"]:
        assert hashlib.sha256((folder / f["name"]).read_bytes()).hexdigest() == f["sha256"]
    trusted = _trusted(folder)
    for role in ("calculator", "reference"):
        loaded = load_calculator(folder / FILE_NAMES[role], trusted=trusted)
        assert by_role[role]["fingerprint"] == loaded.fingerprint
    key_fp = key_fingerprint(load_public_key(folder / "demo-key.pub"))
    assert by_role["public_key"]["fingerprint"] == by_role["private_key"]["fingerprint"] == key_fp
    signed = json.loads((folder / "demo.calc.json").read_text("utf-8"))
    assert signed["signature"]["key_fingerprint"] == key_fp


def test_external_evidence_shows_miscalibration_then_none(demo):
    folder, summary = demo
    calc = load_calculator(folder / "demo.calc.json").calculator
    external = next(e for e in calc.evidence if e.kind == "external")
    after = next(e for e in calc.evidence if e.kind == "recalibrated")
    before_citl, after_citl = (e.metric("calibration_intercept") for e in (external, after))
    assert before_citl["low"] > 0  # Hospital B has more delirium than the model predicts
    assert abs(after_citl["value"]) < 1e-6
    assert after_citl["low"] < 0 < after_citl["high"]
    assert calc.model.recalibration is not None
    assert calc.model.recalibration.method == "intercept"
    assert math.isclose(calc.model.recalibration.intercept, before_citl["value"], abs_tol=1e-6)
    numbers = summary["numbers"]
    assert numbers["external_before"]["miscalibrated"] is True
    assert numbers["external_after"]["miscalibrated"] is False


def test_model_has_spline_age_and_bootstrap_evidence(demo):
    folder, summary = demo
    calc = load_calculator(folder / "demo.calc.json").calculator
    age = next(t for t in calc.to_dict()["model"]["terms"] if t.get("input") == "age")
    assert age["transform"]["type"] == "rcs"
    assert len(age["transform"]["knots"]) == 4
    assert [e.kind for e in calc.evidence] == ["apparent", "bootstrap", "external",
                                               "recalibrated"]
    boot = calc.evidence[1].raw["settings"]
    assert boot["bootstrap"] == 20
    assert boot["seed"] == summary["seed"]
    assert summary["numbers"]["auc_optimism_corrected"] < summary["numbers"]["auc_apparent"]


def test_raw_data_refused_with_the_unit_message_then_cleaned(demo):
    folder, summary = demo
    refused = " ".join(summary["refused_on_raw_data"])
    assert "check the unit" in refused
    assert "sodium" in refused
    raw = (folder / "cohort-development.csv").read_text("utf-8")
    assert ",1.27," in raw  # a creatinine in mg/dL
    assert ",," in raw  # a missing value
    assert any("converted" in line for line in summary["cleaning"])
    apparent = load_calculator(folder / "demo.calc.json").calculator.evidence[0]
    assert apparent.raw["settings"]["data_file"] == "cohort-development-cleaned.csv"
    assert apparent.raw["settings"]["complete_case"] is True


def test_comparison_with_the_reference_is_stored(demo):
    folder, summary = demo
    calc = load_calculator(folder / "demo.calc.json").calculator
    ref = load_calculator(folder / "reference.calc.json")
    block = next(e for e in calc.evidence if e.kind == "recalibrated").raw["reclassification"]
    assert block["reference_fingerprint"] == ref.fingerprint
    assert list(block["cuts"]) == [0.05, 0.15]
    assert summary["numbers"]["comparison"]["auc_reference"] == pytest.approx(block["auc_ref"])
    assert [i.id for i in ref.calculator.inputs] == ["age", "cog_errors", "asa"]


def test_everything_is_marked_synthetic(demo):
    folder, summary = demo
    assert summary["synthetic"] is True
    assert summary["not_for_clinical_use"] is True
    for name in ("demo.calc.json", "reference.calc.json"):
        calc = load_calculator(folder / name).calculator
        assert calc.about.synthetic is True
        assert any("not for clinical use" in c.lower() for c in calc.cautions)
        assert any("judgement" in c for c in calc.cautions)
    recipe = (folder / "demo-recipe.toml").read_text("utf-8")
    assert "SYNTHETIC" in recipe
    assert "synthetic = true" in recipe


def test_reference_vectors_are_computed_by_hand():
    doc = reference_document()
    assert len(doc["test_vectors"]) >= 5
    calc = Calculator.from_dict(doc)  # re-scores every vector within 1e-9
    for (_, age, errors, asa), vec in zip(REFERENCE_VECTORS, calc.test_vectors, strict=True):
        eta = -7.0 + 0.06 * age + 0.2 * errors + {"I-II": 0.0, "III": 0.4, "IV": 0.9}[asa]
        assert vec.risk == pytest.approx(1 / (1 + math.exp(-eta)), abs=1e-15)
        assert reference_risk(age, errors, asa) == vec.risk


def test_cleaning_converts_plausible_units_and_empties_the_rest():
    recipe = load_recipe(Path(cli_demo.__file__).parents[1] / "demo" / "recipe.toml")
    raw = make_cohort("development").raw
    cleaned, notes = clean_columns(raw, recipe)
    assert len(notes) == 3
    creatinine, sodium = cleaned["creatinine"], cleaned["sodium"]
    assert np.nanmin(creatinine) >= 10
    assert np.nanmax(sodium) <= 180
    assert np.isnan(sodium).sum() == np.isnan(raw["sodium"]).sum() + 1
    assert np.isnan(creatinine).sum() == np.isnan(raw["creatinine"]).sum()


@pytest.mark.parametrize(("env", "expected"), [
    ({}, False),
    ({"DISPLAY": ":0"}, True),
    ({"WAYLAND_DISPLAY": "wayland-0"}, True),
    ({"QT_QPA_PLATFORM": "offscreen"}, False),
    ({"DISPLAY": ":0", "QT_QPA_PLATFORM": "minimal"}, False),
    ({"QT_QPA_PLATFORM": "xcb"}, True),
])
def test_display_rule(env, expected):
    assert cli_demo.display_available(env) is expected


@pytest.mark.parametrize("argv", [["--bootstrap", "0"], ["--seed", "-1"]])
def test_usage_errors_write_nothing(tmp_path, capsys, argv):
    assert main(["demo", "--no-window", "--out", str(tmp_path / "out"), *argv]) == 2
    assert "calcbuilder demo: error:" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_demo_patient_is_made_up_and_complete():
    recipe = load_recipe(Path(cli_demo.__file__).parents[1] / "demo" / "recipe.toml")
    assert set(DEMO_PATIENT) == {e.id for e in recipe.inputs}


@pytest.mark.slow
def test_default_run_without_display_prints_the_summary(tmp_path, monkeypatch):
    """Default 200 resamples, text summary, no display: no window is tried."""
    for name in NO_DISPLAY:
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv(CONFIG_DIR_ENV, str(tmp_path / "config"))

    def no_window(result):
        raise AssertionError("a window was tried without a display")

    monkeypatch.setattr(cli_demo, "_open_form", no_window)
    started = time.perf_counter()
    code, out = _run("demo", "--out", str(tmp_path / "out"))
    elapsed = time.perf_counter() - started
    assert code == 0
    assert elapsed < 120  # about 12 s on an idle development machine
    assert "SYNTHETIC DEMONSTRATION MATERIAL - NOT FOR CLINICAL USE" in out
    assert "clinical judgement" in out
    for name in PROMISED:
        assert name in out
    calc = load_calculator(tmp_path / "out" / "demo.calc.json")
    assert f"fp {calc.fingerprint[:12]}" in out
    assert calc.calculator.evidence[1].raw["settings"]["bootstrap"] == 200


def test_interrupt_says_the_output_is_incomplete(tmp_path, capsys, monkeypatch):
    from calcbuilder.demo import pipeline

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(pipeline, "run_demo", interrupted)
    assert main(["demo", "--no-window", "--out", str(tmp_path / "out")]) == 1
    err = capsys.readouterr().err
    assert "interrupted" in err
    assert "incomplete demo" in err
