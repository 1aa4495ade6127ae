"""ClinicSession: values as typed, every message class, risk as scored, plain-word forms."""

from __future__ import annotations

import datetime as dt
import json
import subprocess
import sys
import time

import numpy as np
import pytest

from calcbuilder.calc.document import load_calculator
from calcbuilder.calc.keys import TrustedKeys, generate_private_key, save_key_pair
from calcbuilder.calc.messages import CODES
from calcbuilder.calc.scoring import score
from calcbuilder.calc.signing import TrustState
from calcbuilder.clinic.reference import reference_values
from calcbuilder.clinic.session import (
    SYNTHETIC_NOTICE,
    ClinicSession,
    natural_frequency,
)
from calcbuilder.errors import CalcFileError, InputValueError
from tests.fixtures_calc import MG_DL, make_calculator, patient_values, write_calculator


def session_for(tmp_path, **kwargs) -> ClinicSession:
    return ClinicSession(load_calculator(write_calculator(tmp_path, **kwargs)))


def fill(session: ClinicSession, values: dict) -> None:
    for key, value in values.items():
        session.set_value(key, value if isinstance(value, bool | str) else str(value))


@pytest.mark.parametrize("n_inputs", [1, 4, 25])
def test_risk_equals_score_directly(tmp_path, n_inputs):
    session = session_for(tmp_path, n_inputs=n_inputs)
    values = patient_values(n_inputs, 3)
    fill(session, values)
    result = session.result()
    direct = score(session.calculator.model, {k: [v] for k, v in values.items()})
    assert result.ok
    assert result.risk == pytest.approx(float(direct.risk[0]), abs=1e-15)
    assert (result.low, result.high) == pytest.approx((direct.low[0], direct.high[0]), abs=1e-15)
    assert result.interval_note == direct.interval_note
    # contributions are shown against the reference patient (clinic/reference.py)
    ref = score(session.calculator.model,
                {k: [v] for k, v in reference_values(session.calculator).items()})
    by_id = {c.input_id: c.value for c in result.contributions}
    assert by_id == pytest.approx({k: float(v[0] - ref.contributions[k][0])
                                   for k, v in direct.contributions.items()})
    assert sum(by_id.values()) == pytest.approx(
        float(direct.linear_predictor[0] - ref.linear_predictor[0]))
    sizes = [abs(c.value) for c in result.contributions]
    assert sizes == sorted(sizes, reverse=True)


def test_other_unit_gives_the_same_risk_and_is_shown_in_both_units(tmp_path):
    session = session_for(tmp_path)
    fill(session, patient_values(4, 1))
    canonical = session.result().risk
    session.set_unit("creatinine", "mg/dL")
    session.set_value("creatinine", str(95 / MG_DL))
    assert session.result().risk == pytest.approx(canonical, rel=1e-12)
    session.set_value("creatinine", "1,2")
    session.decimal_comma = True
    line = next(v for v in session.result().values_used if v.input_id == "creatinine")
    assert line.text == "1,2 mg/dL (= 106 µmol/L)"
    assert session.unit("creatinine") == "mg/dL"


def test_values_used_are_printed_as_the_clinician_knows_them(tmp_path):
    session = session_for(tmp_path)
    fill(session, {"age": "72", "creatinine": "130", "falls": True, "living": "nursing"})
    texts = {v.input_id: v.text for v in session.result().values_used}
    assert texts == {"age": "72 years", "creatinine": "130 µmol/L", "falls": "yes",
                     "living": "Nursing home (résidence médicalisée)"}


# value typed, unit chosen -> the message code expected for that input
CASES = {
    "missing": ("age", "", None),
    "not_a_number": ("age", "7o", None),
    "number_expected": ("age", True, None),
    "below_limits": ("age", "5", None),
    "above_limits": ("age", "200", None),
    "check_unit": ("creatinine", "1.5", None),
    "unknown_unit": ("creatinine", "1.5", "mmol/L"),
    "unit_not_applicable": ("falls", "yes", "mg"),
    "not_yes_no": ("falls", "maybe", None),
    "not_a_choice": ("living", "castle", None),
    "extrapolation": ("age", "95", None),
}


