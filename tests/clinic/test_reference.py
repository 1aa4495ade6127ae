"""The reference patient used to show contributions (hand-checked on the spector fixture)."""

from pathlib import Path

import pytest

from calcbuilder.calc.document import load_calculator
from calcbuilder.calc.scoring import score
from calcbuilder.clinic.reference import reference_contributions, reference_values
from calcbuilder.clinic.session import ClinicSession

FIXTURE = Path(__file__).parents[1] / "calc" / "fixtures" / "format-v1.calc.json"


def test_reference_values_are_mid_developed_range_and_no():
    calc = load_calculator(FIXTURE).calculator
    # gpa developed 2.06-4.0, tuce 12-29 (fixture); psi is yes/no -> "no"
    assert reference_values(calc) == {"gpa": pytest.approx(3.03), "tuce": 20.5, "psi": False}


def test_contributions_sum_to_the_difference_from_the_reference_patient():
    loaded = load_calculator(FIXTURE)
    calc = loaded.calculator
    session = ClinicSession(loaded)
    for key, value in {"gpa": "2.5", "tuce": "20.5", "psi": True}.items():
        session.set_value(key, value)
    result = session.result()
    shown = {c.input_id: c.value for c in result.contributions}
    coef = {t.input: t.coefficients[0] for t in calc.model.terms}
    # linear terms: coefficient x (value - reference value), by hand
    assert shown["gpa"] == pytest.approx(coef["gpa"] * (2.5 - 3.03))
    assert shown["tuce"] == pytest.approx(0.0, abs=1e-12)
    assert shown["psi"] == pytest.approx(coef["psi"])
    here = score(calc.model, {"gpa": [2.5], "tuce": [20.5], "psi": [True]})
    ref = sum(reference_contributions(calc).values())
    assert sum(shown.values()) == pytest.approx(
        float(here.linear_predictor[0]) - calc.model.intercept - ref)
