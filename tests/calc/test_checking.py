"""Input checking: each rule's exact user-facing message, conversions, patients and columns."""

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from calcbuilder.calc.checking import (
    CheckedValue,
    Message,
    check_columns,
    check_patient,
    check_value,
    parse_column_header,
)
from calcbuilder.calc.inputs import parse_inputs
from calcbuilder.calc.problems import Problems
from calcbuilder.errors import InputValueError

RAW = [
    {"id": "age", "label": "Age", "kind": "number", "unit": "years",
     "limits": {"low": 18, "high": 110}, "developed": {"low": 65, "high": 95}, "decimals": 0},
    {"id": "creatinine", "label": "Serum creatinine", "kind": "number", "unit": "µmol/L",
     "alt_units": [{"unit": "mg/dL", "factor": 88.42, "offset": 0}],
     "limits": {"low": 10, "high": 2000}, "developed": {"low": 45, "high": 250}, "decimals": 0},
    {"id": "temperature", "label": "Body temperature", "kind": "number", "unit": "°C",
     "alt_units": [{"unit": "°F", "factor": 5 / 9, "offset": -160 / 9}],
     "limits": {"low": 25, "high": 45}, "developed": {"low": 35, "high": 40}, "decimals": 1},
    {"id": "medicines", "label": "Daily medicines", "kind": "number",
     "limits": {"low": 0, "high": 40}, "required": False},
    {"id": "hearing", "label": "Hearing impairment", "kind": "yes_no"},
    {"id": "anaesthesia", "label": "Anaesthesia", "kind": "choice",
     "choices": [{"value": "general", "label": "General"},
                 {"value": "neuraxial", "label": "Spinal or epidural"}]},
]
SPECS = parse_inputs(RAW, "inputs", Problems())
AGE, CREATININE, TEMPERATURE, MEDICINES, HEARING, ANAESTHESIA = SPECS
GOOD_PATIENT = {"age": "80", "creatinine": "90", "temperature": "36.8", "medicines": 4,
                "hearing": "no", "anaesthesia": "general"}


def only_message(result: CheckedValue) -> Message:
    assert len(result.messages) == 1, result.messages
    return result.messages[0]


def assert_error(result, code, text):
    message = only_message(result)
    assert (message.code, message.severity, message.text) == (code, "error", text)
    assert result.value is None
    assert result.status == "error"
    assert not result.ok


# --- one test per rule, with its exact message ------------------------------------------

def test_missing_required_value():
    for raw in (None, "", "   ", float("nan")):
        assert_error(check_value(CREATININE, raw), "missing",
                     "Serum creatinine: no value was entered; this input is required, "
                     "so enter a value.")


def test_missing_optional_value_has_no_message():
    result = check_value(MEDICINES, "")
    assert result.messages == ()
    assert result.value is None
    assert result.status == "missing"
    assert result.ok


def test_text_that_is_not_a_number():
    assert_error(check_value(CREATININE, "72kg"), "not_a_number",
                 "Serum creatinine: '72kg' has text after the number; type the number alone "
                 "and set the unit separately.")
    assert_error(check_value(AGE, "nan"), "not_a_number",
                 "Age: 'nan' is not a usable number; enter a measured value.")


def test_infinite_number():
    assert_error(check_value(AGE, float("inf")), "not_a_number",
                 "Age: inf is not a usable number; enter a measured value.")


def test_decimal_comma_refused_unless_set():
    assert_error(check_value(CREATININE, "1,2", unit="mg/dL"), "not_a_number",
                 "Serum creatinine: '1,2' contains a comma, which could be a decimal comma or "
                 "a thousands separator; type the number with a decimal point and no "
                 "separators: 1.2.")
    accepted = check_value(CREATININE, "1,2", unit="mg/dL", decimal_comma=True)
    assert accepted.value == pytest.approx(106.104)
    assert accepted.status == "ok"


def test_yes_no_answer_given_for_a_number():
    assert_error(check_value(AGE, True), "number_expected",
                 "Age: a yes/no answer (yes) was given, but this input takes a number; "
                 "enter a number.")


