"""Checking data against a recipe: the synthetic demo cohort, counts against pandas, Riley
numbers against sample_size_binary, and every refusal's message."""

from __future__ import annotations

import copy
import re
import tomllib
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from calcbuilder.calc.model import InputInfo, Levels, ModelSpec, Rcs
from calcbuilder.calc.problems import Problems
from calcbuilder.calc.scoring import design_matrix as calc_design_matrix
from calcbuilder.demo.scenario import make_cohort
from calcbuilder.evidence import DataError, Prepared, Recipe, load_recipe, prepare, read_table
from calcbuilder.stats import max_r2_cs, rcs_knots, sample_size_binary

EXAMPLE = Path(__file__).resolve().parents[2] / "templates" / "recipe-example.toml"
COLUMNS = ["age", "cog_errors", "sensory", "alcohol", "asa", "medicines", "sodium", "creatinine",
           "anaesthesia", "delirium"]


def example_raw() -> dict[str, Any]:
    with EXAMPLE.open("rb") as handle:
        return copy.deepcopy(tomllib.load(handle))


def recipe_with(change: Any = None) -> Recipe:
    raw = example_raw()
    if change is not None:
        change(raw)
    return Recipe.from_dict(raw)


def entry(raw: dict[str, Any], input_id: str) -> dict[str, Any]:
    return next(e for e in raw["inputs"] if e["id"] == input_id)


def clean() -> pd.DataFrame:
    return pd.DataFrame(make_cohort("development").clean)


def raw_units_fixed() -> pd.DataFrame:
    """The raw demo cohort with its wrong-unit values replaced, keeping its missing values."""
    cohort = make_cohort("development")
    df = pd.DataFrame(cohort.raw)
    for column, low, high in (("creatinine", 10, 2000), ("sodium", 100, 180)):
        bad = (df[column] < low) | (df[column] > high)
        df.loc[bad, column] = cohort.clean[column][bad.to_numpy()]
    return df


def problems(df: pd.DataFrame, recipe: Recipe | None = None, **kw: bool) -> list[str]:
    with pytest.raises(DataError) as caught:
        prepare(df, recipe or recipe_with(), **kw)
    return caught.value.problems


def one(df: pd.DataFrame, recipe: Recipe | None = None, **kw: bool) -> str:
    found = problems(df, recipe, **kw)
    assert len(found) == 1, found
    return found[0]


def defect_rows(kind: str) -> list[int]:
    """File rows (header = row 1) of the demo cohort's defects whose text contains ``kind``."""
    defects = make_cohort("development").defects
    return sorted(int(re.match(r"row (\d+)", d).group(1)) + 2 for d in defects if kind in d)


# --- the demo cohort ---------------------------------------------------------------------------


def test_demo_raw_cohort_is_refused_with_every_problem() -> None:
    found = problems(pd.DataFrame(make_cohort("development").raw))
    assert len(found) == 3, found
    sodium, creatinine, missing = found
    mgdl = defect_rows("mg/dL")
    assert creatinine.startswith(
        f"column 'creatinine': 2 values outside the hard limits 10 to 2000 µmol/L: row {mgdl[0]} ")
    assert "check the unit:" in creatinine
    assert "would be plausible in mg/dL — the data must hold µmol/L, so convert those values " \
        "(µmol/L = mg/dL × 88.42)" in creatinine
    assert sodium.startswith("column 'sodium': 1 value outside the hard limits 100 to 180 mmol/L: "
                             f"row {defect_rows('sodium')[0]} ")
    assert "check the unit" not in sodium  # sodium has no alternative unit
    gaps = defect_rows("creatinine missing")
    assert missing == (
        "missing values in 2 columns (header = row 1): 'medicines' 1 (row "
        f"{defect_rows('medicines missing')[0]}); 'creatinine' 5 (rows "
        f"{', '.join(map(str, gaps))}); fill them in, or use the complete-case option "
        "(calcbuilder fit --complete-case) to leave out the 6 rows with a missing value (the "
        "number left out is recorded)")


