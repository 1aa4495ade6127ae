"""The risk sheet: one page for 1..25 inputs, everything printed, fonts embedded, atomic."""

from __future__ import annotations

import datetime as dt
import io
import os

import pytest
from pypdf import PdfReader

from calcbuilder.calc.document import load_calculator
from calcbuilder.clinic import ClinicSession, Threshold, format_percent
from calcbuilder.errors import CalcbuilderError, InputValueError
from calcbuilder.reports.sheet import make_sheet, sheet_bytes
from tests.fixtures_calc import CAUTION, patient_values, write_calculator

WHEN = dt.datetime(2026, 12, 2, 14, 5)
LONG = ("This calculator gives an estimate for people like the patient described, based on the "
        "data it was developed and validated on. It cannot know everything about this patient. "
        "Use it alongside clinical judgement, the patient's own values and preferences, and "
        "your local protocols; it does not tell anyone what to do.")


def session_for(tmp_path, n_inputs=4, patient=1, **kwargs) -> ClinicSession:
    path = write_calculator(tmp_path, f"c{n_inputs}.calc.json", n_inputs=n_inputs, **kwargs)
    session = ClinicSession(load_calculator(path))
    for key, value in patient_values(n_inputs, patient).items():
        session.set_value(key, value if isinstance(value, bool) else str(value))
    return session


def text_of(data: bytes) -> str:
    reader = PdfReader(io.BytesIO(data))
    return " ".join(" ".join(p.extract_text() for p in reader.pages).split())


def y_of(data: bytes, needle: str) -> float:
    """Height of the first text run containing ``needle`` on page 1, from the bottom."""
    found: list[float] = []

    def visit(text, cm, tm, *_):
        if needle in text and not found:
            found.append(tm[5] * cm[3] + cm[5])

    PdfReader(io.BytesIO(data)).pages[0].extract_text(visitor_text=visit)
    assert found, needle
    return found[0]


@pytest.mark.parametrize("n_inputs", range(1, 26))
def test_one_page_on_letter_with_the_longest_texts(tmp_path, n_inputs):
    session = session_for(tmp_path, n_inputs, cautions=[LONG, CAUTION, LONG])
    data, info = sheet_bytes(session, page="Letter", threshold=Threshold(0.6), printed_at=WHEN)
    assert info.pages == 1
    assert len(PdfReader(io.BytesIO(data)).pages) == 1


@pytest.mark.parametrize("n_inputs", [1, 4, 13, 25])
def test_one_page_on_a4_and_everything_printed(tmp_path, n_inputs):
    session = session_for(tmp_path, n_inputs)
    session.set_patient_ref("Bed 12 / Zoë Łukasiewicz")
    data, info = sheet_bytes(session, printed_at=WHEN)
    assert info.pages == 1
    reader = PdfReader(io.BytesIO(data))
    assert [float(x) for x in reader.pages[0].mediabox[2:]] == pytest.approx([595.28, 841.89],
                                                                             abs=0.01)
    text = text_of(data)
    result = session.result()
    assert f"Estimated risk: {format_percent(result.risk)}" in text
    assert f"(95% interval {format_percent(result.low)} to {format_percent(result.high)})" in text
    for line in result.values_used:
        assert " ".join(line.label.split()) in text
        assert line.text in text
    assert CAUTION in text
    assert session.loaded.fingerprint in text
    assert "Bed 12 / Zoë Łukasiewicz" in text
    assert "SYNTHETIC — NOT FOR CLINICAL USE" in text
    assert "Test calculator with" in text
    assert "version 1.2.0" in text
    assert "2026-12-02 14:05" in text
    assert "hospital admission" in text
    assert "within 30 days" in text
    assert "The decision threshold" in text
    assert "1 in 5" in text
    assert "1 : 4" in text
    assert "does not replace clinical judgement" in text
    assert "AUC 0.7" in text


