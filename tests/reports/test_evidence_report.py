"""The evidence report: every section, every number needed to re-implement, markers.

The calculators are SYNTHETIC (``tests/reports/report_fixtures.py`` and
``tests/fixtures_calc.py``). Text is read back with pypdf and whitespace is
normalised before searching (desktop-stack.md, pitfall 5).
"""

from __future__ import annotations

import copy
import datetime as dt
import io
import json
import math
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from pypdf import PdfReader

from calcbuilder.calc.document import load_calculator
from calcbuilder.calc.keys import TrustedKeys
from calcbuilder.calc.scoring import score
from calcbuilder.errors import CalcbuilderError, SignatureError
from calcbuilder.reports._report_closing import RECLASSIFICATION_CAUTION, reclassification_groups
from calcbuilder.reports._report_text import exact, metric_label, metric_number
from calcbuilder.reports.evidence_report import (
    APPENDIX_TITLE,
    SECTION_TITLES,
    make_report,
    report_bytes,
)
from tests.fixtures_calc import write_calculator
from tests.reports.report_fixtures import (
    INTERCEPT,
    RECAL,
    S0,
    cohort,
    independent_risk,
    rich_document,
    signed_calculator,
    write_rich,
)

WHEN = dt.datetime(2026, 12, 2, 14, 5)
MARK = "SYNTHETIC — NOT FOR CLINICAL USE"


def pages_text(data: bytes) -> list[str]:
    """Whitespace-normalised text of every page."""
    return [" ".join((p.extract_text() or "").split()) for p in PdfReader(io.BytesIO(data)).pages]


def build(tmp_path: Path, name: str, **kwargs) -> tuple[bytes, list[str], object]:
    loaded = load_calculator(write_rich(tmp_path, f"{name}.calc.json", **kwargs))
    data, _info = report_bytes(loaded, generated_at=WHEN)
    return data, pages_text(data), loaded


@pytest.fixture(scope="module")
def logistic(tmp_path_factory):
    return build(tmp_path_factory.mktemp("logistic"), "logistic")


@pytest.fixture(scope="module")
def survival(tmp_path_factory):
    return build(tmp_path_factory.mktemp("survival"), "survival",
                 family="survival_at_horizon", recalibrated=True)


@pytest.fixture(autouse=True)
def _isolated_config(tmp_path, monkeypatch):
    monkeypatch.setenv("CALCBUILDER_CONFIG_DIR", str(tmp_path / "config"))


# --- the printed equation is the model ---------------------------------------------------


def test_printed_equation_reproduces_calcbuilder_scoring(tmp_path):
    """independent_risk is a numpy re-implementation of the equation as printed; it must equal
    calcbuilder's scoring on many patients, including ages below, between and above the
    knots and beyond the truncation bounds (tolerance: floating-point rounding only)."""
    for kwargs in ({}, {"family": "survival_at_horizon", "recalibrated": True},
                   {"recalibrated": True}):
        loaded = load_calculator(write_rich(tmp_path, evidence=False, **kwargs))
        v = cohort(400, 3)
        v["age"] = np.linspace(55, 105, 400)
        ours = score(loaded.calculator.model, v).risk
        centre = (np.asarray(loaded.calculator.model.survival.centre)
                  if loaded.calculator.model.survival else None)
        theirs = independent_risk(v, loaded.calculator.model.family, centre,
                                  recal=bool(kwargs.get("recalibrated")))
        assert np.max(np.abs(ours - theirs)) < 1e-12


# --- content ---------------------------------------------------------------------------


def test_every_section_heading_in_order(logistic):
    text = " ".join(logistic[1][1:])  # after the title page and its contents list
    positions = [text.find(f"{i}. {title}") for i, title in enumerate(SECTION_TITLES, start=1)]
    assert all(p >= 0 for p in positions), dict(zip(SECTION_TITLES, positions, strict=True))
    assert positions == sorted(positions)
    assert "Contents" in logistic[1][0]
    for i, title in enumerate(SECTION_TITLES, start=1):
        assert f"{i}. {title}" in logistic[1][0]  # the contents list


def test_title_block_facts(logistic):
    first = logistic[1][0]
    about = logistic[2].calculator.about
    for text in (about.title, "Evidence report · calculator version 2.1.0", about.intended_use,
                 about.population, "delirium (screened twice daily)", "within 7 days",
                 "A. Author; B. Statistician", "Demo Research Unit", "2026-01-15",
                 "2028-01-15", logistic[2].fingerprint, "NOT SIGNED", "2026-12-02 14:05"):
        assert text in first, text


