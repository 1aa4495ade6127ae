"""The fitting recipe: the example round trip, the inputs shape, and every refusal's message."""

from __future__ import annotations

import copy
import datetime as dt
import tomllib
from pathlib import Path
from typing import Any

import pytest

from calcbuilder.calc.inputs import parse_inputs
from calcbuilder.calc.problems import Problems
from calcbuilder.evidence import Recipe, RecipeError, load_recipe
from calcbuilder.evidence._recipe_sections import default_cautions

EXAMPLE = Path(__file__).resolve().parents[2] / "templates" / "recipe-example.toml"
CAUTIONS = Path(__file__).resolve().parents[2] / "templates" / "cautions.toml"


def example() -> dict[str, Any]:
    """A fresh copy of the example recipe as parsed from TOML."""
    with EXAMPLE.open("rb") as handle:
        return copy.deepcopy(tomllib.load(handle))


def entry(raw: dict[str, Any], input_id: str) -> dict[str, Any]:
    return next(e for e in raw["inputs"] if e["id"] == input_id)


def problems_of(raw: dict[str, Any]) -> list[str]:
    with pytest.raises(RecipeError) as caught:
        Recipe.from_dict(raw)
    return caught.value.problems


def one_problem(raw: dict[str, Any]) -> str:
    found = problems_of(raw)
    assert len(found) == 1, found
    return found[0]


# --- the example ------------------------------------------------------------------------------


def test_example_round_trip() -> None:
    recipe = load_recipe(EXAMPLE)
    again = Recipe.from_dict(recipe.to_dict())
    assert again == recipe
    assert again.to_dict() == recipe.to_dict()


def test_example_term_plan() -> None:
    plan = {t.name: t for t in load_recipe(EXAMPLE).term_plan}
    assert list(plan) == ["age", "cog_errors", "sensory", "alcohol", "asa", "medicines",
                          "sodium", "creatinine", "anaesthesia"]
    assert plan["age"].type == "rcs"
    assert plan["age"].knots_from_data == 4
    assert plan["asa"].type == "levels"
    assert plan["asa"].settings["reference"] == "I-II"
    assert plan["anaesthesia"].settings["reference"] == "neuraxial"
    assert plan["sensory"].type == "indicator"
    assert plan["creatinine"].type == "linear"


def test_example_metadata_and_defaults() -> None:
    recipe = load_recipe(EXAMPLE)
    assert recipe.about["synthetic"] is True
    assert recipe.outcome.column == "delirium"
    assert recipe.outcome.event == 1.0
    assert recipe.fit.developed_range == "observed"
    assert recipe.fit.firth is False
    with CAUTIONS.open("rb") as handle:
        texts = tomllib.load(handle)
    assert recipe.cautions == (texts["always"]["long"], texts["synthetic"]["text"])
    assert recipe.input("sensory").yes == (1.0,)
    assert recipe.input("sensory").no == (0.0,)


def test_input_dicts_have_the_calculator_shape() -> None:
    recipe = load_recipe(EXAMPLE)
    dicts = recipe.input_dicts({"age": (65, 98), "creatinine": (40, 250)})
    found = Problems()
    specs = parse_inputs(dicts, "inputs", found)
    assert specs is not None, found.items
    creatinine = next(d for d in dicts if d["id"] == "creatinine")
    assert creatinine["unit"] == "µmol/L"
    assert creatinine["alt_units"] == [{"unit": "mg/dL", "factor": 88.42, "offset": 0.0}]
    assert creatinine["limits"] == {"low": 10.0, "high": 2000.0}
    assert creatinine["developed"] == {"low": 40.0, "high": 250.0}
    asa = next(d for d in dicts if d["id"] == "asa")
    assert [c["value"] for c in asa["choices"]] == ["I-II", "III", "IV"]
    assert not {"column", "transform"} & set(asa)
    sodium = next(d for d in dicts if d["id"] == "sodium")
    assert "developed" not in sodium  # no range given: none written