def test_below_the_hard_limits():
    assert_error(check_value(AGE, "12"), "below_limits",
                 "Age: 12 years is below the possible range (18 to 110 years); check the value "
                 "and the unit.")


def test_above_the_hard_limits():
    assert_error(check_value(CREATININE, "3000"), "above_limits",
                 "Serum creatinine: 3000 µmol/L is above the possible range (10 to 2000 µmol/L); "
                 "check the value and the unit.")


def test_limits_are_stated_in_the_chosen_unit_rounded_inward():
    assert_error(check_value(CREATININE, 2500, unit="mg/dL"), "above_limits",
                 "Serum creatinine: 2500 mg/dL is above the possible range (0.1131 to 22.61 "
                 "mg/dL); check the value and the unit.")
    assert_error(check_value(TEMPERATURE, "120", unit="°F"), "above_limits",
                 "Body temperature: 120 °F is above the possible range (77 to 113 °F); check "
                 "the value and the unit.")


def test_creatinine_entered_in_the_wrong_unit_asks_to_check_the_unit():
    assert_error(check_value(CREATININE, "1.2"), "check_unit",
                 "Serum creatinine: 1.2 µmol/L is below the possible range (10 to 2000 "
                 "µmol/L); did you mean 1.2 mg/dL (106 µmol/L)? If so, change the unit to "
                 "mg/dL.")


def test_check_the_unit_suggests_the_canonical_unit_too():
    assert_error(check_value(CREATININE, "100", unit="mg/dL"), "check_unit",
                 "Serum creatinine: 100 mg/dL is above the possible range (0.1131 to 22.61 "
                 "mg/dL); did you mean 100 µmol/L? If so, change the unit to µmol/L.")
    assert_error(check_value(TEMPERATURE, "99"), "check_unit",
                 "Body temperature: 99 °C is above the possible range (25 to 45 °C); did you "
                 "mean 99 °F (37.2 °C)? If so, change the unit to °F.")


def test_check_the_unit_in_the_comma_locale_writes_commas():
    assert_error(check_value(CREATININE, "1,2", decimal_comma=True), "check_unit",
                 "Serum creatinine: 1,2 µmol/L is below the possible range (10 to 2000 "
                 "µmol/L); did you mean 1,2 mg/dL (106 µmol/L)? If so, change the unit to "
                 "mg/dL.")


def test_outside_the_developed_range_is_a_warning_of_extrapolation():
    result = check_value(CREATININE, "300")
    message = only_message(result)
    assert (message.code, message.severity) == ("extrapolation", "warning")
    assert message.text == (
        "Serum creatinine: 300 µmol/L is outside the range the model was developed on "
        "(45 to 250 µmol/L); the estimate is an extrapolation, so treat it with extra caution."
    )
    assert result.value == 300.0
    assert result.ok
    assert result.extrapolated
    assert result.status == "warning"


def test_extrapolation_warning_in_an_alternative_unit():
    result = check_value(CREATININE, "0.4", unit="mg/dL")
    assert only_message(result).text == (
        "Serum creatinine: 0.4 mg/dL is outside the range the model was developed on "
        "(0.509 to 2.827 mg/dL); the estimate is an extrapolation, so treat it with extra "
        "caution."
    )
    assert result.value == pytest.approx(35.368)


def test_unknown_unit_lists_the_units_accepted():
    assert_error(check_value(CREATININE, "90", unit="mmol/L"), "unknown_unit",
                 "Serum creatinine: the unit 'mmol/L' is not accepted here; use one of: "
                 "µmol/L, mg/dL.")
    assert_error(check_value(MEDICINES, "3", unit="tablets"), "unknown_unit",
                 "Daily medicines: the unit 'tablets' is not accepted; this input has no "
                 "unit, so leave the unit empty.")


def test_unknown_unit_and_unreadable_number_are_both_reported():
    result = check_value(CREATININE, "9o", unit="mmol/L")
    assert [m.code for m in result.messages] == ["unknown_unit", "not_a_number"]