def test_every_coefficient_printed_exactly(logistic):
    text = " ".join(logistic[1])
    model = logistic[2].calculator.model
    assert exact(INTERCEPT) in text
    for term in model.terms:
        for coef in term.coefficients:
            assert exact(coef) in text, (term.name, coef)
            assert len(exact(coef).lstrip("-0.").replace(".", "").split("e")[0]) >= 2
    assert repr(0.0123456789012345) in text  # 15 significant digits, as stored


def test_transforms_written_out(logistic):
    text = " ".join(logistic[1])
    for needle in ("4 knots at 68, 74, 79, 88", "values below 65 count as 65",
                   "values above 95 count as 95", "hinges at 2", "ln(creatinine + 1)",
                   "[asa = III]", "[asa = IV]", "reference level ‘I-II’", "[anaesthesia = general]",
                   "(88 − 68)", "(88 − 79)", "(79 − 68)", "(79 − 74)", "max(u, 0)",
                   "Harrell's parameterisation", "norm = 2", "every product of the columns",
                   "risk = 1 / (1 + exp(−η))"):
        assert needle in text, needle


def test_coefficient_table_se_ci_and_odds_ratio(logistic):
    text = " ".join(logistic[1])
    model = logistic[2].calculator.model
    se = math.sqrt(model.covariance[7][7])  # column 7: [asa = IV]
    beta = model.terms[2].coefficients[1]
    assert f"{se:.5g}" in text
    assert f"{beta - 1.959963984540054 * se:.5g} to {beta + 1.959963984540054 * se:.5g}" in text
    assert f"{math.exp(beta):.3f}" in text
    assert "IV vs I-II" in text
    assert "Odds ratio (95% CI)" in text


def test_inputs_table(logistic):
    text = " ".join(logistic[1])
    for needle in ("cog_errors", "µmol/L", "mg/dL", "× 88.42", "18 to 110", "65 to 95",
                   "10 to 2000", "40 to 300", "I-II: ASA I or II", "neuraxial: Spinal or epidural"):
        assert needle in text, needle


def test_performance_numbers(logistic):
    text = " ".join(logistic[1])
    calc = logistic[2].calculator
    apparent, boot, external = calc.evidence[:3]
    for ev in (apparent, external):
        auc = ev.metric("auc")
        assert metric_number(auc["value"]) in text
        assert f"{metric_number(auc['low'])} to {metric_number(auc['high'])}" in text
    assert "AUC (c-statistic)" in text
    assert "Observed / expected events (O/E)" in text
    assert metric_label("discrimination_slope") == "Discrimination slope"
    assert "Discrimination slope" in text  # a metric we have no label for still shows
    assert "B = 200 bootstrap resamples; random seed 20261202" in text
    assert metric_number(boot.metric("auc")["value"]) in text
    assert metric_number(boot.metric("auc_optimism")["value"]) in text
    assert "Demo Hospital B, 2025" in text


def test_data_sources(logistic):
    text = " ".join(logistic[1])
    apparent = logistic[2].calculator.evidence[0]
    for needle in ("Demo Hospital A", "2023-2024", "1,500", apparent.raw["dataset"]["sha256"],
                   "(evidence set ‘apparent-1’)", "Recorded setting ‘recipe’"):
        assert needle in text, needle


def test_figures_and_decision_table(logistic):
    data, text_pages, loaded = logistic
    images = sum(len(p.images) for p in PdfReader(io.BytesIO(data)).pages)
    assert images == 4  # calibration: apparent and external; decision curves: the same two
    text = " ".join(text_pages)
    assert "Grouped calibration" in text
    assert "15.0% (default)" in text
    dc = loaded.calculator.evidence[0].raw["decision_curve"]
    i = dc["thresholds"].index(0.15)
    assert f"{dc['model'][i]:.4f}" in text


def test_reclassification_and_its_caution(logistic):
    text = " ".join(logistic[1])
    block = logistic[2].calculator.evidence[2].raw["reclassification"]
    assert "compared with Current-use score (age and ASA)" in text
    assert "NRI, total (categorical)" in text
    assert metric_number(block["nri_total"]) in text
    assert "Integrated discrimination improvement (IDI)" in text
    assert f"{metric_number(block['idi_low'])} to {metric_number(block['idi_high'])}" in text
    assert "AUC difference (this model − reference)" in text
    assert " ".join(RECLASSIFICATION_CAUTION.split()) in text
    assert "10.0%, 20.0%" in text


