"""ModelSpec.from_dict: every semantic problem class with its exact message and JSON path,
several problems at once, and the to_dict round trip (schema fragment: test_model_schema.py)."""

from __future__ import annotations

import copy
import json
import math
import re

import pytest

from calcbuilder.calc.model import (
    Hinges,
    InputInfo,
    Levels,
    Log,
    ModelSpec,
    Power,
    Product,
    Rcs,
    Recalibration,
    SurvivalSpec,
)
from calcbuilder.calc.problems import Problems

KINDS = {
    "age": InputInfo("number", limits=(18.0, 110.0)),
    "crp": InputInfo("number", limits=(0.0, 500.0)),
    "creat": "number",
    "hearing": "yes_no",
    "anaesthesia": ("choice", ("general", "neuraxial", "regional")),
}


def term(name, input_id, transform, coefficients, **extra):
    out = {"name": name, "input": input_id, "transform": transform, "coefficients": coefficients}
    return out | extra


def logistic() -> dict:
    """A valid logistic model (10 columns: 3 + 1 + 1 + 2 + 3)."""
    return {
        "family": "logistic",
        "intercept": -2.1,
        "terms": [
            term("age", "age", {"type": "rcs", "knots": [30, 50, 65, 80]}, [0.02, 0.15, -0.31],
                 truncate={"low": 20, "high": 95}),
            term("crp", "crp", {"type": "log", "shift": 1}, [0.4]),
            term("hearing", "hearing", {"type": "indicator"}, [0.6]),
            term("an", "anaesthesia",
                 {"type": "levels", "reference": "general", "levels": ["neuraxial", "regional"]},
                 [-0.2, -0.1]),
            {"name": "age_hearing", "transform": {"type": "product", "of": ["age", "hearing"]},
             "coefficients": [0.01, 0.02, 0.03]},
        ],
    }  # fmt: skip


def survival() -> dict:
    return {
        "family": "survival_at_horizon",
        "terms": [term("age", "age", {"type": "linear"}, [0.05])],
        "survival": {"horizon": 5, "horizon_unit": "years", "baseline_survival": 0.9,
                     "centre": [60.0]},
    }  # fmt: skip


def parse(raw, kinds=None):
    problems = Problems()
    model = ModelSpec.from_dict(raw, "model", problems, KINDS if kinds is None else kinds)
    return model, problems.items


def only_problem(raw, kinds=None) -> str:
    model, items = parse(raw, kinds)
    assert model is None
    assert len(items) == 1, items
    return items[0]


def covariance(n: int, scale: float = 0.01) -> list[list[float]]:
    return [[scale if i == j else 0.0 for j in range(n)] for i in range(n)]


# --- valid models -----------------------------------------------------------------------------


def test_valid_logistic_model_parses_with_columns():
    raw = logistic()
    raw["covariance"] = covariance(11)
    model, items = parse(raw)
    assert items == []
    assert model is not None
    assert model.column_counts == (3, 1, 1, 2, 3)
    assert model.n_columns == 10
    assert model.inputs_read == ("age", "crp", "hearing", "anaesthesia")
    assert model.input_choices == (("anaesthesia", ("general", "neuraxial", "regional")),)
    assert model.terms[0].transform == Rcs((30.0, 50.0, 65.0, 80.0))
    assert model.terms[4].transform == Product(("age", "hearing"))


def test_round_trip_to_dict_from_dict():
    raw = logistic()
    raw["covariance"] = covariance(11)
    raw["recalibration"] = {"method": "slope", "intercept": -0.3, "slope": 0.8,
                            "dataset": "Demo B (synthetic)", "n": 800, "events": 70}  # fmt: skip
    model, _ = parse(raw)
    assert model is not None
    again, items = parse(json.loads(json.dumps(model.to_dict())))
    assert items == []
    assert again == model
    assert model.to_dict()["terms"][1]["transform"] == {"type": "log", "shift": 1.0}
    assert model.to_dict()["recalibration"] == raw["recalibration"]
    surv, _ = parse(survival())
    assert surv is not None
    assert surv.survival == SurvivalSpec(5.0, "years", 0.9, (60.0,))
    assert parse(surv.to_dict())[0] == surv