def test_unit_given_for_a_yes_no_or_choice_input():
    assert_error(check_value(HEARING, "yes", unit="kg"), "unit_not_applicable",
                 "Hearing impairment: a unit ('kg') was given, but this input is a yes/no "
                 "answer and takes no unit; leave the unit empty.")
    assert_error(check_value(ANAESTHESIA, "general", unit="mg"), "unit_not_applicable",
                 "Anaesthesia: a unit ('mg') was given, but this input is a choice and takes "
                 "no unit; leave the unit empty.")


def test_yes_no_answer_not_understood():
    assert_error(check_value(HEARING, "maybe"), "not_yes_no",
                 "Hearing impairment: 'maybe' is not a yes/no answer; enter yes or no.")
    assert_error(check_value(HEARING, 2), "not_yes_no",
                 "Hearing impairment: 2 is not a yes/no answer; enter yes or no.")


def test_not_one_of_the_choices():
    expected = ("Anaesthesia: 'General' is not one of the choices; use one of: general "
                "(General), neuraxial (Spinal or epidural).")
    assert_error(check_value(ANAESTHESIA, "General"), "not_a_choice", expected)  # labels refused


def test_unknown_input_name_in_a_patient():
    check = check_patient(SPECS, {**GOOD_PATIENT, "creatinin": "90"}, units={"sodium": "mmol/L"})
    assert not check.ok
    assert check.messages["creatinin"] == (Message(
        "creatinin", "error", "unknown_input",
        "'creatinin' is not an input of this calculator; the inputs are: age, creatinine, "
        "temperature, medicines, hearing, anaesthesia."),)
    assert [m.code for m in check.messages["sodium"]] == ["unknown_input"]


# --- what is accepted and how it converts -----------------------------------------------

@pytest.mark.parametrize(
    ("raw", "expected"),
    [(True, True), (False, False), (np.bool_(True), True), (1, True), (0.0, False),
     ("yes", True), (" Y ", True), ("TRUE", True), ("1", True),
     ("no", False), ("n", False), ("False", False), ("0", False)],
)
def test_yes_no_accepts_a_small_fixed_set(raw, expected):
    assert check_value(HEARING, raw) == CheckedValue("hearing", expected)


def test_choice_value_with_surrounding_space():
    assert check_value(ANAESTHESIA, " neuraxial ").value == "neuraxial"


def test_numbers_accepted_as_text_or_numbers():
    assert check_value(AGE, " 80 ").value == 80.0
    assert check_value(AGE, 80).value == 80.0
    assert check_value(AGE, np.int64(80)).value == 80.0
    assert check_value(AGE, np.float32(80.5)).value == 80.5
    assert check_value(CREATININE, "90").unit == "µmol/L"
    assert check_value(CREATININE, "1", unit="\u03bcmol/L").messages[0].code == "check_unit"


def test_limits_are_inclusive():
    assert check_value(AGE, "18").messages[0].code == "extrapolation"
    assert check_value(AGE, "110").ok
    assert check_value(AGE, "17.99").messages[0].code == "below_limits"


def test_unsupported_python_type_is_a_programming_error():
    with pytest.raises(TypeError, match="age: cannot check a value of type list"):
        check_value(AGE, [80])


def test_creatinine_mg_dl_converts_by_factor():
    result = check_value(CREATININE, "1.2", unit="mg/dL")
    assert result.value == 1.2 * 88.42
    assert result.unit == "mg/dL"


def test_fahrenheit_converts_with_factor_and_offset():
    assert check_value(TEMPERATURE, "98.6", unit="°F").value == pytest.approx(37.0, abs=1e-12)
    assert check_value(TEMPERATURE, "-100", unit="°F").messages[0].code == "below_limits"
    assert check_value(TEMPERATURE, "32", unit="°F").messages[0].code == "check_unit"


@given(st.floats(-1e6, 1e6, allow_nan=False))
def test_unit_conversions_round_trip(entered):
    for alt in (CREATININE.alt_units[0], TEMPERATURE.alt_units[0]):
        back = alt.from_canonical(alt.to_canonical(entered))
        assert back == pytest.approx(entered, rel=1e-12, abs=1e-9)


def test_inward_rounded_limits_shown_are_accepted():
    for shown in ("0.1131", "22.61"):
        assert check_value(CREATININE, shown, unit="mg/dL").ok
    for shown in ("77", "113"):
        assert check_value(TEMPERATURE, shown, unit="°F").ok


