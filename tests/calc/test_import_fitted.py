"""Fitted-result importer, and the four import routes agreeing with each other.

Outside references: statsmodels ``smf.glm(..., Binomial())`` and ``smf.logit`` fits on
the ``anes96``, ``spector`` and ``fair`` datasets shipped inside statsmodels; their
``predict`` (risks) and ``get_prediction(which="linear")`` (95% interval of the linear
predictor) are what the imported calculators must reproduce.
"""

from __future__ import annotations

import importlib.util
import tomllib
from pathlib import Path

import numpy as np
import pytest

from calcbuilder.calc.importers import (
    ModelImportError,
    fitted_document,
    import_fitted,
    import_pmml,
    import_table,
    parse_description,
)
from calcbuilder.calc.scoring import score

FIXTURES = Path(__file__).parent / "fixtures" / "import"


def _builder():
    spec = importlib.util.spec_from_file_location("build_import_fixtures",
                                                  FIXTURES / "build_import_fixtures.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


builder = _builder()
BASE = tomllib.loads((FIXTURES / "anes96.inputs.toml").read_text("utf-8"))


@pytest.fixture(scope="module")
def fit():
    return builder.fit()


def anes_values(data):
    return {"popul": data["popul"].to_numpy(), "age": data["age"].to_numpy(),
            "self_lr": data["selfLR"].to_numpy(), "tv_news": data["TVnews"].to_numpy(),
            "educ": np.array([str(int(v)) for v in data["educ"]], dtype=object)}


def describe(inputs, source="i.toml"):
    """A description with the fixture's about/decision/cautions, these inputs, no vectors."""
    raw = {k: BASE[k] for k in ("about", "decision", "cautions")}
    return parse_description({**raw, "inputs": inputs}, source)


def number(id_, column=None, low=-1e6, high=1e6):
    out = {"id": id_, "label": id_.upper(), "kind": "number", "limits": {"low": low, "high": high}}
    return out | ({"column": column} if column else {})


def choice(id_, values, column=None):
    out = {"id": id_, "label": id_.upper(), "kind": "choice",
           "choices": [{"value": v, "label": f"{id_} {v}"} for v in values]}
    return out | ({"column": column} if column else {})


def yes_no(id_, column=None):
    return {"id": id_, "label": id_.upper(), "kind": "yes_no"} | (
        {"column": column} if column else {})


def _refused(result, desc):
    with pytest.raises(ModelImportError) as info:
        fitted_document(result, desc)
    return info.value


# -- anes96: the four routes ------------------------------------------------------------------

def test_four_routes_score_identically(fit, tmp_path):
    # reference: statsmodels GLM(Binomial).predict on all 944 rows of anes96
    toml = FIXTURES / "anes96.inputs.toml"
    for name, text in (("c.csv", builder.coefficient_csv(fit)),
                       ("r.pmml", builder.regression_pmml(fit)),
                       ("g.pmml", builder.general_pmml(fit))):
        (tmp_path / name).write_text(text, "utf-8")
    calcs = {"table": import_table(tmp_path / "c.csv", toml),
             "regression": import_pmml(tmp_path / "r.pmml", toml),
             "general": import_pmml(tmp_path / "g.pmml", toml),
             "fitted": import_fitted(fit, toml, tmp_path / "f.calc.json")}
    data = builder.anes96()
    expected = fit.predict(data).to_numpy()
    risks = {k: score(c.model, anes_values(data)).risk for k, c in calcs.items()}
    for key, risk in risks.items():
        np.testing.assert_allclose(risk, expected, rtol=0, atol=1e-12, err_msg=key)
        np.testing.assert_allclose(risk, risks["fitted"], rtol=0, atol=1e-12, err_msg=key)
    assert (tmp_path / "f.calc.json").exists()


def test_fitted_interval_matches_statsmodels(fit, tmp_path):
    # reference: statsmodels get_prediction(which="linear").conf_int() (normal, 95%)
    calc = import_fitted(fit, FIXTURES / "anes96.inputs.toml")
    data = builder.anes96()
    ours = score(calc.model, anes_values(data))
    ci = np.asarray(fit.get_prediction(data, which="linear").conf_int(alpha=0.05))
    expit = 1 / (1 + np.exp(-ci))
    np.testing.assert_allclose(ours.low, expit[:, 0], rtol=0, atol=1e-10)
    np.testing.assert_allclose(ours.high, expit[:, 1], rtol=0, atol=1e-10)
    general = import_pmml(FIXTURES / "anes96.general.pmml", FIXTURES / "anes96.inputs.toml")
    theirs = score(general.model, anes_values(data))
    np.testing.assert_allclose(theirs.low, ours.low, rtol=0, atol=1e-10)


def test_training_rows_become_test_vectors(fit):
    doc = fitted_document(fit, describe(BASE["inputs"]), n_vectors=6)
    vectors = doc["test_vectors"]
    assert [v["name"] for v in vectors] == [f"training data row {i}" for i in
                                            (0, 189, 377, 566, 754, 943)]
    data = builder.anes96()
    assert vectors[1]["values"] == {"popul": float(data["popul"][189]),
                                    "age": float(data["age"][189]),
                                    "self_lr": float(data["selfLR"][189]),
                                    "tv_news": float(data["TVnews"][189]),
                                    "educ": str(int(data["educ"][189]))}
    assert vectors[1]["risk"] == float(fit.predict(data.iloc[[189]]).iloc[0])


# -- other datasets and codings ---------------------------------------------------------------

def test_spector_logit_with_yes_no_and_product():
    import statsmodels.api as sm
    import statsmodels.formula.api as smf

    data = sm.datasets.spector.load_pandas().data
    result = smf.logit("GRADE ~ GPA + TUCE + PSI + GPA:PSI", data=data).fit(disp=0, tol=1e-12)
    desc = describe([number("gpa", "GPA", 0, 4), number("tuce", "TUCE", 0, 40),
                     yes_no("psi", "PSI")])
    calc = import_fitted(result, desc)
    assert calc.model.terms[2].transform.type_name == "indicator"
    values = {"gpa": data["GPA"].to_numpy(), "tuce": data["TUCE"].to_numpy(),
              "psi": data["PSI"].to_numpy() == 1}
    np.testing.assert_allclose(score(calc.model, values).risk, result.predict(data),
                               rtol=0, atol=1e-12)


def _anes_coded():
    data = builder.anes96()
    data["ed3"] = np.where(data["educ"] <= 3, "low", np.where(data["educ"] <= 5, "mid", "high"))
    data["older"] = data["age"] > 60
    return data


def test_text_and_bool_categories_with_a_categorical_product():
    import statsmodels.api as sm
    import statsmodels.formula.api as smf

    data = _anes_coded()
    formula = ("vote ~ C(ed3, Treatment(reference='mid')) * selfLR + older + "
               "np.log(popul - -0.5)")
    result = smf.glm(formula, data=data, family=sm.families.Binomial()).fit(tol=1e-12)
    desc = describe([choice("ed3", ["low", "mid", "high"]), number("self_lr", "selfLR", 1, 7),
                     yes_no("older"), number("popul", low=0, high=1e5)])
    calc = import_fitted(result, desc)
    terms = {t.name: t for t in calc.model.terms}
    levels = terms["C(ed3, Treatment(reference='mid'))"].transform
    assert (levels.reference, levels.levels) == ("mid", ("high", "low"))
    assert terms["np.log(popul - -0.5)"].transform.shift == 0.5
    values = {"ed3": data["ed3"].to_numpy(dtype=object), "self_lr": data["selfLR"].to_numpy(),
              "older": data["older"].to_numpy(), "popul": data["popul"].to_numpy()}
    np.testing.assert_allclose(score(calc.model, values).risk, result.predict(data),
                               rtol=0, atol=1e-12)


def test_fair_logit_with_log1p_and_powers():
    import statsmodels.api as sm
    import statsmodels.formula.api as smf

    data = sm.datasets.fair.load_pandas().data
    data["affair"] = (data["affairs"] > 0).astype(float)
    formula = ("affair ~ C(rate_marriage) + np.log(yrs_married) + np.sqrt(age) + "
               "I(religious ** 2) + np.log1p(children)")
    result = smf.logit(formula, data=data).fit(disp=0, tol=1e-12)
    desc = describe([choice("rate_marriage", ["1", "2", "3", "4", "5"]),
                     number("yrs_married", low=0.1, high=60), number("age", low=16, high=99),
                     number("religious", low=1, high=4), number("children", low=0, high=20)])
    calc = import_fitted(result, desc)
    values = {"rate_marriage": np.array([str(int(v)) for v in data["rate_marriage"]],
                                        dtype=object),
              **{k: data[k].to_numpy() for k in ("yrs_married", "age", "religious",
                                                 "children")}}
    np.testing.assert_allclose(score(calc.model, values).risk, result.predict(data),
                               rtol=0, atol=1e-12)


def test_training_data_with_repeated_index_labels():
    import pandas as pd
    import statsmodels.api as sm
    import statsmodels.formula.api as smf

    data = sm.datasets.spector.load_pandas().data
    twice = pd.concat([data, data])  # every index label appears twice
    result = smf.logit("GRADE ~ GPA + PSI", data=twice).fit(disp=0)
    desc = describe([number("gpa", "GPA", 0, 4), yes_no("psi", "PSI")])
    names = [v.name for v in import_fitted(result, desc).test_vectors]
    assert names == [f"training data row {i}" for i in (0, 9, 18, 27, 36, 45, 54, 63)]


# -- refusals ---------------------------------------------------------------------------------

def _anes_fit(formula, family=None, **kwargs):
    import statsmodels.api as sm
    import statsmodels.formula.api as smf

    family = family or sm.families.Binomial()
    return smf.glm(formula, data=_anes_coded(), family=family, **kwargs).fit()


ANES = describe([number("age", low=18, high=120), number("self_lr", "selfLR", 1, 7),
                 choice("ed3", ["low", "mid", "high"]), yes_no("older"),
                 number("popul", low=0, high=1e5), number("tv_news", "TVnews", 0, 7)])
SPLINE = ("spline bases from patsy (cr, bs, cc, te) cannot be carried over: calcbuilder's rcs "
          "transform builds its own basis (Harrell's restricted cubic spline, knots stored in "
          "the file). Refit with transform = {type = \"rcs\", knots = [...]} in a fitting "
          "recipe (calcbuilder fit), or on columns from calcbuilder.stats.splines.rcs_basis, "
          "and import that")


@pytest.mark.parametrize("spline", ["cr(age, df=4, constraints='center')", "bs(age, df=4)"])
def test_patsy_splines_are_refused(spline):
    exc = _refused(_anes_fit(f"vote ~ {spline} + selfLR"), ANES)
    assert exc.problems == [f"term {spline!r}: {SPLINE}"]
    assert exc.heading == "the fitted model cannot be imported: 1 problem"


def test_no_intercept():
    exc = _refused(_anes_fit("vote ~ age + selfLR - 1"), ANES)
    assert exc.problems == ["formula: the model has no intercept (a formula with '- 1' or "
                            "'0 +'); a calculator's logistic model needs one"]


def test_terms_that_cannot_be_represented():
    formula = "vote ~ np.exp(selfLR) + C(ed3, Sum) + age:TVnews + age:selfLR:TVnews + selfLR"
    exc = _refused(_anes_fit(formula), ANES)
    forms = ("x, np.log(x), np.log(x + c), np.log1p(x), np.sqrt(x), I(x ** k), C(x) or a "
             "text/bool column with treatment contrast, and products a:b of these")
    assert exc.problems == [  # in patsy's term order
        "term 'C(ed3, Sum)': 'C(ed3, Sum)' is not coded with a treatment contrast against one "
        "reference level (full-rank or other contrasts cannot be represented)",
        f"term 'np.exp(selfLR)': 'np.exp(selfLR)' is not one of the forms calcbuilder can "
        f"represent: {forms}",
        "term 'age:TVnews': 'age' must also be a term of its own, coded the same way (a "
        "calculator product combines two terms)",
        "term 'age:selfLR:TVnews': products of more than two factors, or interactions without "
        "their main effects, cannot be represented"]


def test_other_families_links_and_offsets():
    import statsmodels.api as sm

    probit = sm.families.Binomial(link=sm.families.links.Probit())
    exc = _refused(_anes_fit("vote ~ age", probit), ANES)
    assert str(exc) == ("the fitted GLM has family Binomial with link Probit; calcbuilder "
                        "imports logistic regression (Binomial, logit link)")
    import statsmodels.formula.api as smf

    discrete = smf.probit("vote ~ age", data=_anes_coded()).fit(disp=0)
    assert str(_refused(discrete, ANES)) == (
        "cannot import Probit results; calcbuilder imports smf.logit(...).fit() and "
        "smf.glm(..., family=Binomial()).fit() results")
    offset = _anes_fit("vote ~ age", offset=np.full(944, 0.1))
    assert str(_refused(offset, ANES)) == ("the model was fitted with an offset; a calculator "
                                           "has no offset, so its risks would differ")
    arrays = sm.GLM(_anes_coded()["vote"], sm.add_constant(_anes_coded()[["age"]]),
                    family=sm.families.Binomial()).fit()
    assert str(_refused(arrays, ANES)).startswith("the result was not fitted from a patsy "
                                                  "formula")


def test_yes_no_input_on_a_column_with_other_values():
    desc = describe([yes_no("self_lr", "selfLR"), number("age", low=0, high=200)])
    exc = _refused(_anes_fit("vote ~ age + selfLR"), desc)
    assert exc.problems == ["term 'selfLR': yes/no input 'self_lr' reads column 'selfLR', which "
                            "holds 2.0, 3.0, 4.0 besides 0 and 1"]


def test_a_fit_that_did_not_converge():
    result = _anes_fit("vote ~ age + selfLR")
    result.converged = False
    assert str(_refused(result, ANES)) == (
        "the fit did not converge, so its coefficients are not the model's estimates; refit "
        "until it converges (more iterations, rescaled inputs) and import that")


def test_columns_and_categories_must_match_the_inputs():
    exc = _refused(_anes_fit("vote ~ age + income + C(educ)"), ANES)
    assert exc.problems == [
        "term 'C(educ)': column 'educ' is not an input of i.toml: add an [[inputs]] entry with "
        "id or column = 'educ'",
        "term 'income': column 'income' is not an input of i.toml: add an [[inputs]] entry "
        "with id or column = 'income'"]
    small = describe([choice("ed3", ["low", "mid"]), number("age", low=0, high=200)])
    exc = _refused(_anes_fit("vote ~ age + ed3"), small)
    assert exc.problems == ["term 'ed3': the categories of 'ed3' (high, low, mid) differ from "
                            "the choices of input 'ed3' (low, mid)"]


def test_nothing_is_written_on_failure(tmp_path):
    with pytest.raises(ModelImportError):
        import_fitted(_anes_fit("vote ~ bs(age, df=3)"), ANES, tmp_path / "o.json")
    assert not (tmp_path / "o.json").exists()