def test_complete_case_counts_equal_pandas() -> None:
    df = raw_units_fixed()
    prepared = prepare(df, recipe_with(), complete_case=True)
    complete = df.dropna(subset=COLUMNS)
    s = prepared.summary
    assert s.rows_read == len(df)
    assert s.rows_used == len(complete)
    assert s.rows_dropped == len(df) - len(complete)
    assert s.events == int(complete["delirium"].sum())
    assert s.non_events == int((complete["delirium"] == 0).sum())
    assert s.prevalence == pytest.approx(complete["delirium"].mean(), abs=1e-15)
    assert s.missing == {c: int(n) for c, n in df[COLUMNS].isna().sum().items()}
    assert s.dropped_for == ("medicines", "creatinine")
    assert s.complete_case
    np.testing.assert_array_equal(prepared.rows, complete.index.to_numpy() + 2)
    assert prepared.warnings[0].startswith(
        "complete-case: left out 6 of 1500 rows with a missing value ('medicines' 1, "
        "'creatinine' 5)")
    np.testing.assert_array_equal(prepared.values["age"], complete["age"].to_numpy())


def test_riley_numbers_equal_sample_size_binary() -> None:
    prepared = prepare(clean(), recipe_with())
    s = prepared.summary
    prevalence = s.events / s.rows_used
    expected = sample_size_binary(12, prevalence, 0.15 * max_r2_cs(prevalence))
    check = prepared.sample_size
    assert prepared.n_parameters == 12  # age 3, cog 1, sensory 1, alcohol 1, asa 2, 3 numbers, 1
    assert check.required == expected
    assert check.r2_cs == pytest.approx(0.15 * max_r2_cs(prevalence), rel=1e-15)
    assert "15% of the largest possible" in check.r2_cs_note
    assert check.adequate == (s.rows_used >= expected.n)
    assert prepared.events_per_parameter == min(s.events, s.non_events) / 12
    assert expected.criterion == "shrinkage"  # with 12 parameters at 13% prevalence
    assert "the binding criterion is (i) expected shrinkage of at least 0.9" in check.describe()


def test_riley_with_anticipated_r2_from_recipe() -> None:
    recipe = recipe_with(lambda r: r["fit"].update(anticipated_r2_cs=0.1))
    prepared = prepare(clean(), recipe)
    s = prepared.summary
    assert prepared.sample_size.required == sample_size_binary(12, s.events / s.rows_used, 0.1)
    recipe = recipe_with(lambda r: r["fit"].update(anticipated_r2_cs=0.9))
    with pytest.raises(DataError, match=r"^fit.anticipated_r2_cs: cannot be used at the observed "
                       r"prevalence 0\.129: r2_cs must lie strictly inside"):
        prepare(clean(), recipe)


def test_terms_inputs_and_design_matrix_agree_with_the_calculator() -> None:
    df = clean()
    prepared = prepare(df, recipe_with())
    age = prepared.terms[0]
    assert isinstance(age.transform, Rcs)
    assert age.transform.knots == tuple(rcs_knots(df["age"].to_numpy(), 4))
    X, names = prepared.design_matrix()
    assert names == ["age", "age'", "age''", "cog_errors", "sensory", "alcohol", "asa[III]",
                     "asa[IV]", "medicines", "sodium", "creatinine", "anaesthesia[general]"]
    coefs = np.linspace(-0.5, 0.5, X.shape[1])
    model = _model(prepared, coefs)
    np.testing.assert_allclose(calc_design_matrix(model, prepared.values), X, rtol=0, atol=0)
    ages = next(d for d in prepared.inputs if d["id"] == "age")
    assert ages["developed"] == {"low": float(df["age"].min()), "high": float(df["age"].max())}


def _model(prepared: Prepared, coefs: np.ndarray) -> ModelSpec:
    kinds = {d["id"]: InputInfo(d["kind"], tuple(c["value"] for c in d.get("choices", ())))
             for d in prepared.inputs}
    found = Problems()
    model = ModelSpec.from_dict({"family": "logistic", "intercept": -2.0,
                                 "terms": prepared.model_terms(coefs)}, "model", found, kinds)
    assert model is not None, found.items
    return model