def test_explicit_developed_range_wins() -> None:
    raw = example()
    entry(raw, "age")["developed"] = {"low": 66, "high": 95}
    recipe = Recipe.from_dict(raw)
    age = recipe.input_dicts({"age": (65, 98)})[0]
    assert age["developed"] == {"low": 66.0, "high": 95.0}


def test_about_dict_release_date() -> None:
    recipe = load_recipe(EXAMPLE)
    about = recipe.about_dict(dt.date(2026, 6, 1))
    assert about["released"] == "2026-06-01"
    assert about["review_by"] == "2027-12-31"
    assert list(about)[:2] == ["title", "version"]
    with pytest.raises(RecipeError, match=r"about.review_by: must be after the release date"):
        recipe.about_dict(dt.date(2028, 1, 1))


def test_dates_may_be_text() -> None:
    raw = example()
    raw["about"]["released"] = "2026-01-15"
    raw["about"]["review_by"] = "2027-01-15"
    recipe = Recipe.from_dict(raw)
    assert recipe.about["released"] == dt.date(2026, 1, 15)


# --- every problem at once, with key paths -----------------------------------------------------


def test_every_problem_is_reported_at_once() -> None:
    raw = example()
    raw["outcom"] = {}
    entry(raw, "age")["tranform"] = "linear"
    entry(raw, "sodium").pop("limits")
    raw["decision"]["default_threshold"] = 0.5
    raw["about"]["version"] = "1.0"
    found = problems_of(raw)
    joined = "\n".join(found)
    assert len(found) == 5, found
    assert "outcom: unknown key 'outcom' (did you mean 'outcome'?)" in joined
    assert "inputs[age].tranform: unknown key 'tranform' (did you mean 'transform'?)" in joined
    assert "inputs[sodium].limits: required for a number input" in joined
    assert "decision.default_threshold: must lie inside reasonable_range [0.05, 0.3]" in joined
    assert "about.version: must be a version like 1.0.0 (got '1.0')" in joined


def test_message_heading_counts_problems() -> None:
    raw = example()
    raw["fit"]["firht"] = True
    with pytest.raises(RecipeError) as caught:
        Recipe.from_dict(raw)
    assert str(caught.value).startswith("the recipe cannot be used: 1 problem\n  - fit.firht")


@pytest.mark.parametrize(
    ("input_id", "transform", "expected"),
    [
        ("sensory", {"type": "rcs", "knots": 4},
         "inputs[sensory].transform.type: transform 'rcs' does not fit a yes_no input; a yes_no "
         "input takes indicator"),
        ("asa", "linear",
         "inputs[asa].transform.type: transform 'linear' does not fit a choice input; a choice "
         "input takes levels or indicator"),
        ("age", "levels",
         "inputs[age].transform.type: transform 'levels' does not fit a number input"),
        ("age", "spline", "inputs[age].transform.type: unknown transform 'spline'"),
        ("age", {"type": "product"}, "products are written as [[interactions]]"),
        ("age", {"type": "rcs", "knots": 2},
         "inputs[age].transform.knots: a knot count must be from 3 to 7 (got 2)"),
        ("age", {"type": "rcs", "knots": [70, 65, 80]},
         "inputs[age].transform.knots: must be strictly increasing (got 70, 65, 80)"),
        ("age", {"type": "rcs", "knots": [10, 70, 80]},
         "inputs[age].transform.knots: must lie inside the hard limits 18 to 110"),
        ("age", {"type": "hinges"}, "inputs[age].transform.knots: required"),
        ("age", {"type": "power"}, "inputs[age].transform.exponent: required"),
        ("age", {"type": "power", "exponent": 0}, "must not be 0"),
        ("cog_errors", "log",
         "inputs[cog_errors].transform: log(x + shift) needs x + shift > 0 for every allowed "
         "value, but the lowest allowed value is 0 and shift is 0"),
        ("age", {"type": "linear", "knots": 3},
         "inputs[age].transform.knots: unknown key 'knots'; allowed here: type"),
        ("asa", {"type": "levels", "reference": "II"},
         "inputs[asa].transform.reference: 'II' is not one of the choices (I-II, III, IV)"),
        ("asa", "indicator", "inputs[asa].transform.level: required"),
        ("sensory", {"type": "indicator", "level": "1"},
         "inputs[sensory].transform.level: only for choice inputs"),
    ],
)
def test_transform_problems(input_id: str, transform: Any, expected: str) -> None:
    raw = example()
    entry(raw, input_id)["transform"] = transform
    assert expected in one_problem(raw)