def test_caution_box_is_in_the_top_half_beside_the_estimate(tmp_path):
    for page in ("A4", "Letter"):
        data, _ = sheet_bytes(session_for(tmp_path, 25), page=page, printed_at=WHEN)
        height = float(PdfReader(io.BytesIO(data)).pages[0].mediabox[3])
        caution_y = y_of(data, "Please keep in mind")
        assert caution_y > height / 2
        assert abs(caution_y - y_of(data, "This patient's estimate")) < 30


def test_threshold_and_net_benefit_words_are_printed(tmp_path):
    session = session_for(tmp_path)
    text = text_of(sheet_bytes(session, threshold=Threshold(0.35), printed_at=WHEN)[0])
    benefit = session.benefit(Threshold(0.35))
    for sentence in benefit.statements:
        assert sentence in text
    assert "Net benefit from Test Site B, 2024: external validation" in text
    text = text_of(sheet_bytes(session, threshold=Threshold(0.1), printed_at=WHEN)[0])
    assert "shows no advantage of deciding by the model over intervening for everyone" in text


def test_extrapolated_value_is_flagged(tmp_path):
    session = session_for(tmp_path)
    session.set_value("age", "95")
    text = text_of(sheet_bytes(session, printed_at=WHEN)[0])
    assert "▲ 95 years" in text
    assert "outside the range of values the model was developed on" in text


def test_risk_under_one_percent_uses_1000_people(tmp_path):
    session = session_for(tmp_path, 1, patient=0)
    text = text_of(sheet_bytes(session, printed_at=WHEN)[0])
    n, total = session.result().frequency
    assert total == 1000
    assert f"About {n} in 1,000" in text


def test_real_calculator_without_evidence(tmp_path):
    session = session_for(tmp_path, synthetic=False, with_evidence=False)
    text = text_of(sheet_bytes(session, printed_at=WHEN)[0])
    assert "SYNTHETIC" not in text
    assert "Not covered by the evidence" in text
    assert "holds no performance evidence" in text


def test_dejavu_is_embedded_and_reference_kept_out_of_metadata(tmp_path):
    session = session_for(tmp_path)
    session.set_patient_ref("MRN-55501")
    data, _ = sheet_bytes(session, printed_at=WHEN)
    reader = PdfReader(io.BytesIO(data))
    fonts = reader.pages[0]["/Resources"]["/Font"]
    names = {str(fonts[f].get_object()["/BaseFont"]) for f in fonts}
    assert any("DejaVuSans" in name for name in names)
    assert all("Helvetica" not in name for name in names)
    assert "MRN-55501" in text_of(data)
    assert all("MRN-55501" not in str(v) for v in (reader.metadata or {}).values())


def test_make_sheet_writes_atomically_and_refuses_bad_values(tmp_path):
    session = session_for(tmp_path)
    out = tmp_path / "sheet.pdf"
    info = make_sheet(session, out, page="Letter", printed_at=WHEN)
    assert info.path == out
    assert info.pages == 1
    before = out.read_bytes()
    assert float(PdfReader(out).pages[0].mediabox[2]) == pytest.approx(612)
    session.set_value("age", "abc")
    with pytest.raises(InputValueError, match="Age:"):
        make_sheet(session, out)
    assert out.read_bytes() == before
    fresh = tmp_path / "never.pdf"
    with pytest.raises(InputValueError):
        make_sheet(session, fresh)
    assert not fresh.exists()
    assert sorted(os.listdir(tmp_path)) == ["c4.calc.json", "sheet.pdf"]


def test_unknown_page_size_is_refused(tmp_path):
    with pytest.raises(CalcbuilderError, match="A4 or Letter"):
        sheet_bytes(session_for(tmp_path), page="A5")  # type: ignore[arg-type]


def test_calculator_without_covariance_says_there_is_no_interval(tmp_path):
    session = session_for(tmp_path, covariance=False)
    result = session.result()
    assert result.low is None
    assert result.high is None
    text = text_of(sheet_bytes(session, printed_at=WHEN)[0])
    assert f"Estimated risk: {format_percent(result.risk)} (no interval available)" in text
    assert "No interval: the calculator file has no covariance matrix" in text