def test_reclassification_grouping():
    groups = reclassification_groups({"nri_total": 0.3, "nri_se": 0.1, "nri_p_value": 0.002,
                                      "idi": 0.04, "idi_low": 0.01, "idi_high": 0.07,
                                      "auc_difference": 0.1, "auc_p_value": 0.5,
                                      "calibration_slope_new": [1.1, 0.9, 1.3],
                                      "moved_up": 12, "reference": "old"})
    assert groups["nri_total"] == {"value": 0.3, "se": 0.1, "p_value": 0.002}
    assert groups["idi"] == {"value": 0.04, "low": 0.01, "high": 0.07}
    assert groups["auc_difference"] == {"value": 0.1, "p_value": 0.5}
    assert groups["calibration_slope_new"] == {"value": 1.1, "low": 0.9, "high": 1.3}
    assert groups["moved_up"] == {"value": 12}
    assert "reference" not in groups


def test_sample_size_limitations_and_vectors(logistic):
    text = " ".join(logistic[1])
    assert "1,500 rows used meets the recorded minimum of 1,210" in text
    assert "Events per candidate parameter: 11.2" in text
    calc = logistic[2].calculator
    for caution in calc.cautions + calc.about.exclusions:
        assert caution in text
    assert "Knots and levels treated as pre-specified." in text  # an evidence note
    for vec in calc.test_vectors:
        assert exact(vec.risk) in text, vec.name
        assert vec.name in text


def test_checksum_block_and_footer_on_every_page(logistic):
    _data, pages, loaded = logistic
    block = next(p for p in pages if "15. Checksum and signature" in p and "RFC 8785" in p)
    assert loaded.fingerprint in block
    assert any(APPENDIX_TITLE in p and "β0" in p for p in pages[-3:])
    for number, page in enumerate(pages, start=1):
        assert MARK in page, number
        assert f"page {number} of {len(pages)}" in page
        assert f"file {loaded.fingerprint[:16]}" in page
        assert "version 2.1.0" in page


def test_fonts_embedded_and_metadata(logistic):
    reader = PdfReader(io.BytesIO(logistic[0]))
    fonts = {str(f["/BaseFont"]) for page in reader.pages
             for f in page["/Resources"]["/Font"].values()}
    assert any("DejaVuSans" in f for f in fonts)
    assert "Evidence report" in reader.metadata.title
    assert logistic[2].fingerprint in reader.metadata.subject


def test_survival_and_recalibration_parts(survival):
    text = " ".join(survival[1])
    model = survival[2].calculator.model
    for needle in (f"S0 = {exact(S0)}", "baseline survival at 1 years", "ln(−ln S0) + lp",
                   exact(math.log(-math.log(S0))), "Hazard ratio (95% CI)",
                   f"a = {exact(RECAL['intercept'])} and b = {exact(RECAL['slope'])}",
                   "risk = 1 − exp(−exp(η′))", "logistic recalibration",
                   "Demo Hospital B, 2025 (synthetic)", "After recalibration",
                   "Demo Hospital B, 2025, after recalibration"):
        assert needle in text, needle
    for c in model.survival.centre:
        assert exact(c) in text
    assert "(β0 is the intercept)" not in text
    assert APPENDIX_TITLE in text  # 16 x 16 covariance goes to the appendix


def test_page_size_letter(tmp_path):
    loaded = load_calculator(write_calculator(tmp_path, n_inputs=2))
    data, _info = report_bytes(loaded, page="Letter", generated_at=WHEN)
    box = PdfReader(io.BytesIO(data)).pages[0].mediabox
    assert (float(box.width), float(box.height)) == (612, 792)
    with pytest.raises(CalcbuilderError, match="A4 or Letter"):
        report_bytes(loaded, page="A3")  # type: ignore[arg-type]


def test_no_evidence_and_not_synthetic(tmp_path):
    loaded = load_calculator(write_calculator(tmp_path, with_evidence=False, synthetic=False))
    data, info = report_bytes(loaded, generated_at=WHEN)
    text = " ".join(pages_text(data))
    assert info.sections == SECTION_TITLES
    assert "No evidence is attached to this calculator file" in text
    assert "No performance evidence of any kind is attached" in text
    assert "No sample-size assessment is recorded" in text
    assert "No decision curve is attached" in text
    assert "SYNTHETIC" not in text
    for vec in loaded.calculator.test_vectors:
        assert exact(vec.risk) in text