# --- one patient --------------------------------------------------------------------------

def test_patient_all_good():
    check = check_patient(SPECS, GOOD_PATIENT)
    assert check.ok
    assert check.extrapolated == ()
    assert check.all_messages == ()
    assert check.values == {"age": 80.0, "creatinine": 90.0, "temperature": 36.8,
                            "medicines": 4.0, "hearing": False, "anaesthesia": "general"}


def test_patient_every_message_at_once_with_units():
    raw = {"age": "100", "creatinine": "1.2", "temperature": "", "hearing": "maybe"}
    check = check_patient(SPECS, raw, units={"creatinine": "µmol/L"})
    assert not check.ok
    assert {key: [m.code for m in ms] for key, ms in check.messages.items()} == {
        "age": ["extrapolation"], "creatinine": ["check_unit"], "temperature": ["missing"],
        "medicines": [], "hearing": ["not_yes_no"], "anaesthesia": ["missing"],
    }
    assert check.extrapolated == ("age",)
    assert check.values["age"] == 100.0
    assert check.values["creatinine"] is None


def test_patient_with_unit_choice_and_decimal_comma():
    raw = {**GOOD_PATIENT, "creatinine": "1,02", "temperature": "98,6"}
    check = check_patient(SPECS, raw, units={"creatinine": "mg/dL", "temperature": "°F"},
                          decimal_comma=True)
    assert check.ok
    assert check.values["creatinine"] == pytest.approx(90.1884)
    assert check.values["temperature"] == pytest.approx(37.0)


# --- columns ------------------------------------------------------------------------------

MIXED = {
    "age": ["80", None, "12", 100, float("nan"), "x", " 66 ", True, 70.0, "1e2"],
    "creatinine": [1.2, 0.9, 30.0, float("nan"), 1.0, 0.4, float("inf"), 2.0, 1.1, 0.0],
    "temperature": np.array([98.6, 99.0, 120.0, 37.0, 98.0, 97.0, 96.0, 100.0, 101.0, 95.0]),
    "medicines": ["", "3", None, "50", "2,5", 4, "4", "-1", "40", "0"],
    "hearing": np.array([1, 0, 1, 0, 2, np.nan, 1, 1, 0, 0], dtype=float),
    "anaesthesia": ["general", "neuraxial", "General", None, "general", "x", "general",
                    "general", "neuraxial", " general "],
}
MIXED_UNITS = {"creatinine": "mg/dL", "temperature": "°F"}


def _same(a, b):
    if b is None:
        return a is None or (isinstance(a, float) and math.isnan(a))
    return a == b


def test_columns_equal_check_value_row_by_row():
    result = check_columns(SPECS, MIXED, MIXED_UNITS)
    assert result.n_rows == 10
    for row in range(10):
        expected = [check_value(spec, MIXED[spec.id][row], unit=MIXED_UNITS.get(spec.id))
                    for spec in SPECS]
        for spec, one in zip(SPECS, expected, strict=True):
            assert _same(result.values[spec.id][row], one.value), (row, spec.id)
        assert result.messages.get(row, ()) == tuple(m for one in expected for m in one.messages)
        assert result.blocked[row] == (not all(one.ok for one in expected))
        assert result.extrapolated[row] == any(one.extrapolated for one in expected)
    assert list(result.messages) == sorted(result.messages)
    assert "Serum creatinine: no value was entered" in result.row_text(3)
    assert result.row_text(0) == ""


def test_columns_numeric_fast_path_equals_text_path():
    values = [80.0, 12.0, 100.0, float("nan"), 66.0, 200.0]
    fast = check_columns([AGE], {"age": np.array(values)})
    slow = check_columns([AGE], {"age": ["80", "12", "100", "", "66", "200"]})
    np.testing.assert_array_equal(fast.values["age"], slow.values["age"])
    assert fast.messages == slow.messages
    np.testing.assert_array_equal(fast.blocked, slow.blocked)


