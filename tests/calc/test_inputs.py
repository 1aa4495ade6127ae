"""The inputs section: parsing, every semantic rule's exact problem, and the schema fragment."""

import copy
import json
from importlib import resources

import pytest
from jsonschema import Draft202012Validator

from calcbuilder.calc.inputs import AltUnit, Choice, InputSpec, Range, parse_inputs
from calcbuilder.calc.problems import Problems

CREATININE = {
    "id": "creatinine",
    "label": "Serum creatinine",
    "kind": "number",
    "unit": "µmol/L",
    "alt_units": [{"unit": "mg/dL", "factor": 88.42, "offset": 0}],
    "limits": {"low": 10, "high": 2000},
    "developed": {"low": 45, "high": 250},
    "decimals": 0,
    "required": True,
    "group": "Laboratory",
    "help": "Most recent pre-operative value.",
}
AGE = {
    "id": "age", "label": "Age", "kind": "number", "unit": "years",
    "limits": {"low": 18, "high": 110},
}
HEARING = {"id": "hearing", "label": "Hearing impairment", "kind": "yes_no"}
ANAESTHESIA = {
    "id": "anaesthesia",
    "label": "Anaesthesia",
    "kind": "choice",
    "choices": [
        {"value": "general", "label": "General"},
        {"value": "neuraxial", "label": "Spinal or epidural"},
    ],
}
GOOD = [CREATININE, AGE, HEARING, ANAESTHESIA]


def problems_of(raw_list):
    problems = Problems()
    result = parse_inputs(raw_list, "inputs", problems)
    return result, problems.items


def with_change(index, **fields):
    """GOOD with one input changed (a field set to ``None`` is removed)."""
    raw = copy.deepcopy(GOOD)
    for key, value in fields.items():
        if value is None:
            raw[index].pop(key, None)
        else:
            raw[index][key] = value
    return raw


def test_good_inputs_parse_into_specs():
    specs, problems = problems_of(GOOD)
    assert problems == []
    creatinine, age, hearing, anaesthesia = specs
    assert creatinine == InputSpec(
        id="creatinine",
        label="Serum creatinine",
        kind="number",
        unit="µmol/L",
        alt_units=(AltUnit("mg/dL", 88.42, 0.0),),
        limits=Range(10.0, 2000.0),
        developed=Range(45.0, 250.0),
        decimals=0,
        required=True,
        group="Laboratory",
        help="Most recent pre-operative value.",
    )
    assert age.developed is None
    assert age.alt_units == ()
    assert hearing.kind == "yes_no"
    assert hearing.required
    assert anaesthesia.choices == (
        Choice("general", "General"),
        Choice("neuraxial", "Spinal or epidural"),
    )


def test_to_dict_round_trips():
    specs, _ = problems_of(GOOD)
    again, problems = problems_of([spec.to_dict() for spec in specs])
    assert problems == []
    assert again == specs
    # defaults are left out so that a file written by hand round-trips to the same payload
    assert specs[2].to_dict() == {"id": "hearing", "label": "Hearing impairment", "kind": "yes_no"}


def test_units_are_found_by_name_micro_sign_or_greek_mu():
    creatinine = problems_of(GOOD)[0][0]
    assert creatinine.unit_named(None) == AltUnit("µmol/L", 1.0, 0.0)
    assert creatinine.unit_named("") == AltUnit("µmol/L", 1.0, 0.0)
    assert creatinine.unit_named("\u03bcmol/L") == AltUnit("µmol/L", 1.0, 0.0)  # Greek mu
    assert creatinine.unit_named(" mg/dL ") == AltUnit("mg/dL", 88.42, 0.0)
    assert creatinine.unit_named("mg/dl") is None  # case matters for units
    assert creatinine.unit_named("mmol/L") is None


