"""The workspace's step objects without Qt: the recipe they make, problems routed to fields,
the data check, developed ranges, staleness, and the TOML the recipe is written as."""

from __future__ import annotations

import datetime as dt
import tomllib
from pathlib import Path

import pytest

from calcbuilder.authoring import Workspace
from calcbuilder.authoring.about_step import caution_templates, default_cautions
from calcbuilder.authoring.data_step import DataStep, event_token, guess_kind
from calcbuilder.authoring.inputs_step import InputDraft, make_id, number_or_text
from calcbuilder.authoring.problems import normalise_path, route, split_problem
from calcbuilder.authoring.toml_text import dumps_toml
from calcbuilder.evidence import Recipe, load_recipe
from tests.authoring.demo import EXAMPLE, fill_workspace, write_cohorts


@pytest.fixture(scope="module")
def cohorts(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    return write_cohorts(tmp_path_factory.mktemp("cohorts"))


@pytest.fixture
def ws(cohorts: dict[str, Path]) -> Workspace:
    return fill_workspace(Workspace(), cohorts["dev"])


# -- the recipe -------------------------------------------------------------------------------

def test_the_demo_choices_make_exactly_the_example_recipe(ws: Workspace) -> None:
    assert ws.recipe_problems() == []
    ours = Recipe.from_dict(ws.recipe_dict()).to_dict()
    assert ours == load_recipe(EXAMPLE).to_dict()


def test_recipe_toml_reads_back_unchanged(ws: Workspace) -> None:
    recipe = Recipe.from_dict(ws.recipe_dict())
    text = dumps_toml(recipe.to_dict(), header=["a comment"])
    assert text.startswith("# a comment\n")
    assert Recipe.from_dict(tomllib.loads(text)).to_dict() == recipe.to_dict()


def test_toml_text_quotes_awkward_strings_and_keys() -> None:
    doc = {"a": 'quote " backslash \\ tab \t newline \n µ', "when": dt.date(2027, 1, 2),
           "t": {"odd key": 1.5e-07, "list": [1, "x", True]},
           "rows": [{"x": {"y": [{"z": 1}]}}, {"x": {}}]}
    assert tomllib.loads(dumps_toml(doc)) == doc
    with pytest.raises(ValueError, match="cannot hold"):
        dumps_toml({"x": float("nan")})


def test_typed_values_reach_the_recipe_as_numbers_or_as_typed_text() -> None:
    assert number_or_text(" 12 ") == 12
    assert number_or_text("0.5") == 0.5
    assert number_or_text("") is None
    assert number_or_text("twelve") == "twelve"
    assert event_token("1.0") == 1
    assert event_token("yes") == "yes"
    assert make_id("Serum Na (mmol/L)") == "serum_na_mmol_l"
    assert make_id("2nd", ["x_2nd"]) == "x_2nd_2"


# -- every problem at once, beside its field ---------------------------------------------------

def test_every_problem_is_routed_to_its_step_and_field_at_once(ws: Workspace) -> None:
    age, cog, sensory = ws.inputs.drafts[0], ws.inputs.drafts[1], ws.inputs.drafts[2]
    age.knots = "12"
    cog.limit_low = "abc"
    sensory.label = ""
    ws.about.title = ""
    ws.about.review_by = "2027-13-01"
    ws.decision.default_threshold = "2"
    ws.data.anticipated_r2_cs = "1.5"
    by_step = ws.problems_by_step()
    assert len(by_step["inputs"]) == 3
    assert len(by_step["about"]) == 2
    assert len(by_step["decision"]) == 1
    assert len(by_step["data"]) == 1
    keys = ["inputs[#1].transform", "inputs[#2].limits", "inputs[#3].label", "about.title",
            "about.review_by", "decision.default_threshold", "fit.anticipated_r2_cs"]
    routed = route(ws.recipe_problems(), keys, ws.inputs.ids)
    assert set(routed) == set(keys)  # nothing left over, every field has its message
    assert routed["inputs[#1].transform"] == [
        "knots: a knot count must be from 3 to 7 (got 12); for more knots list them explicitly"]
    assert routed["inputs[#2].limits"] == ["low: must be a number (got 'abc')"]
    assert routed["about.review_by"][0].startswith("must be a calendar date")


def test_route_names_entries_by_position_and_keeps_unclaimed_problems() -> None:
    ids = ["age", "sex"]
    assert normalise_path("inputs[sex].label", ids) == "inputs[#2].label"
    assert normalise_path("inputs[0].unit", ids) == "inputs[#1].unit"  # calc/import: from 0
    assert normalise_path("inputs[#2].kind", ids) == "inputs[#2].kind"
    assert split_problem("the data have no rows") == ("", "the data have no rows")
    routed = route(["inputs[age].limits.low: too low", "about.title: required",
                    "plain sentence"], ["inputs[#1]", "inputs[#1].limits"], ids)
    assert routed == {"inputs[#1].limits": ["low: too low"],
                      "": ["about.title: required", "plain sentence"]}


def test_unfinished_texts_give_draft_texts_for_fitting_but_not_for_publishing(
        ws: Workspace) -> None:
    ws.about.title = ""
    ws.decision.rationale = ""
    recipe, problems, draft = ws.fitting_recipe()
    assert draft
    assert recipe is not None
    assert len(problems) == 2
    assert recipe.about["title"].startswith("Draft")
    assert recipe.about["synthetic"] is True
    ws.inputs.drafts[0].transform = "spline"
    recipe, problems, draft = ws.fitting_recipe()
    assert recipe is None
    assert not draft
    assert any(p.startswith("inputs[age].transform.type") for p in problems)


# -- the data ---------------------------------------------------------------------------------

def test_data_step_counts_values_and_missing_cells_with_the_pipeline_rules(
        tmp_path: Path) -> None:
    path = tmp_path / "small.csv"
    path.write_text("y,age,group,flag\n1,70,a,yes\n0,NA,b,no\n0,,b,no\n,,,\n1,81.5,c,yes\n",
                    "utf-8")
    step = DataStep()
    step.open(path)
    assert step.columns == ["y", "age", "group", "flag"]
    assert step.n_rows == 5
    age = step.summary("age")
    assert (age.filled, age.missing, age.kind) == (2, 2, "number")  # the blank row not counted
    assert step.summary("group").kind == "choice"
    assert step.summary("flag").kind == "yes_no"
    step.choose_outcome("y")
    assert step.event_value == "1"
    assert step.outcome_dict() == {"column": "y", "event": 1}
    assert step.preview(2) == [["1", "70", "a", "yes"], ["0", "", "b", "no"]]
    assert not step.file_changed()
    path.write_text("y,age\n1,2\n", "utf-8")
    assert step.file_changed()
    assert guess_kind({0.0, 1.0}, True) == "yes_no"


def test_data_check_gives_rileys_verdict_and_the_developed_ranges(ws: Workspace) -> None:
    check = ws.data_check()
    assert check.prepared is not None
    assert not check.problems
    size = check.prepared.sample_size
    assert "Riley et al.'s minimum" in size.describe()
    assert ws.inputs.data_ranges["age"] == check.prepared.developed["age"]
    low, _high = ws.inputs.developed_shown(ws.inputs.draft("age"))
    assert float(low) == pytest.approx(check.prepared.developed["age"][0])
    assert "developed" not in ws.inputs.draft("age").recipe_entry()
    ws.inputs.draft("age").developed_low, ws.inputs.draft("age").developed_high = "65", "95"
    ws.inputs.draft("age").developed_edited = True
    assert ws.inputs.draft("age").recipe_entry()["developed"] == {"low": 65, "high": 95}


def test_data_check_lists_missing_values_and_complete_case_leaves_them_out(
        tmp_path: Path, cohorts: dict[str, Path]) -> None:
    text = cohorts["dev"].read_text("utf-8").splitlines()
    header = text[0].split(",")
    row = text[5].split(",")
    row[header.index("sodium")] = ""
    text[5] = ",".join(row)
    holed = tmp_path / "holed.csv"
    holed.write_text("\n".join(text) + "\n", "utf-8")
    ws = fill_workspace(Workspace(), holed)
    check = ws.data_check()
    assert check.prepared is None
    assert any("missing values" in p and "'sodium' 1" in p for p in check.problems)
    ws.data.complete_case = True
    check = ws.data_check()
    assert check.prepared is not None
    assert check.prepared.summary.rows_dropped == 1


def test_data_check_says_what_is_missing_first(cohorts: dict[str, Path]) -> None:
    ws = Workspace()
    assert ws.data_check().waiting == "Open a data file."
    ws.data.open(cohorts["dev"])
    assert ws.data_check().waiting.startswith("Choose the outcome")
    ws.data.choose_outcome("delirium")
    assert ws.data_check().waiting == "Choose at least one predictor."


def test_predictor_drafts_follow_the_chosen_columns(cohorts: dict[str, Path]) -> None:
    ws = Workspace()
    ws.data.open(cohorts["dev"])
    summaries = {s.name: s for s in ws.data.summaries()}
    ws.inputs.sync_columns(["age", "asa", "sensory"], summaries)
    assert [d.kind for d in ws.inputs.drafts] == ["number", "choice", "yes_no"]
    assert ws.inputs.draft("asa").choices == [("I-II", "I-II"), ("III", "III"), ("IV", "IV")]
    assert (ws.inputs.draft("sensory").yes, ws.inputs.draft("sensory").no) == ("1", "0")
    ws.inputs.draft("age").label = "Age at surgery"
    ws.inputs.move(0, 1)
    ws.inputs.sync_columns(["age", "sensory"], summaries)
    assert ws.inputs.ids == ["age", "sensory"]
    assert ws.inputs.draft("age").label == "Age at surgery"  # edits kept


def test_caution_texts_start_from_the_template(ws: Workspace) -> None:
    texts = caution_templates()
    assert ws.about.cautions == default_cautions(True)
    ws.about.set_synthetic(False)
    assert texts["synthetic.text"] not in ws.about.cautions
    assert "population.text" in ws.about.offered_cautions()


def test_decision_marks_read_only_what_reads_as_a_risk(ws: Workspace) -> None:
    assert ws.decision.marks() == (0.1, (0.05, 0.3))
    ws.decision.range_high = "x"
    ws.decision.default_threshold = "1.5"
    assert ws.decision.marks() == (None, None)
    ws.decision.bands = [("lower", "0.1"), ("higher", "1")]
    assert ws.decision.decision_dict()["bands"] == [{"label": "lower", "upper": 0.1},
                                                    {"label": "higher", "upper": 1}]


def test_input_draft_round_trips_through_the_project_form() -> None:
    draft = InputDraft(id="crea", column="creat", label="Creatinine", choices=[("a", "A")])
    assert InputDraft.from_dict(draft.to_dict()) == draft