def test_developed_range_percentiles() -> None:
    df = clean()
    prepared = prepare(df, recipe_with(lambda r: r["fit"].update(developed_range="p01-p99")))
    creatinine = next(d for d in prepared.inputs if d["id"] == "creatinine")
    low, high = np.quantile(df["creatinine"], [0.01, 0.99])
    assert creatinine["developed"] == {"low": low, "high": high}


def test_csv_row_numbers_are_the_lines_of_the_file(tmp_path: Path) -> None:
    path = tmp_path / "raw.csv"
    pd.DataFrame(make_cohort("development").raw).to_csv(path, index=False)
    found = problems(read_table(path))
    row = int(re.search(r"row (\d+)", found[0]).group(1))
    lines = path.read_text(encoding="utf-8").splitlines()
    sodium_at = lines[0].split(",").index("sodium")
    assert float(lines[row - 1].split(",")[sodium_at]) > 180


# --- refusals ----------------------------------------------------------------------------------


def test_missing_column_with_suggestion() -> None:
    df = clean().rename(columns={"creatinine": "creatinin"})
    message = one(df)
    assert message.startswith("the recipe names column 'creatinine' (inputs[creatinine].column) "
                              "but the data have no such column (did you mean 'creatinin'?); the "
                              "data columns are: age, cog_errors, asa,")


def test_missing_outcome_column() -> None:
    message = one(clean().drop(columns="delirium"))
    assert message.startswith("the recipe names column 'delirium' (outcome.column) but the data "
                              "have no such column; the data columns are: ")


def test_outcome_with_three_values() -> None:
    df = clean()
    df.loc[[15, 228], "delirium"] = 2
    n1 = int((df["delirium"] == 1).sum())
    n0 = int((df["delirium"] == 0).sum())
    assert one(df) == (f"outcome column 'delirium' must have two values; found 3: 0 ({n0} rows), "
                       f"1 ({n1} rows), 2 (rows 17, 230) (header = row 1); correct the unexpected "
                       "values or leave them empty (missing)")


def test_outcome_with_one_value() -> None:
    df = clean()
    df["delirium"] = 0.0
    assert one(df) == ("outcome column 'delirium' must have two values (event and no event); "
                       "found only 0 (1500 rows): a model cannot be fitted without both")


def test_outcome_event_value_not_found() -> None:
    df = clean()
    df["delirium"] = np.where(df["delirium"] == 1, "yes", "no")
    assert one(df).startswith("outcome column 'delirium': the event value 1 (outcome.event) does "
                              "not occur; found 'no' (")
    recipe = recipe_with(lambda r: r["outcome"].update(event="Yes"))
    prepared = prepare(df, recipe)  # text is matched without regard to case
    assert prepared.summary.events == int((df["delirium"] == "yes").sum())


def test_text_in_a_number_column() -> None:
    df = clean().astype({"age": object})
    df.loc[[3, 17], "age"] = ["7O", "n.a."]
    df.loc[40, "age"] = " 81 "  # spaces around a number are fine
    assert one(df) == ("column 'age': 2 values where a number is expected: row 5 '7O', row 19 "
                       "'n.a.' (header = row 1); correct them or leave the cells empty (missing)")


def test_decimal_comma_hint() -> None:
    df = clean().astype({"sodium": object})
    df.loc[9, "sodium"] = "139,5"
    assert "row 11 '139,5' (header = row 1); write decimals with a point (72.5)" in one(df)


def test_yes_no_values_outside_the_coding() -> None:
    df = clean().astype({"sensory": object})
    df.loc[[0, 1], "sensory"] = ["maybe", 2]
    assert one(df) == ("column 'sensory': 2 values neither yes nor no: row 2 'maybe', row 3 2 "
                       "(header = row 1); the recipe reads 1 as yes and 0 as no "
                       "(inputs[sensory].yes and .no): correct the data or extend those lists")


def test_yes_no_default_coding_reads_words() -> None:
    df = clean()
    df["sensory"] = np.where(df["sensory"] == 1, "Yes", "no")
    recipe = recipe_with(lambda r: [entry(r, "sensory").pop(k) for k in ("yes", "no")])
    prepared = prepare(df, recipe)
    np.testing.assert_array_equal(prepared.values["sensory"], clean()["sensory"].to_numpy())