def test_transforms_that_fit() -> None:
    raw = example()
    entry(raw, "cog_errors")["transform"] = {"type": "log", "shift": 1}
    entry(raw, "medicines")["transform"] = "sqrt"
    entry(raw, "sodium")["transform"] = {"type": "hinges", "knots": [135]}
    entry(raw, "creatinine")["transform"] = {"type": "power", "exponent": 0.5}
    entry(raw, "age")["transform"] = {"type": "rcs", "knots": [67, 72, 78, 88]}
    entry(raw, "asa")["transform"] = {"type": "indicator", "level": "IV"}
    plan = {t.name: t for t in Recipe.from_dict(raw).term_plan}
    assert plan["cog_errors"].settings == {"shift": 1.0}
    assert plan["age"].settings == {"knots": (67.0, 72.0, 78.0, 88.0)}
    assert plan["age"].knots_from_data is None
    assert plan["asa"].settings == {"level": "IV"}


def test_truncate() -> None:
    raw = example()
    entry(raw, "age")["truncate"] = {"high": 95}
    assert Recipe.from_dict(raw).input("age").term.truncate is not None
    entry(raw, "sensory")["truncate"] = {"low": 0}
    assert one_problem(raw) == ("inputs[sensory].truncate: only number inputs take 'truncate' "
                                "(this input is yes_no)")


def test_rcs_default_knot_count() -> None:
    raw = example()
    entry(raw, "age")["transform"] = "rcs"
    assert Recipe.from_dict(raw).input("age").term.knots_from_data == 4


def test_number_fields_on_other_kinds() -> None:
    raw = example()
    entry(raw, "sensory")["unit"] = "yes"
    assert one_problem(raw) == ("inputs[sensory].unit: only number inputs take unit (this input "
                                "is yes_no)")


def test_yes_no_coding() -> None:
    raw = example()
    entry(raw, "sensory").pop("yes")
    entry(raw, "sensory").pop("no")
    recipe = Recipe.from_dict(raw)
    assert recipe.input("sensory").yes == (1.0, "true", "yes", "y")
    assert recipe.input("sensory").no == (0.0, "false", "no", "n")
    entry(raw, "sensory")["yes"] = [1, "Y"]
    entry(raw, "sensory")["no"] = ["y", 0]
    assert one_problem(raw) == "inputs[sensory].no: 'y' is listed under both yes and no"
    entry(raw, "sensory")["no"] = []
    assert one_problem(raw) == "inputs[sensory].no: must be a non-empty list of values (got [])"
    entry(raw, "sensory")["no"] = ["NA"]
    assert "inputs[sensory].no[#1]: must be a number, text or true/false that is not read as " \
        "missing" in one_problem(raw)
    entry(raw, "age")["yes"] = [1]
    entry(raw, "sensory")["no"] = [0]
    assert one_problem(raw) == ("inputs[age].yes: only yes_no inputs take 'yes' (this input is "
                                "number)")


def test_choices_from_data_and_as_texts() -> None:
    raw = example()
    entry(raw, "asa").pop("choices")
    entry(raw, "asa")["transform"] = "levels"
    entry(raw, "anaesthesia")["choices"] = ["neuraxial", "general"]
    recipe = Recipe.from_dict(raw)
    asa = recipe.input("asa")
    assert asa.choices_from_data
    assert asa.term.settings == {"reference": None}
    with pytest.raises(RecipeError, match=r"inputs\[asa\].choices: not in the recipe"):
        recipe.input_dicts({})
    dicts = recipe.input_dicts({}, {"asa": ["I-II", "III"]})
    asa_dict = next(d for d in dicts if d["id"] == "asa")
    assert asa_dict["choices"] == [{"value": "I-II", "label": "I-II"},
                                   {"value": "III", "label": "III"}]
    anaesthesia = recipe.input("anaesthesia")
    assert [c.label for c in anaesthesia.spec.choices] == ["neuraxial", "general"]
    assert Recipe.from_dict(recipe.to_dict()) == recipe