@pytest.mark.parametrize(
    ("raw", "expected"),
    [
        (with_change(3, kind="number", limits={"low": 200, "high": 150}, choices=None),
         ["inputs[3].limits.low: must be below limits.high (got 200 > 150)"]),
        (with_change(1, limits={"low": 18, "high": 18}),
         ["inputs[1].limits.low: must be below limits.high (got 18 = 18)"]),
        (with_change(0, developed={"low": 250, "high": 45}),
         ["inputs[0].developed.low: must be below developed.high (got 250 > 45)"]),
        (with_change(0, developed={"low": 5, "high": 2500}),
         ["inputs[0].developed.low: must not be below limits.low (got 5 < 10)",
          "inputs[0].developed.high: must not be above limits.high (got 2500 > 2000)"]),
        (with_change(1, limits=None),
         ["inputs[1].limits: required for a number input; hard limits are how impossible "
          "values get refused"]),
        (with_change(2, unit="mg", limits={"low": 0, "high": 1}, decimals=1),
         ["inputs[2].unit: only number inputs take unit (this input is yes_no)",
          "inputs[2].limits: only number inputs take limits (this input is yes_no)",
          "inputs[2].decimals: only number inputs take decimals (this input is yes_no)"]),
        (with_change(3, alt_units=[{"unit": "x", "factor": 1}], developed={"low": 0, "high": 1}),
         ["inputs[3].alt_units: only number inputs take alt_units (this input is choice)",
          "inputs[3].developed: only number inputs take developed (this input is choice)"]),
        (with_change(2, choices=ANAESTHESIA["choices"]),
         ["inputs[2].choices: only choice inputs take choices (this input is yes_no)"]),
        (with_change(0, alt_units=[{"unit": "\u03bcmol/L", "factor": 1}]),
         ["inputs[0].alt_units[0].unit: must differ from the canonical unit 'µmol/L'"]),
        (with_change(0, alt_units=[{"unit": "mg/dL", "factor": 88.42},
                                   {"unit": "mg/dL", "factor": 88.4}]),
         ["inputs[0].alt_units[1].unit: duplicate unit 'mg/dL' (first at alt_units[0])"]),
        (with_change(0, alt_units=[{"unit": "mg/dL", "factor": 0}]),
         ["inputs[0].alt_units[0].factor: must be finite and non-zero (got 0)"]),
        (with_change(0, alt_units=[{"unit": "mg/dL", "factor": float("inf")}]),
         ["inputs[0].alt_units[0].factor: must be finite and non-zero (got inf)"]),
        (with_change(0, alt_units=[{"unit": "mg/dL", "factor": 88.42, "offset": float("nan")}]),
         ["inputs[0].alt_units[0].offset: must be a finite number (got nan)"]),
        (with_change(1, unit=None, alt_units=[{"unit": "months", "factor": 1 / 12}]),
         ["inputs[1].alt_units: alternative units need a canonical unit (set unit)"]),
        (with_change(1, unit="kg[x]"),
         ["inputs[1].unit: must be a unit name without surrounding spaces or brackets "
          "(got 'kg[x]')"]),
        (with_change(0, decimals=7),
         ["inputs[0].decimals: must be a whole number from 0 to 6 (got 7)"]),
        (with_change(0, decimals=1.5),
         ["inputs[0].decimals: must be a whole number from 0 to 6 (got 1.5)"]),
        (with_change(3, choices=[{"value": "general", "label": "General"}]),
         ["inputs[3].choices: a choice input needs at least two choices (got 1)"]),
        (with_change(3, choices=[{"value": "a", "label": "A"}, {"value": "a", "label": "A"}]),
         ["inputs[3].choices[1].value: duplicate choice value 'a' (first at choices[0])",
          "inputs[3].choices[1].label: duplicate choice label 'A' (first at choices[0])"]),
        (with_change(3, choices=[{"value": " a", "label": "A"}, {"value": "b", "label": "B"}]),
         ["inputs[3].choices[0].value: must not start or end with spaces (got ' a')"]),
        (with_change(1, id="creatinine"),
         ["inputs[1].id: duplicate id 'creatinine' (first used at inputs[0])"]),
        (with_change(2, label="Age"),
         ["inputs[2].label: duplicate label 'Age' (first used at inputs[1]); messages name "
          "inputs by label, so labels must differ"]),
        (with_change(1, id="Age"), ["inputs[1].id: must match [a-z][a-z0-9_]* (got 'Age')"]),
        (with_change(1, id="age\n"), ["inputs[1].id: must match [a-z][a-z0-9_]* (got 'age\\n')"]),
        (with_change(1, label="  "), ["inputs[1].label: must be non-empty text (got '  ')"]),
        (with_change(1, kind="text"),
         ["inputs[1].kind: must be number, yes_no or choice (got 'text')"]),
        (with_change(1, required="yes"), ["inputs[1].required: must be true or false (got 'yes')"]),
        (with_change(1, limits={"low": True, "high": 5}),
         ["inputs[1].limits.low: must be a number (got True)"]),
        ([], ["inputs: must list at least one input"]),
    ],
)
def test_each_rule_reports_its_exact_problem_with_its_path(raw, expected):
    result, problems = problems_of(raw)
    assert result is None
    assert problems == expected