def test_every_message_class_is_covered():
    assert set(CASES) | {"unknown_input"} == set(CODES)


@pytest.mark.parametrize("code", sorted(CASES))
def test_message_appears_for_the_right_input(tmp_path, code):
    input_id, raw, unit = CASES[code]
    session = session_for(tmp_path)
    fill(session, patient_values(4, 0))
    session.set_unit(input_id, unit)
    session.set_value(input_id, raw)
    result = session.result()
    codes = {key: [m.code for m in ms] for key, ms in result.messages.items()}
    assert code in codes[input_id]
    assert all(not ms for key, ms in codes.items() if key != input_id)
    if CODES[code] == "error":
        assert not result.ok
        assert result.risk is None
        assert result.frequency is None
    else:
        assert result.ok
        assert result.extrapolated == (input_id,)
        assert any(v.extrapolated for v in result.values_used if v.input_id == input_id)


def test_unknown_input_is_refused_by_name(tmp_path):
    session = session_for(tmp_path)
    with pytest.raises(InputValueError, match="'weight' is not an input"):
        session.set_value("weight", "70")
    with pytest.raises(InputValueError, match="age, creatinine, falls, living"):
        session.set_unit("weight", "kg")


def test_optional_input_read_by_the_model_blocks_when_empty(tmp_path):
    doc = make_calculator()
    doc["inputs"][0]["required"] = False
    path = tmp_path / "optional.calc.json"
    path.write_text(json.dumps(doc), "utf-8")
    session = ClinicSession(load_calculator(path))
    fill(session, {k: v for k, v in patient_values(4).items() if k != "age"})
    result = session.result()
    assert not result.ok
    assert [m.code for m in result.messages["age"]] == ["missing"]


def test_clear_wipes_values_units_and_patient_reference(tmp_path):
    session = session_for(tmp_path)
    fill(session, patient_values(4, 2))
    session.set_unit("creatinine", "mg/dL")
    session.set_patient_ref("Bed 4")
    assert session.patient_ref == "Bed 4"
    session.clear()
    assert all(session.value(spec.id) is None for spec in session.inputs)
    assert session.unit("creatinine") == "µmol/L"
    assert session.patient_ref == ""
    result = session.result()
    assert not result.ok
    assert {m.code for m in result.all_messages} == {"missing"}


@pytest.mark.parametrize(("risk", "expected"), [
    (0.123, (12, 100, "about 12 in 100 people like this")),
    (0.145, (15, 100, "about 15 in 100 people like this")),  # half up
    (0.01, (1, 100, "about 1 in 100 people like this")),
    (0.99, (99, 100, "about 99 in 100 people like this")),
    (0.0099, (10, 1000, "about 10 in 1,000 people like this")),
    (0.005, (5, 1000, "about 5 in 1,000 people like this")),
    (0.0004, (0, 1000, "fewer than 1 in 1,000 people like this")),
    (0.995, (995, 1000, "about 995 in 1,000 people like this")),
    (0.9996, (1000, 1000, "more than 999 in 1,000 people like this")),
    (0.0, (0, 1000, "about 0 in 1,000 people like this")),
])
def test_natural_frequency_rule(risk, expected):
    assert natural_frequency(risk) == expected


def test_frequency_and_phrase_follow_the_risk(tmp_path):
    session = session_for(tmp_path, n_inputs=1)
    session.set_value("age", "45")
    result = session.result()
    assert result.risk < 0.01
    assert result.frequency == natural_frequency(result.risk)[:2]
    assert result.frequency[1] == 1000
    assert result.phrase.endswith("in 1,000 people like this")


