"""calcbuilder fit: the fit equals statsmodels' fit of the same formula on datasets shipped in
PyPI packages (lifelines rossi, statsmodels anes96), the apparent evidence equals the
statistics core (and scikit-learn) on statsmodels' predictions, test vectors, provenance,
the synthetic demo cohort end to end, and every refusal's message."""

from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from lifelines.datasets import load_rossi
from sklearn.metrics import brier_score_loss, roc_auc_score

from calcbuilder.calc.document import load_calculator
from calcbuilder.demo.scenario import make_cohort
from calcbuilder.errors import CalcbuilderError
from calcbuilder.evidence import Recipe, load_recipe
from calcbuilder.evidence.fit import fit_calculator
from calcbuilder.stats import (
    auc_ci,
    brier,
    calibration_errors,
    calibration_intercept,
    calibration_slope,
    decision_curve,
    rcs_basis,
)

EXAMPLE = Path(__file__).resolve().parents[2] / "templates" / "recipe-example.toml"
TOL = 1e-6  # methods.md 0.3: iterative fits agree to about 1e-7

ABOUT = """
[about]
title = "Test calculator (public teaching data, not for clinical use)"
version = "1.0.0"
intended_use = "Tests calcbuilder only; not for clinical use."
population = "Rows of a dataset shipped in a Python package."
outcome = "The dataset's binary outcome."
horizon = "as in the dataset"
review_by = 2099-12-31
released = 2026-01-01

[decision]
default_threshold = 0.3
reasonable_range = [0.1, 0.5]
rationale = "test only"
"""

ROSSI_RECIPE = """
[outcome]
column = "arrest"
[[inputs]]
id = "fin"
label = "Financial aid"
kind = "yes_no"
yes = [1]
no = [0]
[[inputs]]
id = "age"
label = "Age at release"
kind = "number"
unit = "years"
limits = { low = 10, high = 90 }
transform = { type = "rcs", knots = 4 }
[[inputs]]
id = "race"
label = "Race"
kind = "yes_no"
yes = [1]
no = [0]
[[inputs]]
id = "wexp"
label = "Work experience"
kind = "yes_no"
yes = [1]
no = [0]
[[inputs]]
id = "mar"
label = "Married"
kind = "yes_no"
yes = [1]
no = [0]
[[inputs]]
id = "paro"
label = "Paroled"
kind = "yes_no"
yes = [1]
no = [0]
[[inputs]]
id = "prio"
label = "Prior convictions"
kind = "number"
limits = { low = 0, high = 100 }
""" + ABOUT


def write(tmp: Path, name: str, text: str) -> Path:
    path = tmp / name
    path.write_text(text, encoding="utf-8")
    return path


def rossi_files(tmp: Path, recipe: str = ROSSI_RECIPE) -> tuple[Path, Path, pd.DataFrame]:
    """lifelines' rossi data (432 rows, arrest within 52 weeks, no censoring before) as CSV."""
    df = load_rossi().drop(columns="week")
    data = tmp / "rossi.csv"
    df.to_csv(data, index=False)
    return data, write(tmp, "rossi.toml", recipe), df


def sm_fit(y: np.ndarray, X: np.ndarray) -> Any:
    return sm.GLM(y, sm.add_constant(X), family=sm.families.Binomial()).fit(tol=1e-12)


