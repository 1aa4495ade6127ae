"""Scoring API behaviour: bad values give one clear error naming the input, the rule and the
value; accepted value types; z multipliers; read-only results."""

from __future__ import annotations

import numpy as np
import pytest

from calcbuilder.calc.model import InputInfo, ModelSpec
from calcbuilder.calc.scoring import score, z_value
from calcbuilder.errors import CalcbuilderError, InputValueError
from tests.calc.test_scoring import build


def small_model() -> ModelSpec:
    raw = {
        "family": "logistic",
        "intercept": -1.0,
        "terms": [
            {"name": "age", "input": "age", "transform": {"type": "linear"},
             "coefficients": [0.1]},
            {"name": "sex", "input": "sex", "transform": {"type": "indicator"},
             "coefficients": [0.5]},
            {"name": "an", "input": "an", "transform": {"type": "indicator", "level": "b"},
             "coefficients": [0.3]},
        ],
    }  # fmt: skip
    kinds = {"age": InputInfo("number"), "sex": "yes_no", "an": ("choice", ("a", "b", "c"))}
    return build(raw, kinds)


def test_z_value_matches_known_quantiles():
    # standard normal quantiles (recalled from memory, standard tables): 0.95 -> 1.959963984540054,
    # 0.90 -> 1.6448536269514722, 0.99 -> 2.5758293035489004
    assert z_value(0.95) == 1.959963984540054
    assert z_value(0.90) == pytest.approx(1.6448536269514722, abs=1e-12)
    assert z_value(0.99) == pytest.approx(2.5758293035489004, abs=1e-12)
    with pytest.raises(CalcbuilderError) as info:
        z_value(1)
    assert str(info.value) == "level: must be strictly between 0 and 1 (got 1)"


GOOD = {"age": [1.0], "sex": [True], "an": ["a"]}


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"age": None}, "values: no value for input 'age', which the model reads"),
        (
            {"age": [1.0, 2.0]},
            "values['sex']: expected 2 values like the other inputs (got 1)",
        ),
        ({"age": [np.nan]}, "values['age']: expected a finite number (got nan at row 0)"),
        ({"age": ["70"]}, "values['age']: expected numbers (got values of type <U2)"),
        ({"age": [True]}, "values['age']: expected numbers (got values of type bool)"),
        ({"age": [[1.0]]}, "values['age']: expected a one-dimensional array (got shape (1, 1))"),
        ({"sex": [2]}, "values['sex']: expected true/false or 0/1 (got 2 at row 0)"),
        ({"sex": ["yes"]}, "values['sex']: expected true/false or 0/1 (got values of type <U3)"),
        (
            {"sex": np.array([1, None], dtype=object), "age": [1.0, 2.0], "an": ["a", "a"]},
            "values['sex']: expected true/false or 0/1 (got None)",
        ),
        (
            {"age": [1.0, 2.0], "sex": [1, 0], "an": ["a", "d"]},
            "values['an']: 'd' at row 1 is not a choice (choices: 'a', 'b', 'c')",
        ),
        ({"an": [2]}, "values['an']: expected choice values as text (got values of type int64)"),
    ],
)
def test_bad_values_give_one_clear_error(change, message):
    values = {k: v for k, v in (GOOD | change).items() if v is not None}
    with pytest.raises(InputValueError) as info:
        score(small_model(), values)
    assert str(info.value) == message


def test_object_arrays_and_extra_inputs_are_accepted():
    # [ANALYTIC] eta = -1 + 0.1 * 10 + 0.5 * 1 + 0.3 * 1 = 0.8
    values = {
        "age": np.array([10, 10.0], dtype=object),
        "sex": np.array([True, 1], dtype=object),
        "an": np.array(["b", "b"], dtype=object),
        "unused": np.array([1, 2]),
    }
    s = score(small_model(), values)
    np.testing.assert_allclose(s.eta, [0.8, 0.8], atol=1e-15)
    np.testing.assert_allclose(s.risk, 1 / (1 + np.exp(-0.8)), atol=1e-15)
    with pytest.raises(ValueError, match="read-only"):
        s.risk[0] = 0.5


def test_indicator_only_choice_input_still_refuses_unknown_values():
    # the input's full choice list is kept from the inputs section: 'c' is valid though no term
    # names it, 'x' is not
    s = score(small_model(), {"age": [0.0], "sex": [0], "an": ["c"]})
    assert s.eta[0] == pytest.approx(-1.0, abs=1e-15)
    with pytest.raises(InputValueError, match="'x' at row 0 is not a choice"):
        score(small_model(), {"age": [0.0], "sex": [0], "an": ["x"]})


PROBE = """
import json, sys
import numpy as np
import calcbuilder.calc.model, calcbuilder.calc.scoring
from calcbuilder.calc.model import ModelSpec
from calcbuilder.calc.problems import Problems
raw = {"family": "logistic", "intercept": 0.0, "terms": [{"name": "a", "input": "a",
       "transform": {"type": "log"}, "coefficients": [1.0]}], "covariance": [[1, 0], [0, 1]]}
model = ModelSpec.from_dict(raw, "model", Problems(), {"a": "number"})
calcbuilder.calc.scoring.score(model, {"a": np.ones(3)})
print(json.dumps(sorted(sys.modules)))
"""


def test_start_up_path_loads_no_heavy_library():
    # DEVELOPERS.md: the clinic-form path must not import pandas, statsmodels or scipy at start-up;
    # parsing and scoring a (non-spline) model for a few patients loads numpy and calc only
    import json
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True, check=True)
    roots = {m.split(".")[0] for m in json.loads(out.stdout)}
    assert not roots & {"scipy", "pandas", "statsmodels", "threadpoolctl", "matplotlib", "PySide6"}


def test_overflow_is_refused_not_shown_as_a_risk():
    # [ANALYTIC] (1e10) ** 40 = 1e400 overflows a double: the risk would print as 1.0 or NaN
    raw = {"family": "logistic", "intercept": 0.0, "terms": [{"name": "p", "input": "v",
           "transform": {"type": "power", "exponent": 40}, "coefficients": [1.0]}]}  # fmt: skip
    model = build(raw, {"v": "number"})
    assert score(model, {"v": [2.0]}).eta[0] == 2.0**40
    with pytest.raises(CalcbuilderError) as info:
        score(model, {"v": [2.0, 1e10]})
    assert str(info.value) == (
        "the linear predictor is not finite at row 1 (got inf): the coefficients or values are "
        "too large to compute with; check the model's units and coefficients"
    )
