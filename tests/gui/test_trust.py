"""Trust states on the form: tampered and invalid files refused, banners that cannot be closed.

A tampered file must never produce a risk; unsigned files and unknown signers
open with a permanent banner; a file past its review-by date warns; synthetic
calculators are marked; the caution line is always on screen.
"""

from __future__ import annotations

import json

import pytest
from PySide6.QtWidgets import QAbstractButton, QLabel

from calcbuilder.gui.look import CAUTION_LINE
from tests.fixtures_calc import CAUTION, make_calculator, write_calculator

from .conftest import choose, label, type_into


def fill(qtbot, window):
    type_into(qtbot, window, "age", "70")
    type_into(qtbot, window, "creatinine", "100")
    choose(window, "falls", "no")
    choose(window, "living", "home")


def banner(window):
    return window.header.banner_text()


def test_tampered_file_is_refused_and_computes_nothing(open_form, tmp_path, signer):
    key, trusted = signer
    doc = make_calculator(signed=True, key=key)
    doc["about"]["title"] = "A title written after signing"  # valid file, broken signature
    path = tmp_path / "tampered.calc.json"
    path.write_text(json.dumps(doc, ensure_ascii=False), "utf-8")
    window = open_form(path, trusted)
    assert window.session is None
    assert window.body is None
    assert window.findChild(QLabel, "risk") is None
    refusal = label(window, "refusal")
    assert refusal.isVisible()
    assert refusal.text().startswith("⊘  REFUSED: Signature check FAILED")
    assert "Do not use it" in refusal.text()
    assert label(window, "title").text() == "Refused: tampered.calc.json"
    assert "written after signing" not in window.header.findChild(QLabel, "title").text()
    assert label(window, "fingerprint").text().startswith("Fingerprint ")
    assert not any(a.isEnabled() for a in (window.print_action, window.save_action,
                                           window.clear_action))
    assert label(window, "cautionLine").isVisible()


@pytest.mark.parametrize(("change", "words"), [
    (lambda d: d["about"].pop("title"), "'title' is required"),
    (lambda d: d["model"]["terms"][0]["coefficients"].__setitem__(0, 0.041), "mistyped"),
    (lambda d: d["inputs"][0]["limits"].__setitem__("low", 500), "inputs[0].limits"),
])
def test_invalid_file_is_refused_with_the_reason(open_form, tmp_path, change, words):
    doc = make_calculator()
    change(doc)
    path = tmp_path / "broken.calc.json"
    path.write_text(json.dumps(doc, ensure_ascii=False), "utf-8")
    window = open_form(path)
    assert window.body is None
    assert window.findChild(QLabel, "risk") is None
    assert words in label(window, "refusal").text()


def test_unreadable_file_is_refused(open_form, tmp_path):
    path = tmp_path / "not-json.calc.json"
    path.write_text("{ this is not JSON", "utf-8")
    window = open_form(path)
    assert window.body is None
    assert label(window, "refusal").isVisible()
    window2 = open_form(tmp_path / "missing.calc.json")
    assert label(window2, "refusal").isVisible()


def test_unsigned_file_opens_with_a_permanent_banner(qtbot, open_form, calc_file):
    window = open_form(calc_file)
    assert banner(window).startswith("⚠  Not signed:")
    assert label(window, "signatureState").text() == "⚠ Not signed"
    assert not window.header.findChildren(QAbstractButton)  # nothing to close it with
    fill(qtbot, window)
    assert window.session.result().risk is not None  # it computes, under the banner
    window.clear()
    assert banner(window).startswith("⚠  Not signed:")
    assert label(window, "trustBanner").isVisible()


def test_unknown_signer_opens_with_a_permanent_banner(open_form, tmp_path):
    path = write_calculator(tmp_path, signed=True)  # a fresh key nobody trusts
    window = open_form(path)
    assert "not on this clinic's trusted list" in banner(window)
    assert label(window, "signatureState").text().startswith("⚠ Signed by a key not on")


def test_trusted_signature_shows_no_banner(open_form, tmp_path, signer):
    key, trusted = signer
    window = open_form(write_calculator(tmp_path, signed=True, key=key), trusted)
    assert banner(window) == ""
    assert label(window, "signatureState").text() == "✔ Signature verified"
    assert "Test signing unit" in label(window, "signatureState").toolTip()
    fingerprint = window.session.loaded.fingerprint
    assert label(window, "fingerprint").text() == f"Fingerprint {fingerprint[:12]}…"
    assert fingerprint in label(window, "fingerprint").toolTip()


def test_expired_file_warns(open_form, tmp_path, signer):
    key, trusted = signer
    path = write_calculator(tmp_path, signed=True, key=key, review_by="2026-01-02")
    window = open_form(path, trusted)
    assert window.session.loaded.expired
    assert "Past its review date (2026-01-02)" in banner(window)
    assert label(window, "reviewBy").text() == "Review by 2026-01-02  ⚠ past this date"


def test_synthetic_marker_and_cautions(qtbot, open_form, tmp_path):
    synthetic = open_form(write_calculator(tmp_path, "s.calc.json"))
    marker = label(synthetic, "syntheticMarker")
    assert marker.isVisible()
    assert marker.text() == "◆ SYNTHETIC, not for clinical use"
    real = open_form(write_calculator(tmp_path, "r.calc.json", synthetic=False))
    assert not label(real, "syntheticMarker").isVisible()
    for window in (synthetic, real):
        assert label(window, "cautionLine").text().endswith(CAUTION_LINE)
        assert label(window, "cautionLine").isVisible()
    fill(qtbot, real)
    cautions = label(real, "cautions")
    assert cautions.isVisible()
    assert CAUTION in cautions.text()
    assert label(real, "risk").property("riskValue") is not None


def test_caution_line_is_shown_before_any_file(open_form):
    window = open_form(None)
    assert label(window, "cautionLine").isVisible()
    assert label(window, "welcome").isVisible()
    assert not window.print_action.isEnabled()


def test_a_long_list_of_problems_is_cut_in_the_header(open_form, tmp_path):
    doc = make_calculator(12)
    for spec in doc["inputs"]:
        spec["labelx"] = "typo"
    path = tmp_path / "many.calc.json"
    path.write_text(json.dumps(doc, ensure_ascii=False), "utf-8")
    window = open_form(path)
    refusal = label(window, "refusal")
    assert "more problem(s)" in refusal.text()
    assert len(refusal.text().splitlines()) == 9
    assert refusal.toolTip().count("unknown field(s) 'labelx'") == 12