def test_cohort_percentile_matches_the_plot_helper(tmp_path):
    from calcbuilder.plots import cohort_percentile

    session = session_for(tmp_path)
    fill(session, patient_values(4, 1))
    result = session.result()
    hist = session.calculator.evidence[0].raw["risk_histogram"]
    counts = np.add(hist["events"], hist["nonevents"])
    assert result.cohort_percentile == pytest.approx(
        cohort_percentile(hist["edges"], counts, result.risk), abs=1e-9)
    assert "Test Site A" in session.cohort_sentence()


def test_no_cohort_position_without_a_development_histogram(tmp_path):
    session = session_for(tmp_path, with_evidence=False)
    fill(session, patient_values(4, 1))
    assert session.result().cohort_percentile is None
    assert session.cohort_sentence() is None


def test_result_is_quick(tmp_path):
    session = session_for(tmp_path, n_inputs=25)
    fill(session, patient_values(25, 1))
    times = []
    for i in range(60):
        session.set_value("age", str(50 + i % 30))
        start = time.perf_counter()
        assert session.result().ok
        times.append(time.perf_counter() - start)
    assert float(np.median(times)) < 0.025  # about 2 ms measured; 10 ms is the goal


def test_tampered_file_is_refused(tmp_path):
    doc = make_calculator(signed=True)
    doc["cautions"] = ["changed after signing"]
    path = tmp_path / "tampered.calc.json"
    path.write_text(json.dumps(doc), "utf-8")
    loaded = load_calculator(path)
    assert loaded.state is TrustState.TAMPERED
    with pytest.raises(CalcFileError, match="changed after it was signed"):
        ClinicSession(loaded)


def test_banners_for_unsigned_synthetic_and_expired(tmp_path):
    session = session_for(tmp_path)
    assert session.banners[0] == SYNTHETIC_NOTICE
    assert any(b.startswith("Not signed") for b in session.banners)
    path = write_calculator(tmp_path, "old.calc.json", synthetic=False)
    old = ClinicSession(load_calculator(path, today=dt.date(2031, 1, 1)))
    assert old.banners[-1].startswith("Past its review date (2030-01-01)")
    assert SYNTHETIC_NOTICE not in old.banners


def test_banner_for_signer_trusted_or_not(tmp_path):
    key = generate_private_key()
    files = save_key_pair(tmp_path / "keys", "author", key, passphrase=None)
    path = write_calculator(tmp_path, signed=True, key=key, synthetic=False)
    unknown = ClinicSession(load_calculator(path))
    assert "not on this clinic's trusted list" in unknown.banner
    trusted = TrustedKeys(tmp_path / "none", extra_files=(files.public_key,))
    verified = ClinicSession(load_calculator(path, trusted=trusted))
    assert verified.banner is None


def test_threshold_defaults_to_the_calculator_and_can_change(tmp_path):
    from calcbuilder.clinic.threshold import Threshold

    session = session_for(tmp_path)
    assert session.threshold.pt == 0.2
    first = session.benefit()
    session.set_threshold(Threshold.from_percent(35))
    assert session.benefit().threshold.pt == pytest.approx(0.35)
    assert session.benefit(Threshold(0.2)) == first


def test_session_writes_nothing(tmp_path, monkeypatch):
    path = write_calculator(tmp_path)
    work = tmp_path / "cwd"
    work.mkdir()
    monkeypatch.chdir(work)
    session = ClinicSession(load_calculator(path))
    fill(session, patient_values(4, 1))
    session.set_patient_ref("Bed 9")
    session.result()
    session.benefit()
    session.clear()
    assert sorted(p.name for p in tmp_path.rglob("*")) == ["cwd", "test.calc.json"]


PROBE = """
import json, sys
import calcbuilder.clinic.session, calcbuilder.clinic
print(json.dumps(sorted(sys.modules)))
"""


def test_session_start_up_imports_nothing_heavy():
    out = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True,
                         check=True)
    loaded = json.loads(out.stdout)
    heavy = ("pandas", "scipy", "statsmodels", "matplotlib", "reportlab", "PySide6")
    assert [m for m in loaded if m.split(".")[0] in heavy] == []