def test_input_kinds_protocol_and_defaults():
    raw = copy.deepcopy(logistic())
    raw["terms"] = raw["terms"][1:2]
    raw["terms"][0]["transform"] = {"type": "log"}
    model, items = parse(raw, {"crp": InputInfo("number")})  # no limits: range not checked
    assert items == []
    assert model is not None
    assert model.terms[0].transform == Log(0.0)
    for bad, message in [
        ({"crp": "text"}, "input_kinds['crp']: kind must be one of"),
        ({"crp": "choice"}, "input_kinds['crp']: a choice input needs its choice values"),
        ({"crp": 3}, "input_kinds['crp']: expected InputInfo, a kind or (kind, choices)"),
    ]:
        with pytest.raises(ValueError, match=re.escape(message)):
            parse(raw, bad)


def test_recalibration_defaults_and_dataclasses():
    raw = survival() | {"recalibration": {"method": "intercept", "intercept": 0.2, "dataset": "B"}}
    model, items = parse(raw)
    assert items == []
    assert model is not None
    assert model.recalibration == Recalibration("intercept", 0.2, 1.0, "B", None, None)


# --- every problem class: exact message and path ------------------------------------------


def edit(base, change):
    raw = copy.deepcopy(base())
    change(raw)
    return raw


CASES = [
    # model level
    (logistic, lambda r: r.update(family="cox"),
     "model.family: must be 'logistic' or 'survival_at_horizon' (got 'cox')"),
    (logistic, lambda r: r.pop("intercept"), "model.intercept: required for family 'logistic'"),
    (survival, lambda r: r.update(intercept=0.5),
     "model.intercept: not allowed for family 'survival_at_horizon' "
     "(the baseline survival takes its place)"),
    (survival, lambda r: r.pop("survival"),
     "model.survival: required for family 'survival_at_horizon'"),
    (logistic, lambda r: r.update(survival=survival()["survival"]),
     "model.survival: not allowed for family 'logistic'"),
    (logistic, lambda r: r.update(terms=[]), "model.terms: at least one term is required (got [])"),
    # names and inputs
    (logistic, lambda r: r["terms"][1].update(name="age"),
     "model.terms[1].name: duplicate term name 'age' (also at model.terms[0])"),
    (logistic, lambda r: r["terms"][0].update(input="agee"),
     "model.terms[0].input: no input named 'agee'"),
    (logistic, lambda r: r["terms"][1].pop("input"),
     "model.terms[1].input: required for a 'log' term"),
    (logistic, lambda r: r["terms"][4].update(input="age"),
     "model.terms[4].input: not allowed for a product term (it reads the terms named in 'of')"),
    (logistic, lambda r: r["terms"][4].update(truncate={"low": 1}),
     "model.terms[4].truncate: not allowed for a product term"),
    # transform vs input kind
    (logistic, lambda r: r["terms"][1].update(input="hearing"),
     "model.terms[1].transform.type: 'log' needs a number input, but input 'hearing' is yes_no"),
    (logistic, lambda r: r["terms"][2].update(input="age"),
     "model.terms[2].transform.type: 'indicator' needs a yes_no or choice input, "
     "but input 'age' is number"),
    (logistic, lambda r: r["terms"][3].update(input="hearing"),
     "model.terms[3].transform.type: 'levels' needs a choice input, but input 'hearing' is yes_no"),
    (logistic, lambda r: r["terms"][2].update(truncate={"high": 1}),
     "model.terms[2].truncate: only number inputs can be truncated (input 'hearing' is yes_no)"),
    (logistic, lambda r: r["terms"][0].update(truncate={"low": 95, "high": 65}),
     "model.terms[0].truncate: low must be below high (got low 95 >= high 65)"),
    # indicator and levels
    (logistic, lambda r: r["terms"][2]["transform"].update(level="yes"),
     "model.terms[2].transform.level: not allowed for a yes_no input ('hearing')"),
    (logistic, lambda r: r["terms"][3].update(transform={"type": "indicator"}, coefficients=[1]),
     "model.terms[3].transform.level: required for a choice input ('anaesthesia')"),
    (logistic, lambda r: r["terms"][3].update(
        transform={"type": "indicator", "level": "local"}, coefficients=[1]),
     "model.terms[3].transform.level: 'local' is not a choice of input 'anaesthesia' "
     "(choices: 'general', 'neuraxial', 'regional')"),
    (logistic, lambda r: r["terms"][3]["transform"].update(reference="none"),
     "model.terms[3].transform.reference: 'none' is not a choice of input 'anaesthesia' "
     "(choices: 'general', 'neuraxial', 'regional')"),
    (logistic, lambda r: r["terms"][3]["transform"].update(levels=["neuraxial", "general"]),
     "model.terms[3].transform.levels[1]: 'general' is the reference level"),
    (logistic, lambda r: r["terms"][3]["transform"].update(levels=["neuraxial", "neuraxial"]),
     "model.terms[3].transform.levels[1]: duplicate level 'neuraxial'"),
    (logistic, lambda r: r["terms"][3].update(
        transform={"type": "levels", "reference": "general", "levels": ["regional"]},
        coefficients=[1]),
     "model.terms[3].transform.levels: choice 'neuraxial' of input 'anaesthesia' is neither the "
     "reference nor listed (every choice needs a column or must be the reference)"),
    (logistic, lambda r: r["terms"][3]["transform"].update(levels=[]),
     "model.terms[3].transform.levels: at least one non-reference level is required (got [])"),
    # products
    (logistic, lambda r: r["terms"][4]["transform"].update(of=["age", "hear"]),
     "model.terms[4].transform.of[1]: no term named 'hear'"),
    (logistic, lambda r: r["terms"].append(r["terms"].pop(2)),
     "model.terms[3].transform.of[1]: term 'hearing' is defined later (model.terms[4]); "
     "a product may only use earlier terms"),
    (logistic, lambda r: r["terms"][4]["transform"].update(of=["age", "age_hearing"]),
     "model.terms[4].transform.of[1]: a product cannot use itself ('age_hearing'); "
     "it may only use earlier terms"),
    (logistic, lambda r: r["terms"].append(
        {"name": "p2", "transform": {"type": "product", "of": ["age_hearing", "crp"]},
         "coefficients": [1, 2, 3]}),
     "model.terms[5].transform.of[0]: term 'age_hearing' is itself a product; "
     "a product may only combine terms that read an input"),
    # coefficient counts
    (logistic, lambda r: r["terms"][0].update(coefficients=[0.1, 0.2]),
     "model.terms[0].coefficients: expected 3 numbers for an rcs term with 4 knots (got 2)"),
    (logistic, lambda r: r["terms"][1].update(coefficients=[0.1, 0.2]),
     "model.terms[1].coefficients: expected 1 number for a log term (got 2)"),
    (logistic, lambda r: r["terms"][3].update(coefficients=[0.1, 0.2, 0.3]),
     "model.terms[3].coefficients: expected 2 numbers for a levels term with 2 non-reference "
     "levels (got 3)"),
    (logistic, lambda r: r["terms"][4].update(coefficients=[0.1]),
     "model.terms[4].coefficients: expected 3 numbers for a product of 'age' (3 columns) and "
     "'hearing' (1 column) (got 1)"),
    (logistic, lambda r: r["terms"][1].update(transform={"type": "hinges", "knots": [5, 50]}),
     "model.terms[1].coefficients: expected 3 numbers for a hinges term with 2 knots (got 1)"),
    (logistic, lambda r: r["terms"][1].update(coefficients=[0.1, "x"]),
     "model.terms[1].coefficients[1]: expected a number (got 'x')"),
    (logistic, lambda r: r["terms"][1].update(coefficients=[math.inf]),
     "model.terms[1].coefficients[0]: must be a finite number (got inf)"),
    # transform parameters
    (logistic, lambda r: r["terms"][0]["transform"].update(knots=[30, 50, 70, 65]),
     "model.terms[0].transform.knots: must be strictly increasing (got 70 >= 65)"),
    (logistic, lambda r: r["terms"][0].update(
        transform={"type": "rcs", "knots": [30, 50]}, coefficients=[1]),
     "model.terms[0].transform.knots: an rcs term needs 3 to 10 knots (got 2)"),
    (logistic, lambda r: r["terms"][1].update(transform={"type": "hinges", "knots": []}),
     "model.terms[1].transform.knots: a hinges term needs at least 1 knot (got 0)"),
    (logistic, lambda r: r["terms"][1].update(transform={"type": "power", "exponent": 0}),
     "model.terms[1].transform.exponent: must not be 0 (x ** 0 is a constant column)"),
    (logistic, lambda r: r["terms"][1].update(transform={"type": "exp"}),
     "model.terms[1].transform.type: unknown transform 'exp' (allowed: 'linear', 'log', 'sqrt', "
     "'power', 'rcs', 'hinges', 'indicator', 'levels', 'product')"),
    # transform undefined inside the input's hard limits (crp limits 0..500)
    (logistic, lambda r: r["terms"][1]["transform"].update(shift=0),
     "model.terms[1].transform: log(x + shift) is undefined at the lowest allowed value of input "
     "'crp' (limit or truncation): x = 0, shift 0, needs x + shift > 0"),
    (logistic, lambda r: r["terms"][1].update(
        input="creat", transform={"type": "sqrt"}, truncate={"low": -1}),
     "model.terms[1].transform: sqrt(x) is undefined at the lowest allowed value of input "
     "'creat' (limit or truncation): x = -1, needs x >= 0"),
    (logistic, lambda r: r["terms"][1].update(
        input="creat", transform={"type": "power", "exponent": 0.5}, truncate={"low": -5}),
     "model.terms[1].transform: x ** 0.5 is undefined at the lowest allowed value of input "
     "'creat' (limit or truncation): x = -5, a non-integer exponent needs x >= 0"),
    (logistic, lambda r: r["terms"][1].update(transform={"type": "power", "exponent": -1}),
     "model.terms[1].transform: x ** -1 is undefined at x = 0, which input 'crp' allows "
     "(a negative exponent needs x != 0)"),
    # covariance
    (logistic, lambda r: r.update(covariance=[[1, 0], [0]]),
     "model.covariance: must be square (row 1 has 1 numbers, but there are 2 rows)"),
    (logistic, lambda r: r.update(covariance=covariance(10)),
     "model.covariance: expected 11 x 11 (1 intercept + 10 columns) (got 10 x 10)"),
    (survival, lambda r: r.update(covariance=covariance(2)),
     "model.covariance: expected 1 x 1 (one per column) (got 2 x 2)"),
    (survival, lambda r: r.update(covariance=[[math.nan]]),
     "model.covariance[0][0]: must be a finite number (got nan)"),
    (survival, lambda r: r.update(
        terms=[*r["terms"], term("age2", "age", {"type": "power", "exponent": 2}, [0.1])],
        covariance=[[1.0, 0.5], [0.4, 1.0]],
        survival={**r["survival"], "centre": [60, 3600]}),
     "model.covariance: must be symmetric (row 1, column 0 is 0.4 but row 0, column 1 is 0.5)"),
    (survival, lambda r: r.update(covariance=[[1e101]]),
     "model.covariance: entries must be below 1e+100 in magnitude (got 1e+101); "
     "check the units of the matrix"),
    (logistic, lambda r: r["terms"][1]["transform"].update(shift=10**400),
     "model.terms[1].transform.shift: must be a finite number (got an integer of 401 digits)"),
    (survival, lambda r: r.update(
        covariance=[[-0.25]]),
     "model.covariance: must be positive semi-definite (smallest eigenvalue -0.25)"),
    # survival
    (survival, lambda r: r["survival"].update(baseline_survival=1.2),
     "model.survival.baseline_survival: must be strictly between 0 and 1 (got 1.2)"),
    (survival, lambda r: r["survival"].update(baseline_survival=0),
     "model.survival.baseline_survival: must be strictly between 0 and 1 (got 0)"),
    (survival, lambda r: r["survival"].update(centre=[60.0, 1.0]),
     "model.survival.centre: expected 1 numbers, one per column (got 2)"),
    (survival, lambda r: r["survival"].update(horizon=0),
     "model.survival.horizon: must be greater than 0 (got 0)"),
    (survival, lambda r: r["survival"].update(horizon_unit="fortnights"),
     "model.survival.horizon_unit: must be one of 'days', 'weeks', 'months', 'years' "
     "(got 'fortnights')"),
    # recalibration
    (survival, lambda r: r.update(recalibration={"method": "slope", "intercept": 0, "slope": 0,
                                                 "dataset": "B"}),
     "model.recalibration.slope: must not be 0 (got 0): every patient would get the same risk"),
    (survival, lambda r: r.update(recalibration={"method": "slope", "intercept": 0, "slope": -0.5,
                                                 "dataset": "B"}),
     "model.recalibration.slope: must be positive (got -0.5): a negative slope reverses the "
     "model's ranking"),
    (survival, lambda r: r.update(recalibration={"method": "intercept", "intercept": 0,
                                                 "slope": 0.8, "dataset": "B"}),
     "model.recalibration.slope: must be 1 for method 'intercept' (got 0.8)"),
    (survival, lambda r: r.update(recalibration={"method": "both", "intercept": 0,
                                                 "dataset": "B"}),
     "model.recalibration.method: must be 'intercept' or 'slope' (got 'both')"),
    (survival, lambda r: r.update(recalibration={"method": "intercept", "intercept": 0}),
     "model.recalibration.dataset: expected a non-empty string (got None)"),
    (survival, lambda r: r.update(recalibration={"method": "intercept", "intercept": 0,
                                                 "dataset": "B", "n": 0}),
     "model.recalibration.n: must be at least 1 (got 0)"),
    (survival, lambda r: r.update(recalibration={"method": "intercept", "intercept": 0,
                                                 "dataset": "B", "n": 80, "events": 90}),
     "model.recalibration.events: must not exceed n = 80 (got 90)"),
    (survival, lambda r: r.update(recalibration={"method": "intercept", "intercept": 0,
                                                 "dataset": "B", "events": -1}),
     "model.recalibration.events: must not be negative (got -1)"),
    (survival, lambda r: r.update(recalibration={"method": "intercept", "intercept": 0,
                                                 "dataset": "B", "n": 2.5}),
     "model.recalibration.n: expected a whole number (got 2.5)"),
]  # fmt: skip