def test_choice_problems_keep_recipe_positions() -> None:
    raw = example()
    entry(raw, "asa")["choices"] = ["I-II", "III", "III"]
    assert problems_of(raw) == [
        "inputs[asa].choices[#3].value: duplicate choice value 'III' (first at choices[#2])",
        "inputs[asa].choices[#3].label: duplicate choice label 'III' (first at choices[#2])",
    ]


def test_duplicate_ids_and_columns() -> None:
    raw = example()
    raw["inputs"][1]["id"] = "age"
    found = "\n".join(problems_of(raw))
    assert "inputs[#2].id: duplicate id 'age' (first used at inputs[#1])" in found
    raw = example()
    entry(raw, "sodium")["column"] = "creatinine"
    assert one_problem(raw) == ("inputs[creatinine].column: column 'creatinine' is already read "
                                "by inputs[sodium]; each input needs its own column")


def test_input_reading_the_outcome() -> None:
    raw = example()
    entry(raw, "alcohol")["column"] = "delirium"
    assert one_problem(raw) == ("inputs[alcohol].column: 'delirium' is the outcome column; an "
                                "input cannot read the outcome")


def test_no_inputs() -> None:
    raw = example()
    raw["inputs"] = []
    assert one_problem(raw) == "inputs: the recipe needs at least one [[inputs]] entry"


def test_interactions() -> None:
    raw = example()
    raw["interactions"] = [{"of": ["age", "sensory"]}]
    recipe = Recipe.from_dict(raw)
    product = recipe.term_plan[-1]
    assert (product.name, product.type, product.settings["of"]) == (
        "age*sensory", "product", ("age", "sensory"))
    raw["interactions"] = [{"of": ["age", "hearing"]}, {"of": ["age", "age"]},
                           {"of": ["age", "sensory"], "nmae": "x"}]
    found = problems_of(raw)
    assert found == [
        "interactions[#1].of: 'hearing' is not an input id of this recipe (inputs: age, "
        "cog_errors, sensory, alcohol, asa, medicines, sodium, creatinine, anaesthesia)",
        "interactions[#2].of: must name two different inputs (got 'age' twice)",
        "interactions[#3].nmae: unknown key 'nmae' (did you mean 'name'?); allowed here: name, of",
    ]
    raw["interactions"] = [{"of": ["age", "sensory"]}, {"of": ["sensory", "age"], "name": "b"}]
    assert one_problem(raw) == ("interactions: the interaction of 'sensory' and 'age' is listed "
                                "twice")


def test_interaction_check_survives_a_broken_entry() -> None:
    raw = example()
    raw["interactions"] = [{"of": ["age", "sensory"]}]
    entry(raw, "age").pop("limits")
    assert one_problem(raw).startswith("inputs[age].limits: required for a number input")


def test_outcome_section() -> None:
    raw = example()
    raw.pop("outcome")
    assert one_problem(raw) == "outcome: required: add a [outcome] table"
    raw = example()
    raw["outcome"]["event"] = ""
    assert "outcome.event: must be the number, text or true/false that marks an event" in \
        one_problem(raw)
    raw["outcome"]["event"] = "Yes"
    assert Recipe.from_dict(raw).outcome.event == "Yes"


def test_about_section() -> None:
    raw = example()
    raw["about"].pop("title")
    raw["about"]["released"] = dt.date(2028, 1, 1)
    raw["about"]["authors"] = ["", "A. Person"]
    found = problems_of(raw)
    assert found == [
        "about.title: required",
        "about.authors[#1]: must be non-empty text (got '')",
        "about.review_by: must be after about.released (2028-01-01); got 2027-12-31",
    ]
    raw = example()
    raw["about"]["review_by"] = "31/12/2027"
    assert one_problem(raw) == ("about.review_by: must be a calendar date such as 2026-12-01 "
                                "(got '31/12/2027')")


