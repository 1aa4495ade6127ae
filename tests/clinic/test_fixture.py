"""The hand-written test calculators load, and their evidence has the promised shape."""

from __future__ import annotations

import numpy as np
import pytest

from calcbuilder.calc.document import load_calculator
from calcbuilder.calc.signing import TrustState
from tests.fixtures_calc import make_calculator, write_calculator


@pytest.mark.parametrize("n_inputs", [1, 2, 3, 4, 5, 13, 25])
def test_fixture_loads_with_test_vectors_rescored(tmp_path, n_inputs):
    loaded = load_calculator(write_calculator(tmp_path, n_inputs=n_inputs))
    assert len(loaded.calculator.inputs) == n_inputs
    assert loaded.state is TrustState.UNSIGNED


def test_signed_fixture_is_validly_signed(tmp_path):
    loaded = load_calculator(write_calculator(tmp_path, signed=True))
    assert loaded.state is TrustState.UNKNOWN_SIGNER


def test_external_curve_beats_treat_all_only_in_part_of_the_range():
    dc = make_calculator()["evidence"][1]["decision_curve"]
    t, model, treat_all = (np.array(dc[k]) for k in ("thresholds", "model", "treat_all"))
    both = t[(model > treat_all) & (model > 0)]
    assert both.min() == pytest.approx(0.29)
    assert both.max() == pytest.approx(0.54)
    assert np.all(model[t <= 0.28] <= treat_all[t <= 0.28])