def test_choice_values_not_in_the_recipe() -> None:
    df = clean()
    df.loc[[4, 5, 6], "asa"] = ["V", "iii", "V"]
    assert one(df) == ("column 'asa': 3 values not among the recipe's choices (I-II, III, IV): "
                       "row 6 'V', row 7 'iii', row 8 'V' (header = row 1); correct the data or "
                       "add the values to inputs[asa].choices (choices are matched exactly, case "
                       "included)")


def test_choices_read_from_the_data() -> None:
    def from_data(raw: dict[str, Any]) -> None:
        entry(raw, "asa").pop("choices")
        entry(raw, "asa")["transform"] = "levels"

    df = clean()
    prepared = prepare(df, recipe_with(from_data))
    assert prepared.choices["asa"] == ("I-II", "III", "IV")
    asa = next(t for t in prepared.terms if t.name == "asa")
    assert isinstance(asa.transform, Levels)
    assert asa.transform.reference == df["asa"].mode()[0]
    asa_input = next(d for d in prepared.inputs if d["id"] == "asa")
    assert [c["value"] for c in asa_input["choices"]] == ["I-II", "III", "IV"]
    df["asa"] = [f"code{i % 30}" for i in range(len(df))]
    assert one(df, recipe_with(from_data)).startswith(
        "column 'asa': 30 different values, too many for a choice input whose choices are read "
        "from the data (at most 20)")


def test_choice_that_never_occurs() -> None:
    df = clean()
    df.loc[df["asa"] == "IV", "asa"] = "III"
    assert one(df) == ("column 'asa': the choice 'IV' does not occur in the rows used; its effect "
                       "cannot be estimated: remove it from inputs[asa].choices or merge it with "
                       "another choice")


def test_constant_predictor() -> None:
    df = clean()
    df["alcohol"] = 0.0
    assert one(df) == ("column 'alcohol' has the same value (no) in every row used; its effect "
                       "cannot be estimated: remove the input from the recipe or use other data")


def test_near_constant_predictor_warning() -> None:
    df = clean()
    df["alcohol"] = 0.0
    df.loc[:9, "alcohol"] = 1.0
    prepared = prepare(df, recipe_with())
    assert ("column 'alcohol': one value (no) in 99.3% of the rows used (1490 of 1500); its "
            "effect will be estimated poorly") in prepared.warnings


def test_collinear_predictors_warning() -> None:
    df = clean()
    rng = np.random.default_rng(1)
    df["medicines"] = df["age"] / 4 + rng.normal(0, 0.3, len(df))
    prepared = prepare(df, recipe_with(lambda r: entry(r, "medicines").update(
        limits={"low": 0, "high": 40})))
    joined = "\n".join(prepared.warnings)
    assert re.search(r"columns 'age' and 'medicines' are strongly correlated \(r = 0\.9\d\d\); "
                     "the model will separate their effects poorly", joined)
    assert "variance inflation" not in joined  # the pair already names both


def test_variance_inflation_warning() -> None:
    df = clean()
    rng = np.random.default_rng(2)
    df["medicines"] = 2 * df["cog_errors"] + 6 * df["sensory"] + rng.normal(0, 0.3, len(df))
    df["medicines"] -= df["medicines"].min()
    prepared = prepare(df, recipe_with())
    joined = "\n".join(prepared.warnings)
    assert "strongly correlated" not in joined
    assert re.search(r"column 'medicines': variance inflation factor \d+(\.\d)? \(above 10\): "
                     "it is largely explained by the other inputs", joined)


def test_too_few_events() -> None:
    df = clean().head(200).copy()
    df["delirium"] = 0.0
    df.loc[:5, "delirium"] = 1.0
    assert one(df) == ("too few events to fit: 6 events and 194 non-events for 12 model "
                       "parameters; each outcome needs at least 13 rows (one more than the "
                       "parameters), and about 120 (10 per parameter) is a common minimum: use "
                       "fewer inputs, fewer knots or more data")