def test_every_problem_is_reported_at_once():
    raw = with_change(0, limits={"low": 200, "high": 150}, decimals=9)
    raw[1]["id"] = "creatinine"
    raw[3]["choices"] = [{"value": "a", "label": "A"}]
    _, problems = problems_of(raw)
    assert problems == [
        "inputs[0].limits.low: must be below limits.high (got 200 > 150)",
        "inputs[0].decimals: must be a whole number from 0 to 6 (got 9)",
        "inputs[3].choices: a choice input needs at least two choices (got 1)",
        "inputs[1].id: duplicate id 'creatinine' (first used at inputs[0])",
    ]


def test_problems_are_added_to_those_already_collected():
    problems = Problems()
    problems.add("about.title", "must be non-empty text (got '')")
    assert parse_inputs(GOOD, "inputs", problems) is not None
    assert len(problems.items) == 1


# --- the schema fragment -----------------------------------------------------------------

def _fragment():
    path = resources.files("calcbuilder.calc").joinpath("schema", "inputs.defs.json")
    return json.loads(path.read_text("utf-8"))


@pytest.fixture(scope="module")
def validator():
    fragment = _fragment()
    schema = {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$defs": fragment["$defs"],
        "$ref": "#/$defs/inputs",
    }
    Draft202012Validator.check_schema(schema)
    return Draft202012Validator(schema)


def test_fragment_defines_inputs_and_input_with_no_unknown_fields():
    defs = _fragment()["$defs"]
    assert defs["inputs"]["type"] == "array"
    assert defs["input"]["properties"]["id"]["pattern"] == "^[a-z][a-z0-9_]*$"
    objects = [d for d in defs.values() if d.get("type") == "object"]
    assert objects
    assert all(d["additionalProperties"] is False for d in objects)


def test_fragment_accepts_the_format_examples(validator):
    assert list(validator.iter_errors(GOOD)) == []


@pytest.mark.parametrize(
    "raw",
    [
        with_change(0, colour="red"),
        with_change(0, alt_units=[{"unit": "mg/dL", "factor": 88.42, "scale": 1}]),
        with_change(0, limits={"low": 1, "high": 2, "mid": 1.5}),
        with_change(3, choices=[{"value": "a", "label": "A", "x": 1},
                                {"value": "b", "label": "B"}]),
        with_change(1, id="Age"),
        with_change(1, id="1age"),
        with_change(1, kind="text"),
        with_change(0, decimals=7),
        with_change(0, unit="mg [x]"),
        with_change(0, unit=" mg"),
        with_change(1, label=None),
        [],
    ],
)
def test_fragment_refuses_bad_structure(validator, raw):
    assert list(validator.iter_errors(raw)) != []
