"""Hypothesis properties of the calibration measures and the lowess calibration curve.

Each property is an identity of the definitions (frequency weights, permutation
invariance, bounds), checked on generated data.
"""

from __future__ import annotations

from functools import partial

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from calcbuilder.stats import (
    ConvergenceError,
    SeparationError,
    brier,
    calibration_curve,
    calibration_errors,
    calibration_intercept,
    calibration_slope,
    cox_snell_r2,
    hosmer_lemeshow,
    nagelkerke_r2,
    scaled_brier,
    spiegelhalter_z,
)

WEIGHTED = [
    brier,
    scaled_brier,
    cox_snell_r2,
    nagelkerke_r2,
    calibration_intercept,
    calibration_slope,
]
# risks strictly inside (0, 1), partly from a coarse grid so that ties are common
risk_value = st.one_of(
    st.sampled_from([0.05, 0.1, 0.25, 0.5, 0.75, 0.9]),
    st.floats(0.001, 0.999, allow_nan=False),
)


@st.composite
def datasets(draw, min_size=4):
    """(y with both classes, risk, integer weights >= 0 with both classes weighted, perm)."""
    n = draw(st.integers(min_size, 30))
    y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)), dtype=float)
    y[:2] = [1.0, 0.0]
    risk = np.array(draw(st.lists(risk_value, min_size=n, max_size=n)))
    if risk[0] == risk[1]:  # two distinct weighted risks, so the slope is defined
        risk[1] = 0.5 if risk[0] != 0.5 else 0.25
    w = np.array(draw(st.lists(st.integers(0, 3), min_size=n, max_size=n)), dtype=float)
    w[:2] = np.maximum(w[:2], 1.0)
    perm = np.array(draw(st.permutations(range(n))))
    return y, risk, w, perm


fast = settings(max_examples=40, deadline=None)


def as_tuple(result):
    """A float, or the numeric fields of a result dataclass, as a flat float array."""
    if isinstance(result, float):
        return np.array([result])
    return np.concatenate(
        [np.atleast_1d(np.asarray(v, dtype=float)) for v in vars(result).values()]
    )


def call(fn, *args, **kwargs):
    """Run fn; reject the example if the logistic slope does not exist (separation)."""
    try:
        return as_tuple(fn(*args, **kwargs))
    except (SeparationError, ConvergenceError):
        assume(False)
        raise  # pragma: no cover - assume(False) never returns


@fast
@pytest.mark.parametrize("fn", WEIGHTED)
@given(data=datasets())
def test_row_order_does_not_matter_weighted(fn, data):
    y, risk, w, perm = data
    a = call(fn, y, risk, weights=w)
    b = call(fn, y[perm], risk[perm], weights=w[perm])
    np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-10)


@fast
@pytest.mark.parametrize(
    "fn",
    [calibration_curve, calibration_errors, spiegelhalter_z, partial(hosmer_lemeshow, groups=3)],
)
@given(data=datasets())
def test_row_order_does_not_matter_unweighted(fn, data):
    y, risk, _, perm = data
    np.testing.assert_allclose(
        as_tuple(fn(y, risk)), as_tuple(fn(y[perm], risk[perm])), rtol=1e-9, atol=1e-12
    )


@fast
@pytest.mark.parametrize("fn", WEIGHTED)
@given(data=datasets())
def test_unit_weights_equal_no_weights(fn, data):
    y, risk, *_ = data
    a = call(fn, y, risk)
    np.testing.assert_allclose(call(fn, y, risk, weights=np.ones(y.size)), a, rtol=0, atol=0)


@fast
@pytest.mark.parametrize("fn", WEIGHTED)
@given(data=datasets(), pick=st.integers(0, 29))
def test_duplicated_row_equals_weight_two(fn, data, pick):
    y, risk, *_ = data
    i = pick % y.size
    w = np.ones(y.size)
    w[i] = 2.0
    dup = np.r_[np.arange(y.size), i]
    a = call(fn, y, risk, weights=w)
    b = call(fn, y[dup], risk[dup])
    np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-10)


@fast
@given(data=datasets(min_size=2))
def test_bounds(data):
    y, risk, w, _ = data
    assert 0.0 <= brier(y, risk, weights=w) <= 1.0
    assert scaled_brier(y, risk, weights=w) <= 1.0
    assert cox_snell_r2(y, risk, weights=w) <= nagelkerke_r2(y, risk, weights=w) or (
        cox_snell_r2(y, risk, weights=w) <= 0
    )
    assert nagelkerke_r2(y, risk, weights=w) <= 1.0
    err = calibration_errors(y, risk)
    assert 0.0 <= err.e50 <= err.e90 <= err.emax
    assert err.ici <= err.emax
    curve = calibration_curve(y, risk)
    assert np.all(np.diff(curve.risk) > 0)
    assert 0.0 <= spiegelhalter_z(y, risk).p_value <= 1.0


@fast
@given(data=datasets(min_size=3), groups=st.integers(3, 10))
def test_hosmer_lemeshow_bounds(data, groups):
    y, risk, *_ = data
    assume(groups <= y.size)
    res = hosmer_lemeshow(y, risk, groups=groups)
    assert res.statistic >= 0.0
    assert res.df == groups - 2
    assert 0.0 <= res.p_value <= 1.0