def test_few_events_per_parameter_warning() -> None:
    df = clean().head(400)
    prepared = prepare(df, recipe_with())
    events = int(df["delirium"].sum())
    assert f"{events / 12:.1f} events per model parameter ({events} events, 12 parameters), " \
        "fewer than 10" in "\n".join(prepared.warnings)
    assert any(w.startswith("sample size: 400 rows") for w in prepared.warnings)


def test_knots_cannot_be_placed() -> None:
    df = clean()
    df["cog_errors"] = np.where(df.index % 2 == 0, 1.0, 2.0)
    recipe = recipe_with(lambda r: entry(r, "cog_errors").update(transform="rcs"))
    assert one(df, recipe).startswith(
        "inputs[cog_errors].transform.knots: cannot place 4 knots from the data (x must have at "
        "least n_knots = 4 distinct values")


def test_blank_rows_are_skipped_and_counted() -> None:
    df = clean().astype(object)
    df.loc[7] = [None] * df.shape[1]
    prepared = prepare(df, recipe_with())
    assert prepared.summary.blank_rows == 1
    assert prepared.summary.rows_used == 1499
    assert 9 not in prepared.rows.tolist()
    assert "skipped 1 completely empty row" in prepared.warnings


def test_no_rows_left() -> None:
    df = clean().head(30).copy()
    df["creatinine"] = np.nan
    with pytest.raises(DataError, match=r"no rows left to fit: all 30 rows have a missing value"):
        prepare(df, recipe_with(), complete_case=True)


def test_interaction_terms() -> None:
    recipe = recipe_with(lambda r: r.update(interactions=[{"of": ["age", "sensory"]}]))
    prepared = prepare(clean(), recipe)
    assert prepared.n_parameters == 15
    X, names = prepared.design_matrix()
    assert names[-3:] == ["age*sensory", "age'*sensory", "age''*sensory"]
    np.testing.assert_array_equal(X[:, -3], X[:, 0] * X[:, 4])
    model = _model(prepared, np.zeros(15))
    np.testing.assert_allclose(calc_design_matrix(model, prepared.values), X, rtol=0, atol=0)


def test_example_recipe_loads_from_file() -> None:
    prepared = prepare(clean(), load_recipe(EXAMPLE))
    assert prepared.summary.rows_used == 1500
    assert prepared.warnings == ()


def test_cells_are_read_once_per_value_but_never_merged_across_types() -> None:
    from calcbuilder.evidence._convert import tokens

    assert tokens(pd.Series([True, 1, "1", None, " NA ", 1.5])) == [
        "true", 1.0, 1.0, None, None, 1.5]
    assert tokens(pd.Series(["b", " a ", "b", None, ""])) == ["b", "a", "b", None, None]
    assert tokens(pd.Series([0.0, np.nan, 2.0])) == [0.0, None, 2.0]


def test_duplicate_and_non_text_column_names() -> None:
    df = clean()
    twice = pd.concat([df, df[["age"]]], axis=1)
    assert one(twice) == ("the data have more than one column named 'age' (inputs[age].column); "
                          "column names must be unique")
    numbered = df.rename(columns={"age": 7})
    recipe = recipe_with(lambda r: entry(r, "age").update(column="7"))
    assert prepare(numbered, recipe).summary.rows_used == 1500


def test_named_level_missing_from_data_choices() -> None:
    def from_data(raw: dict[str, Any]) -> None:
        entry(raw, "asa").pop("choices")
        entry(raw, "asa")["transform"] = {"type": "indicator", "level": "V"}

    assert one(clean(), recipe_with(from_data)) == (
        "inputs[asa].transform.level: 'V' is not among the choices found in the data (I-II, III, "
        "IV)")



def test_number_with_almost_no_spread_warning() -> None:
    df = clean()
    df["sodium"] = 139.0 + np.arange(len(df)) * 1e-12
    prepared = prepare(df, recipe_with())
    assert any(w.startswith("column 'sodium': almost no spread (standard deviation 4.33e-10 "
                            "around 139)") for w in prepared.warnings)
