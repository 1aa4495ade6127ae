"""Coefficient-table importer: statsmodels fits on shipped datasets reproduced, refusals exact.

Outside reference: statsmodels GLM(Binomial) fits on the ``anes96`` dataset shipped
inside statsmodels; its ``predict`` is the risk every import must reproduce
(to 1e-12 on all 944 rows).
"""

from __future__ import annotations

import contextlib
import importlib.util
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calcbuilder.calc.importers import (
    ModelImportError,
    import_table,
    load_description,
    parse_coefficient_table,
    parse_description,
    table_document,
)
from calcbuilder.calc.importers._common import validate
from calcbuilder.calc.scoring import score

FIXTURES = Path(__file__).parent / "fixtures" / "import"
SRC = "coefs.csv"


def _builder():
    spec = importlib.util.spec_from_file_location("build_import_fixtures",
                                                  FIXTURES / "build_import_fixtures.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


builder = _builder()


@pytest.fixture(scope="module")
def fit():
    return builder.fit()


@pytest.fixture(scope="module")
def desc():
    return load_description(FIXTURES / "anes96.inputs.toml")


def anes_values(data):
    """Every anes96 row as calculator values (canonical units, educ as choice text)."""
    return {"popul": data["popul"].to_numpy(), "age": data["age"].to_numpy(),
            "self_lr": data["selfLR"].to_numpy(), "tv_news": data["TVnews"].to_numpy(),
            "educ": np.array([str(int(v)) for v in data["educ"]], dtype=object)}


def _document(text, desc, source=SRC):
    return table_document(parse_coefficient_table(text, source), desc, source)


def _refusal(text, desc, source=SRC):
    with pytest.raises(ModelImportError) as info:
        _document(text, desc, source)
    return info.value


# -- reproduces statsmodels --------------------------------------------------------------------

def test_table_reproduces_statsmodels_on_every_row(fit, tmp_path):
    # reference: statsmodels GLM(Binomial).predict on the shipped anes96 data
    (tmp_path / "c.csv").write_text(builder.coefficient_csv(fit), "utf-8")
    (tmp_path / "i.toml").write_text(builder.inputs_toml(fit), "utf-8")
    calc = import_table(tmp_path / "c.csv", tmp_path / "i.toml", tmp_path / "out.calc.json")
    data = builder.anes96()
    ours = score(calc.model, anes_values(data)).risk
    np.testing.assert_allclose(ours, fit.predict(data), rtol=0, atol=1e-12)
    assert (tmp_path / "out.calc.json").exists()
    assert calc.model.covariance is None
    assert any("without an uncertainty interval" in c for c in calc.cautions)


def test_committed_fixture_matches_a_fresh_fit(fit, desc):
    rows = parse_coefficient_table((FIXTURES / "anes96.coefficients.csv").read_text("utf-8"),
                                   SRC)
    calc = validate(table_document(rows, desc, SRC), SRC)
    data = builder.anes96()
    np.testing.assert_allclose(score(calc.model, anes_values(data)).risk, fit.predict(data),
                               rtol=0, atol=1e-12)


def _spline_fit():
    """statsmodels GLM on columns built by calcbuilder's rcs basis, hinges and a product."""
    import statsmodels.api as sm

    from calcbuilder.stats.splines import rcs_basis

    data = builder.anes96()

    def design(age, self_lr, tv, educ):
        spline = np.asarray(rcs_basis(np.asarray(age, float), np.array([25, 40, 55, 75.0])))
        levels = [np.asarray(educ) == k for k in (1, 2, 4, 5, 6, 7)]  # reference 3
        return np.column_stack([np.ones(len(age)), spline, self_lr,
                                spline * np.asarray(self_lr, float)[:, None], tv,
                                np.maximum(np.asarray(tv, float) - 3, 0), *levels]).astype(float)

    X = design(data["age"], data["selfLR"], data["TVnews"], data["educ"])
    result = sm.GLM(data["vote"], X, family=sm.families.Binomial()).fit(tol=1e-12)
    return result, design


def test_multi_column_terms_rcs_hinges_levels_and_product(desc):
    result, design = _spline_fit()
    b = [repr(float(v)) for v in result.params]
    names = ["(Intercept)", "age_spline[1]", "age_spline[2]", "age_spline[3]", "selfLR",
             "age_spline:selfLR[1]", "age_spline:selfLR[2]", "age_spline:selfLR[3]",
             "tv[1]", "tv[2]", *(f"educ[{k}]" for k in (1, 2, 4, 5, 6, 7))]
    order = [9, 3, 0, 5, 1, 7, 2, 4, 6, 8, 15, 10, 14, 11, 13, 12]  # rows in any order
    text = "term,coefficient\n" + "".join(f"{names[i]},{b[i]}\n" for i in order)
    raw = tomllib.loads((FIXTURES / "anes96.inputs.toml").read_text("utf-8"))
    raw["terms"] = [
        {"name": "age_spline", "input": "age",
         "transform": {"type": "rcs", "knots": [25, 40, 55, 75]}},
        {"name": "age_spline:selfLR", "transform": {"type": "product",
                                                    "of": ["age_spline", "selfLR"]}},
        {"name": "tv", "input": "tv_news", "transform": {"type": "hinges", "knots": [3]}},
        {"name": "educ", "input": "educ", "transform": {"type": "levels", "reference": "3"}},
    ]
    vec = builder.vector_frame()
    risks = result.predict(design(vec["age"], vec["selfLR"], vec["TVnews"], vec["educ"]))
    for entry, risk in zip(raw["test_vectors"], risks, strict=True):
        entry["risk"] = float(risk)  # the original software's risk for this model
    calc = validate(table_document(parse_coefficient_table(text, SRC),
                                   parse_description(raw, "i.toml"), SRC), SRC)
    data = builder.anes96()
    ours = score(calc.model, anes_values(data)).risk
    reference = result.predict(design(data["age"], data["selfLR"], data["TVnews"], data["educ"]))
    np.testing.assert_allclose(ours, reference, rtol=0, atol=1e-12)
    levels = next(t for t in calc.model.terms if t.name == "educ").transform
    assert (levels.reference, levels.levels) == ("3", ("1", "2", "4", "5", "6", "7"))


def test_standard_errors_are_not_turned_into_a_covariance(fit, desc):
    rows = parse_coefficient_table(builder.coefficient_csv(fit), SRC)
    assert all(r.std_error and r.std_error > 0 for r in rows)
    model = table_document(rows, desc, SRC)["model"]
    assert "covariance" not in model


# -- refusals ---------------------------------------------------------------------------------

GOOD = (FIXTURES / "anes96.coefficients.csv").read_text("utf-8")


def test_term_no_toml_term_explains(desc):
    exc = _refusal(GOOD + "bmi,0.25,0.1\n", desc)
    assert exc.problems == [
        "coefs.csv row 15 (term 'bmi'): term 'bmi' is not explained: no [[terms]] entry of "
        f"{desc.source} names it and no input has it as its column or id"]
    assert exc.heading == "coefficient table coefs.csv cannot be imported: 1 problem"


def test_missing_intercept(desc):
    text = "\n".join(line for line in GOOD.splitlines() if not line.startswith("(Intercept)"))
    exc = _refusal(text, desc)
    assert exc.problems == ["coefs.csv: has no intercept row; name it (Intercept), intercept "
                            "or const"]


def test_two_intercepts(desc):
    exc = _refusal(GOOD + "const,1.0,\n", desc)
    assert exc.problems == ["coefs.csv row 15 (term 'const'): a second intercept row (the "
                            "first is row 2)"]


def test_text_in_the_coefficient_column(desc):
    lines = GOOD.splitlines()
    row = next(i for i, line in enumerate(lines) if line.startswith("age,"))
    lines[row] = "age,about -0.02,0.01"
    exc = _refusal("\n".join(lines), desc)
    assert exc.problems == [f"coefs.csv row {row + 1} (term 'age'): coefficient 'about -0.02' "
                            "is not a number (write a plain decimal such as -0.0183 or 1.2e-3)"]


@pytest.mark.parametrize("cell", ["abc", "1,5", "nan", "inf", "1_000", "0x10", ""])
def test_coefficients_that_are_not_plain_numbers(cell, desc):
    text = f'term,coefficient\n(Intercept),0.5\nage,"{cell}"\n'
    exc = _refusal(text, desc)
    assert exc.problems == [f"coefs.csv row 3 (term 'age'): coefficient {cell!r} is not a "
                            "number (write a plain decimal such as -0.0183 or 1.2e-3)"]
    assert exc.heading == "coefficient table coefs.csv cannot be used: 1 problem"


def test_duplicated_term(desc):
    exc = _refusal("term,coefficient\n(Intercept),0.5\nage,0.1\nselfLR,0.2\nage,0.3\n", desc)
    assert exc.problems == ["coefs.csv row 5: term 'age' appears twice (first at row 3)"]


def test_bad_header_and_semicolons(desc):
    with pytest.raises(ModelImportError) as info:
        parse_coefficient_table("name,estimate\nage,1\n", SRC)
    assert str(info.value) == ("coefs.csv row 1: the header must name the columns term, "
                               "coefficient and optionally std_error, in this order (got "
                               "name, estimate)")
    with pytest.raises(ModelImportError, match=r"separated by commas \(found ';'\)"):
        parse_coefficient_table("term;coefficient\nage;1\n", SRC)


def test_row_with_wrong_cell_count_and_bad_std_error(desc):
    exc = _refusal("term,coefficient,std_error\n(Intercept),0.5,0.1\nage,0.1\n"
                   "selfLR,0.2,-1\n", desc)
    assert exc.problems == ["coefs.csv row 3: has 2 cells; the header has 3",
                            "coefs.csv row 4 (term 'selfLR'): std_error must be positive "
                            "(got '-1')"]


def test_levels_rows_must_match_the_choices(desc):
    text = GOOD.replace("educ[7]", "educ[8]")
    exc = _refusal(text, desc)
    assert exc.problems == [
        "coefs.csv row 3 (term 'educ[2]'): term 'educ' (default for input 'educ'): educ[8]: "
        "not a choice of input 'educ' (choices: 1, 2, 3, 4, 5, 6, 7)"]
    text = "\n".join(line for line in GOOD.splitlines() if not line.startswith("educ[7]"))
    exc = _refusal(text, desc)
    assert exc.problems == [
        "coefs.csv row 3 (term 'educ[2]'): term 'educ' (default for input 'educ'): cannot "
        "tell the reference level of input 'educ': the choices without a row are ['1', '7']; "
        "exactly one is needed (or set it in a [[terms]] entry)"]


def test_bracket_rows_that_do_not_match_their_term(desc):
    raw = tomllib.loads((FIXTURES / "anes96.inputs.toml").read_text("utf-8"))
    raw["terms"].append({"name": "age_spline", "input": "age",
                         "transform": {"type": "rcs", "knots": [25, 40, 55, 75]}})
    text = GOOD + "age_spline[1],0.1,\nage_spline[2],0.2,\nage_spline[4],0.3,\n"
    exc = _refusal(text, parse_description(raw, "i.toml"))
    assert exc.problems == [
        "coefs.csv row 17 (term 'age_spline[4]'): does not match term 'age_spline' (rcs), "
        "whose rows are age_spline[1], age_spline[2], age_spline[3]",
        "coefs.csv: term 'age_spline' (rcs, terms[3]) has no row age_spline[3]"]


def test_toml_term_without_rows(desc):
    raw = tomllib.loads((FIXTURES / "anes96.inputs.toml").read_text("utf-8"))
    raw["terms"].append({"name": "unused", "input": "age", "transform": {"type": "linear"}})
    exc = _refusal(GOOD, parse_description(raw, "i.toml"))
    assert exc.problems == ["terms[3]: term 'unused' has no row in coefs.csv"]


def test_unknown_keys_in_the_description_are_refused_with_their_path():
    raw = tomllib.loads((FIXTURES / "anes96.inputs.toml").read_text("utf-8"))
    raw["inputs"][1]["unti"] = "years"
    raw["terms"][0]["transform"]["shfit"] = 1
    raw["about"]["titel"] = "x"
    raw["inputs"][0]["limits"]["lo"] = 1
    with pytest.raises(ModelImportError) as info:
        parse_description(raw, "i.toml")
    assert info.value.problems == [
        "about.titel: unknown key 'titel' (did you mean 'title'?); allowed here: title, version, "
        "intended_use, population, outcome, horizon, exclusions, authors, organisation, "
        "contact, released, review_by, references, synthetic",
        "inputs[0].limits.lo: unknown key 'lo' (did you mean 'low'?); allowed here: low, high",
        "inputs[1].unti: unknown key 'unti' (did you mean 'unit'?); allowed here: id, column, "
        "label, kind, unit, alt_units, limits, developed, decimals, required, group, help, "
        "choices",
        "terms[0].transform.shfit: unknown key 'shfit' (did you mean 'shift'?); allowed here: "
        "type, shift"]


def test_too_few_test_vectors(desc):
    raw = tomllib.loads((FIXTURES / "anes96.inputs.toml").read_text("utf-8"))
    del raw["test_vectors"][2:]
    exc = _refusal(GOOD, parse_description(raw, "i.toml"))
    assert exc.problems == ["i.toml: needs at least 5 [[test_vectors]], each with the risk the "
                            "original analysis software computed for its values (got 2); they "
                            "prove the import reproduces the model"]


def test_default_product_needs_one_column_terms(desc):
    exc = _refusal(GOOD + "educ:age,0.1,\n", desc)
    assert exc.problems == [
        "coefs.csv row 15 (term 'educ:age'): term 'educ:age' is not explained: no [[terms]] "
        f"entry of {desc.source} names it and no input has it as its column or id; a:b is a "
        "product by default only when a and b are one-column terms of the table"]


def test_unreadable_descriptions(tmp_path):
    (tmp_path / "a.toml").write_text("[about]\ntitle = \n", "utf-8")
    with pytest.raises(ModelImportError, match=r"^inputs description .*a.toml is not valid "
                       r"TOML: Invalid value \(at line 2, column 9\)$"):
        load_description(tmp_path / "a.toml")
    (tmp_path / "b.toml").write_bytes(b"title = '\xe9'\n")
    with pytest.raises(ModelImportError, match=r"is not UTF-8 text \(byte 9\); save it as UTF-8"):
        load_description(tmp_path / "b.toml")


def test_mistyped_coefficient_is_caught_by_the_test_vectors(desc):
    text = GOOD.replace("\nage,-", "\nage,-1", 1)  # a digit slipped in
    rows = parse_coefficient_table(text, SRC)
    with pytest.raises(ModelImportError) as info:
        validate(table_document(rows, desc, SRC), SRC)
    assert info.value.heading.startswith("coefs.csv: the imported calculator is refused")
    assert "test_vectors[0] ('respondent 1'): the file states risk" in info.value.problems[0]


def test_nothing_is_written_when_the_import_fails(tmp_path):
    (tmp_path / "c.csv").write_text(GOOD + "bmi,1,\n", "utf-8")
    with pytest.raises(ModelImportError):
        import_table(tmp_path / "c.csv", FIXTURES / "anes96.inputs.toml", tmp_path / "o.json")
    assert list(tmp_path.iterdir()) == [tmp_path / "c.csv"]


# -- never a traceback ------------------------------------------------------------------------

DESC = load_description(FIXTURES / "anes96.inputs.toml")


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_damaged_tables_are_refused_cleanly(data):
    # replace a random piece of a valid table with random text: valid, or a clean refusal
    start = data.draw(st.integers(0, len(GOOD) - 1))
    length = data.draw(st.integers(0, 30))
    insert = data.draw(st.text(alphabet=st.sampled_from(list(',"[]:()\n\r;0123456789.e-ax ')),
                               max_size=10))
    with contextlib.suppress(ModelImportError):
        validate(_document(GOOD[:start] + insert + GOOD[start + length:], DESC), SRC)