@pytest.mark.parametrize(("base", "change", "message"), CASES, ids=[c[2][:60] for c in CASES])
def test_each_problem_has_its_message_and_path(base, change, message):
    assert only_problem(edit(base, change)) == message


def test_several_problems_are_reported_at_once_and_earlier_ones_kept():
    raw = logistic()
    raw.pop("intercept")
    raw["terms"][0]["input"] = "agee"
    raw["terms"][0]["transform"]["knots"] = [30, 50, 70, 65]
    raw["terms"][3]["coefficients"] = [1.0]
    raw["covariance"] = [[1.0]]
    raw["recalibration"] = {"method": "slope", "intercept": 0, "slope": 0, "dataset": "B"}
    problems = Problems()
    problems.add("about.title", "an earlier section's problem")
    assert ModelSpec.from_dict(raw, "model", problems, KINDS) is None
    assert problems.items == [
        "about.title: an earlier section's problem",
        "model.intercept: required for family 'logistic'",
        "model.terms[0].transform.knots: must be strictly increasing (got 70 >= 65)",
        "model.terms[0].input: no input named 'agee'",
        "model.terms[3].coefficients: expected 2 numbers for a levels term with 2 non-reference "
        "levels (got 1)",
        "model.recalibration.slope: must not be 0 (got 0): every patient would get the same risk",
    ]


def test_earlier_problems_do_not_make_a_valid_model_fail():
    problems = Problems()
    problems.add("inputs[0].label", "something else")
    assert ModelSpec.from_dict(survival(), "model", problems, KINDS) is not None


def test_truncation_and_shift_make_transforms_defined_within_limits():
    raw = logistic()
    raw["terms"][1]["transform"] = {"type": "log", "shift": 0}
    raw["terms"][1]["truncate"] = {"low": 0.1}
    raw["terms"].append(term("inv", "age", {"type": "power", "exponent": -1}, [1.0]))
    raw["terms"].append(term("sq", "crp", {"type": "sqrt"}, [1.0]))
    model, items = parse(raw)
    assert items == []
    assert model is not None
    assert isinstance(model.terms[5].transform, Power)
    assert model.terms[3].transform == Levels("general", ("neuraxial", "regional"))
    hinge = edit(logistic, lambda r: r["terms"][1].update(
        transform={"type": "hinges", "knots": [5, 50]}, coefficients=[1, 2, 3]))  # fmt: skip
    assert parse(hinge)[0].terms[1].transform == Hinges((5.0, 50.0))