@pytest.mark.parametrize(
    ("decision", "expected"),
    [
        ({"default_threshold": 1.0, "reasonable_range": [0.05, 0.3], "rationale": "x"},
         "decision.default_threshold: must be a risk strictly between 0 and 1, e.g. 0.1 "
         "(got 1.0)"),
        ({"default_threshold": 0.1, "reasonable_range": [0.3, 0.05], "rationale": "x"},
         "decision.reasonable_range: low must be below high (got [0.3, 0.05])"),
        ({"default_threshold": 0.1, "reasonable_range": [0.05, 0.3]},
         "decision.rationale: required"),
        ({"default_threshold": 0.1, "reasonable_range": [0.05, 0.3], "rationale": "x",
          "bands": [{"label": "low", "upper": 0.2}, {"label": "high", "upper": 0.9}]},
         "decision.bands: upper limits must increase and the last must be 1 (got 0.2, 0.9)"),
    ],
)
def test_decision_section(decision: dict[str, Any], expected: str) -> None:
    raw = example()
    raw["decision"] = decision
    assert one_problem(raw) == expected


def test_cautions() -> None:
    raw = example()
    raw["about"]["synthetic"] = False
    assert Recipe.from_dict(raw).cautions == default_cautions(False)
    assert len(default_cautions(False)) == 1
    raw["cautions"] = ["Our own caution."]
    assert Recipe.from_dict(raw).cautions == ("Our own caution.",)
    raw["cautions"] = []
    assert one_problem(raw).startswith("cautions: must list at least one caution text")


def test_fit_and_dataset_sections() -> None:
    raw = example()
    raw["fit"] = {"developed_range": "p05-p95", "anticipated_r2_cs": 1.2, "firth": "yes"}
    assert problems_of(raw) == [
        "fit.firth: must be true or false (got 'yes')",
        "fit.developed_range: must be 'observed' or 'p01-p99' (got 'p05-p95')",
        "fit.anticipated_r2_cs: must lie strictly between 0 and 1 (got 1.2)",
    ]
    raw["fit"] = {"developed_range": "p01-p99", "anticipated_r2_cs": 0.1, "firth": True}
    raw["dataset"] = {"name": "Demo Hospital A"}
    recipe = Recipe.from_dict(raw)
    assert (recipe.fit.developed_range, recipe.fit.anticipated_r2_cs, recipe.fit.firth) == (
        "p01-p99", 0.1, True)
    assert recipe.dataset.name == "Demo Hospital A"


def test_recipe_version() -> None:
    raw = example()
    raw["recipe_version"] = 2
    assert one_problem(raw) == "recipe_version: this calcbuilder reads recipe_version = 1 (got 2)"


# --- reading the file ---------------------------------------------------------------------------


def test_load_recipe_file_problems(tmp_path: Path) -> None:
    with pytest.raises(RecipeError, match=r"^recipe file not found: .*nope\.toml$"):
        load_recipe(tmp_path / "nope.toml")
    with pytest.raises(RecipeError, match=r"is a folder, not a recipe file"):
        load_recipe(tmp_path)
    bad = tmp_path / "bad.toml"
    bad.write_text("[outcome\ncolumn = 1\n", encoding="utf-8")
    with pytest.raises(RecipeError, match=r"bad\.toml is not valid TOML: "):
        load_recipe(bad)
    latin = tmp_path / "latin.toml"
    latin.write_bytes('title = "caf\xe9"\n'.encode("latin-1"))
    with pytest.raises(RecipeError, match=r"is not UTF-8 text .*save it as UTF-8"):
        load_recipe(latin)


def test_load_recipe_names_the_file(tmp_path: Path) -> None:
    text = EXAMPLE.read_text(encoding="utf-8").replace('event = 1', 'evnt = 1')
    path = tmp_path / "typo.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(RecipeError) as caught:
        load_recipe(path)
    assert str(caught.value).startswith(f"recipe file {path}: the recipe cannot be used: 1 problem")
    assert caught.value.problems == [
        "outcome.evnt: unknown key 'evnt' (did you mean 'event'?); allowed here: column, event"]