@pytest.fixture(scope="module")
def rossi(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    tmp = tmp_path_factory.mktemp("rossi")
    data, recipe, df = rossi_files(tmp)
    result = fit_calculator(data, recipe, band_boot=20, seed=7, output=tmp / "rossi.calc.json")
    knots = result.calculator.model.terms[1].transform.knots
    X = np.column_stack([df.fin, rcs_basis(df.age.to_numpy(float), knots), df.race, df.wexp,
                         df.mar, df.paro, df.prio]).astype(float)
    return {"result": result, "df": df, "sm": sm_fit(df.arrest.to_numpy(float), X),
            "X": X, "knots": knots, "tmp": tmp, "data": data, "recipe": recipe}


# --- the fit against statsmodels ---------------------------------------------------------------


def test_rossi_fit_equals_statsmodels_glm_on_our_rcs_basis(rossi: dict[str, Any]) -> None:
    # source: lifelines load_rossi; reference: statsmodels GLM(Binomial) on the same columns
    res, ref = rossi["result"], rossi["sm"]
    np.testing.assert_allclose(res.fit.coef, ref.params, atol=TOL, rtol=0)
    np.testing.assert_allclose(res.fit.cov, ref.cov_params(), atol=TOL, rtol=0)
    model = res.calculator.model
    assert model.intercept == pytest.approx(ref.params[0], abs=TOL)
    stored = [c for t in model.terms for c in t.coefficients]
    np.testing.assert_allclose(stored, ref.params[1:], atol=TOL, rtol=0)
    np.testing.assert_allclose(model.covariance, ref.cov_params(), atol=TOL, rtol=0)


def test_rossi_knots_are_harrells_quantiles_and_the_spline_space_matches_patsy(
        rossi: dict[str, Any]) -> None:
    # Harrell's 4-knot quantiles (methods.md 10.2) by numpy; the rcs space equals patsy's
    # natural cubic spline cr() with the same knots (methods.md 10.4): statsmodels fitted
    # through a patsy formula gives the same risks as our fit
    df = rossi["df"]
    k = rossi["knots"]
    np.testing.assert_allclose(k, np.quantile(df.age, [0.05, 0.35, 0.65, 0.95]), atol=1e-12)
    formula = (f"arrest ~ fin + cr(age, knots=[{k[1]}, {k[2]}], lower_bound={k[0]}, "
               f"upper_bound={k[3]}, constraints='center') + race + wexp + mar + paro + prio")
    ref = smf.glm(formula, df, family=sm.families.Binomial()).fit(tol=1e-12)
    np.testing.assert_allclose(rossi["result"].risk, ref.fittedvalues, atol=1e-7)
    assert rossi["result"].fit.loglik == pytest.approx(ref.llf, abs=TOL)


def test_choice_levels_equal_statsmodels_formula_on_anes96(tmp_path: Path) -> None:
    # source: statsmodels anes96; reference: statsmodels formula with treatment contrasts
    df = sm.datasets.anes96.load_pandas().data[["vote", "TVnews", "educ", "age", "income"]]
    df = df.astype(int)
    df.to_csv(tmp_path / "anes.csv", index=False)
    recipe = write(tmp_path, "anes.toml", """
[outcome]
column = "vote"
[[inputs]]
id = "tvnews"
column = "TVnews"
label = "TV news days"
kind = "number"
limits = { low = 0, high = 7 }
[[inputs]]
id = "educ"
label = "Education"
kind = "choice"
transform = { type = "levels", reference = "1" }
[[inputs]]
id = "age"
label = "Age"
kind = "number"
limits = { low = 18, high = 100 }
[[inputs]]
id = "income"
label = "Income group"
kind = "number"
limits = { low = 1, high = 24 }
""" + ABOUT)
    res = fit_calculator(tmp_path / "anes.csv", recipe, band_boot=0)
    ref = smf.glm("vote ~ TVnews + C(educ, Treatment(1)) + age + income", df,
                  family=sm.families.Binomial()).fit(tol=1e-12)
    names = {"(intercept)": "Intercept", "tvnews": "TVnews", "age": "age", "income": "income"}
    names |= {f"educ[{k}]": f"C(educ, Treatment(1))[T.{k}]" for k in range(2, 8)}
    ours = dict(zip(["(intercept)", *res.column_names], res.fit.coef, strict=True))
    order = [names[n] for n in ours]
    np.testing.assert_allclose(list(ours.values()), ref.params[order], atol=TOL, rtol=0)
    np.testing.assert_allclose(res.fit.cov, ref.cov_params().loc[order, order], atol=TOL)
    np.testing.assert_allclose(res.risk, ref.fittedvalues, atol=1e-7)


# --- apparent evidence against the statistics core on statsmodels' predictions -----------------


def test_apparent_metrics_equal_stats_core_on_statsmodels_predictions(
        rossi: dict[str, Any]) -> None:
    y = rossi["df"].arrest.to_numpy(float)
    p = rossi["sm"].fittedvalues  # statsmodels' predictions, not ours
    ev = rossi["result"].calculator.evidence[0]
    assert ev.kind == "apparent"
    m = ev.raw["metrics"]
    a = auc_ci(y, p)
    assert m["auc"]["value"] == pytest.approx(a.value, abs=1e-9)
    assert (m["auc"]["low"], m["auc"]["high"]) == pytest.approx((a.low, a.high), abs=1e-7)
    assert m["auc"]["value"] == pytest.approx(roc_auc_score(y, p), abs=1e-9)  # scikit-learn
    assert m["brier"]["value"] == pytest.approx(brier(y, p), abs=1e-9)
    assert m["brier"]["value"] == pytest.approx(brier_score_loss(y, p), abs=1e-9)  # sklearn
    slope, citl = calibration_slope(y, p), calibration_intercept(y, p)
    assert m["calibration_slope"]["value"] == pytest.approx(slope.value, abs=1e-6)
    assert m["calibration_intercept"]["value"] == pytest.approx(citl.value, abs=1e-6)
    # methods.md 3.3 [ANALYTIC]: apparent ML predictions have slope 1, CITL 0, O:E 1
    assert m["calibration_slope"]["value"] == pytest.approx(1.0, abs=1e-8)
    assert m["calibration_intercept"]["value"] == pytest.approx(0.0, abs=1e-8)
    assert m["oe_ratio"]["value"] == pytest.approx(1.0, abs=1e-9)
    assert m["ici"]["value"] == pytest.approx(calibration_errors(y, p).ici, abs=1e-6)
    dc = decision_curve(y, p)
    np.testing.assert_allclose(ev.raw["decision_curve"]["model"], dc.model, atol=1e-12)
    np.testing.assert_allclose(ev.raw["decision_curve"]["treat_all"], dc.treat_all, atol=1e-15)


def test_test_vectors_match_statsmodels_predictions_at_their_rows(rossi: dict[str, Any]) -> None:
    calc = rossi["result"].calculator
    assert len(calc.test_vectors) >= 5
    fitted = np.asarray(rossi["sm"].fittedvalues)
    for vec in calc.test_vectors:
        row = int(re.match(r"file row (\d+)", vec.name).group(1)) - 2  # header = row 1
        assert vec.risk == pytest.approx(fitted[row], abs=1e-7)  # statsmodels GLM.predict
        assert vec.values["age"] == rossi["df"].age[row]
        assert vec.values["fin"] is bool(rossi["df"].fin[row])
    lp = np.log(fitted / (1 - fitted))
    picked = sorted(lp[int(re.match(r"file row (\d+)", v.name).group(1)) - 2]
                    for v in calc.test_vectors)
    assert picked[0] == pytest.approx(lp.min())
    assert picked[-1] == pytest.approx(lp.max())


def test_provenance_is_recorded(rossi: dict[str, Any]) -> None:
    ev = load_calculator(rossi["tmp"] / "rossi.calc.json").calculator.evidence[0].raw
    sha = hashlib.sha256(rossi["data"].read_bytes()).hexdigest()
    assert ev["dataset"]["sha256"] == sha
    assert ev["dataset"]["n"] == 432
    assert ev["dataset"]["events"] == 114
    s = ev["settings"]
    assert s["outcome_column"] == "arrest"
    assert s["outcome_event"] == 1
    assert (s["rows_read"], s["rows_used"], s["rows_dropped"]) == (432, 432, 0)
    assert s["recipe_sha256"] == hashlib.sha256(rossi["recipe"].read_bytes()).hexdigest()
    assert s["calcbuilder_version"]
    assert s["band_seed"] == 7
    assert s["band_boot"] == 20
    again = Recipe.from_dict(json.loads(s["recipe"]))
    assert again.to_dict() == load_recipe(rossi["recipe"]).to_dict()


def test_firth_recipe_uses_the_penalised_fit(tmp_path: Path) -> None:
    data, recipe, _ = rossi_files(tmp_path, ROSSI_RECIPE + "\n[fit]\nfirth = true\n")
    res = fit_calculator(data, recipe, band_boot=0)
    from calcbuilder.stats import fit_logistic

    X, _ = res.prepared.design_matrix()
    np.testing.assert_allclose(res.fit.coef, fit_logistic(X, res.prepared.y, firth=True).coef,
                               atol=1e-12)
    assert res.calculator.evidence[0].raw["settings"]["fit_method"].startswith("Firth")


# --- the synthetic demo cohort end to end ------------------------------------------------------


def test_demo_cohort_end_to_end(tmp_path: Path) -> None:
    data = tmp_path / "development.csv"
    pd.DataFrame(make_cohort("development").clean).to_csv(data, index=False)
    out = tmp_path / "demo.calc.json"
    res = fit_calculator(data, EXAMPLE, band_boot=30, seed=1, output=out)
    loaded = load_calculator(out).calculator
    assert loaded.about.synthetic
    assert [s.id for s in loaded.inputs][:2] == ["age", "cog_errors"]
    assert loaded.evidence[0].raw["dataset"]["synthetic"] is True
    assert loaded.evidence[0].raw["dataset"]["name"] == "Demo Hospital A (synthetic)"
    assert res.prepared.summary.rows_used == 1500
    assert any("synthetic" in c.lower() for c in loaded.cautions)
    auc = loaded.evidence[0].metric("auc")["value"]
    assert 0.65 < auc < 0.85


# --- refusals: one message naming the problem and the fix, nothing written ---------------------


def _refused(tmp: Path, data: Path, recipe: Path, **kw: Any) -> str:
    out = tmp / "never.calc.json"
    with pytest.raises(CalcbuilderError) as caught:
        fit_calculator(data, recipe, band_boot=0, output=out, **kw)
    assert not out.exists()
    return str(caught.value)


def test_separation_is_explained_with_the_column_named(tmp_path: Path) -> None:
    data, recipe, df = rossi_files(tmp_path)
    df["paro"] = df["arrest"]  # a yes/no input that predicts the outcome perfectly
    df.to_csv(data, index=False)
    text = _refused(tmp_path, data, recipe)
    assert "separation" in text
    assert "'paro'" in text
    assert "fit.firth = true" in text
    res = fit_calculator(data, write(tmp_path, "f.toml", ROSSI_RECIPE + "\n[fit]\nfirth = true\n"),
                         band_boot=0)
    assert np.isfinite(res.fit.coef).all()


def test_missing_values_need_complete_case(tmp_path: Path) -> None:
    data, recipe, df = rossi_files(tmp_path)
    df = df.astype(object)
    df.loc[[3, 10], "prio"] = ""
    df.to_csv(data, index=False)
    text = _refused(tmp_path, data, recipe)
    assert "missing values" in text
    assert "--complete-case" in text
    assert "rows 5, 12" in text
    res = fit_calculator(data, recipe, complete_case=True, band_boot=0)
    ev = res.calculator.evidence[0].raw
    assert ev["dataset"]["excluded"] == 2
    assert ev["settings"]["rows_dropped"] == 2
    assert ev["dataset"]["n"] == 430


@pytest.mark.parametrize(("change", "expected"), [
    (lambda df: df.rename(columns={"arrest": "arrested"}),
     "names column 'arrest' (outcome.column) but the data have no such column"),
    (lambda df: df.assign(arrest=np.where(np.arange(len(df)) == 5, 2, df.arrest)),
     "outcome column 'arrest' must have two values; found 3"),
    (lambda df: df.astype(object).assign(prio=["7O" if i == 2 else v
                                              for i, v in enumerate(df.prio)]),
     "'7O'"),
    (lambda df: df.drop(columns="race"),
     "names column 'race' (inputs[race].column) but the data have no such column"),
    (lambda df: df.assign(arrest=np.where(np.arange(len(df)) < 5, 1, 0)),
     "too few events to fit: 5 events and 427 non-events for 9 model parameters"),
])
def test_bad_data_is_refused_with_its_message(tmp_path: Path, change: Any, expected: str) -> None:
    data, recipe, df = rossi_files(tmp_path)
    change(df).to_csv(data, index=False)
    assert expected in _refused(tmp_path, data, recipe)


def test_unreadable_data_and_recipe(tmp_path: Path) -> None:
    _, recipe, _ = rossi_files(tmp_path)
    assert "data file not found" in _refused(tmp_path, tmp_path / "nope.csv", recipe)
    (tmp_path / "old.xls").write_bytes(b"\xd0\xcf\x11\xe0")
    assert "old Excel format (.xls)" in _refused(tmp_path, tmp_path / "old.xls", recipe)
    data = tmp_path / "rossi.csv"
    assert "recipe file not found" in _refused(tmp_path, data, tmp_path / "nope.toml")