def test_simple_fixture_without_grouped_curve(tmp_path):
    """tests/fixtures_calc evidence has no calibration curve: the section says so."""
    loaded = load_calculator(write_calculator(tmp_path, n_inputs=25))
    text = " ".join(pages_text(report_bytes(loaded, generated_at=WHEN)[0]))
    assert "No calibration curve or grouped calibration is attached." in text
    assert APPENDIX_TITLE in text


def test_signature_states(tmp_path):
    path, pub = signed_calculator(tmp_path)
    verified = load_calculator(path, trusted=TrustedKeys(extra_files=(pub,)))
    text = " ".join(pages_text(report_bytes(verified, generated_at=WHEN)[0]))
    assert "Signed and verified" in text
    assert "signature verified" in text
    assert verified.verification.key_fingerprint in text
    unknown = load_calculator(path)
    text = " ".join(pages_text(report_bytes(unknown, generated_at=WHEN)[0]))
    assert "not on this installation's trusted list" in text


def test_tampered_file_gets_no_report_and_nothing_is_written(tmp_path):
    path, _ = signed_calculator(tmp_path)
    doc = json.loads(path.read_text("utf-8"))
    doc["about"]["population"] = "someone else"
    path.write_text(json.dumps(doc), "utf-8")
    loaded = load_calculator(path)
    out = tmp_path / "report.pdf"
    out.write_bytes(b"old report")
    with pytest.raises(SignatureError, match="signature does not verify"):
        make_report(loaded, out)
    assert out.read_bytes() == b"old report"


def test_make_report_writes_atomically(tmp_path):
    loaded = load_calculator(write_calculator(tmp_path, n_inputs=3))
    out = tmp_path / "r.pdf"
    info = make_report(loaded, out, generated_at=WHEN)
    assert info.path == out
    assert out.read_bytes().startswith(b"%PDF")
    assert info.pages == len(PdfReader(out).pages)
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


@pytest.mark.skipif(shutil.which("pdftoppm") is None, reason="poppler-utils not installed")
def test_pages_render_to_png(tmp_path, logistic):
    pdf = tmp_path / "r.pdf"
    pdf.write_bytes(logistic[0])
    subprocess.run(["pdftoppm", "-r", "30", "-png", str(pdf), str(tmp_path / "p")], check=True)
    assert len(list(tmp_path.glob("p-*.png"))) == len(logistic[1])


def test_imported_evidence_null_band_points_and_expired(tmp_path):
    """An imported set adds its section; null band points are left out with a note; a past
    review-by date is flagged."""
    doc = rich_document(evidence=True)
    imported = copy.deepcopy(doc["evidence"][2])
    imported.update(id="imported-1", kind="imported", label="Registry audit (imported)",
                    source="predictions supplied")
    imported.pop("reclassification")
    curve = imported["calibration_curve"]
    curve["low"][:3] = [None] * 3
    curve["high"][:3] = [None] * 3
    doc["evidence"].append(imported)
    path = tmp_path / "imported.calc.json"
    path.write_text(json.dumps(doc, ensure_ascii=False), "utf-8")
    loaded = load_calculator(path, today=dt.date(2029, 1, 1))
    data, info = report_bytes(loaded, generated_at=WHEN)
    text = " ".join(pages_text(data))
    assert "Imported evidence" in info.sections
    assert "8. Imported evidence" in text
    assert "Registry audit (imported)" in text
    assert "calcbuilder has not recomputed them" in text
    assert "drawn where its 95% band could be estimated: 197 of the 200" in text
    assert "PASSED" in text
    assert "The review-by date (2028-01-15) has passed." in text


def test_intercept_only_recalibration_line(tmp_path):
    from dataclasses import replace

    from calcbuilder.calc.model import Recalibration
    from calcbuilder.reports._report_equation import link_lines

    model = load_calculator(write_calculator(tmp_path)).calculator.model
    lines = link_lines(replace(model, recalibration=Recalibration("intercept", 0.3125)))
    assert "η′ = a + η with a = 0.3125 (recalibration in the large, slope 1" in lines[1]
    assert lines[-1] == "risk = 1 / (1 + exp(−η′))"