def test_columns_optional_input_may_have_no_column():
    columns = {key: col for key, col in MIXED.items() if key != "medicines"}
    result = check_columns(SPECS, columns, MIXED_UNITS)
    assert np.isnan(result.values["medicines"]).all()


def test_columns_refused_as_a_whole_with_every_problem():
    columns = {"age": [80, 81], "creatinin": [1, 2], "hearing": [1], "anaesthesia": ["general"] * 2}
    with pytest.raises(InputValueError) as caught:
        check_columns(SPECS, columns, {"creatinine": "mmol/L", "hearing": "kg"})
    assert str(caught.value) == (
        "the input columns cannot be checked:\n"
        "  - 'creatinin' is not an input of this calculator; the inputs are: age, creatinine, "
        "temperature, medicines, hearing, anaesthesia.\n"
        "  - there is no column for Serum creatinine (creatinine); it is required, so add it\n"
        "  - Serum creatinine: the unit 'mmol/L' is not accepted here; use one of: µmol/L, "
        "mg/dL.\n"
        "  - there is no column for Body temperature (temperature); it is required, so add it\n"
        "  - Hearing impairment: a unit ('kg') was given, but this input is a yes/no answer "
        "and takes no unit; leave the unit empty.\n"
        "  - the columns must all have the same number of rows (age has 2, creatinin has 2, "
        "hearing has 1, anaesthesia has 2)"
    )


def test_columns_speed_smoke_one_million_rows():
    rng = np.random.default_rng(20261202)
    n = 1_000_000
    specs = [AGE, CREATININE, TEMPERATURE, MEDICINES, HEARING] * 2
    specs = [*[s for s in specs if s.kind == "number"][:4], HEARING]
    columns = {
        "age": rng.integers(60, 100, n).astype(float),
        "creatinine": rng.uniform(0.5, 2.0, n),
        "temperature": rng.normal(37.0, 0.5, n),
        "medicines": rng.integers(0, 12, n),
        "hearing": rng.integers(0, 2, n).astype(bool),
    }
    columns["creatinine"][::1000] = np.nan
    result = check_columns(specs, columns, {"creatinine": "mg/dL"})
    assert result.blocked.sum() == 1000
    assert len(result.messages) >= 1000


# --- column headers -----------------------------------------------------------------------

@pytest.mark.parametrize(
    ("header", "expected"),
    [("creatinine[mg/dL]", ("creatinine", "mg/dL")), ("creatinine", ("creatinine", None)),
     (" creatinine [ mg/dL ] ", ("creatinine", "mg/dL")), ("Patient ID", ("Patient ID", None)),
     ("temperature[°F]", ("temperature", "°F"))],
)
def test_parse_column_header(header, expected):
    assert parse_column_header(header) == expected


@pytest.mark.parametrize(
    ("header", "message"),
    [("creatinine[mg/dL", "column header 'creatinine[mg/dL' is not of the form id or id[unit], "
                          "e.g. creatinine or creatinine[mg/dL]"),
     ("creatinine[mg]x", "column header 'creatinine[mg]x' is not of the form id or id[unit], "
                         "e.g. creatinine or creatinine[mg/dL]"),
     ("[mg/dL]", "column header '[mg/dL]' is not of the form id or id[unit], "
                 "e.g. creatinine or creatinine[mg/dL]"),
     ("creatinine[ ]", "column header 'creatinine[ ]' has empty brackets; write the unit inside "
                       "them, e.g. creatinine[mg/dL], or leave them out for the calculator's "
                       "own unit")],
)
def test_parse_column_header_refuses_malformed_headers(header, message):
    with pytest.raises(InputValueError) as caught:
        parse_column_header(header)
    assert str(caught.value) == message


# --- start-up path ------------------------------------------------------------------------

def test_checking_imports_only_stdlib_numpy_and_our_modules():
    probe = (
        "import json, sys; import calcbuilder.calc.checking; "
        "print(json.dumps(sorted(sys.modules)))"
    )
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    loaded = json.loads(out.stdout)
    heavy = ("pandas", "scipy", "statsmodels", "matplotlib", "PySide6", "jsonschema")
    assert [m for m in loaded if m.split(".")[0] in heavy] == []
