"""Hypothesis properties of the AUC, its DeLong SE, the paired test and the ROC points.

Each property is an identity of the Mann-Whitney definition of the AUC (Bamber 1975;
Hanley & McNeil 1982) or of DeLong et al. 1988, checked on generated data with ties.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from calcbuilder.stats import (
    IntervalNotEstimableWarning,
    auc,
    auc_ci,
    compare_auc,
    roc_points,
    youden,
)

ATOL = 1e-12
# Risks partly from a coarse grid so that ties between events and non-events are common.
risk_value = st.one_of(
    st.sampled_from([0.0, 0.1, 0.25, 0.5, 0.75, 1.0]),
    st.floats(0.0, 1.0, allow_nan=False),
)
fast = settings(max_examples=60, deadline=None)


@st.composite
def datasets(draw):
    """(y, risk, other_risk, integer weights, permutation); >= 2 events and 2 non-events."""
    n = draw(st.integers(4, 40))
    y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)), dtype=float)
    y[:2], y[2:4] = 1, 0
    risk = np.array(draw(st.lists(risk_value, min_size=n, max_size=n)))
    other = np.array(draw(st.lists(risk_value, min_size=n, max_size=n)))
    w = np.array(draw(st.lists(st.integers(0, 3), min_size=n, max_size=n)), dtype=float)
    w[0], w[2] = max(w[0], 1.0), max(w[2], 1.0)  # positive weight in each class
    perm = np.array(draw(st.permutations(range(n))))
    return y, risk, other, w, perm


def _pairs_auc(y, risk):
    """O(mn) Mann-Whitney count: 1 if the event is higher, 1/2 if tied."""
    x, z = risk[y == 1], risk[y == 0]
    return float(((x[:, None] > z) + 0.5 * (x[:, None] == z)).mean())


def _compare_quietly(y, a, b):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", IntervalNotEstimableWarning)
        return compare_auc(y, a, b)


def _ci_quietly(y, risk, method="logit"):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", IntervalNotEstimableWarning)
        return auc_ci(y, risk, method=method)


@fast
@given(datasets())
def test_row_order_does_not_matter(data):
    y, risk, other, w, p = data
    assert auc(y[p], risk[p], weights=w[p]) == pytest.approx(auc(y, risk, weights=w), abs=ATOL)
    a, b = _ci_quietly(y, risk), _ci_quietly(y[p], risk[p])
    assert (b.value, b.se) == pytest.approx((a.value, a.se), abs=ATOL)
    c, d = _compare_quietly(y, risk, other), _compare_quietly(y[p], risk[p], other[p])
    assert (d.difference, d.se) == pytest.approx((c.difference, c.se), abs=ATOL)


@fast
@given(datasets())
def test_unit_weights_equal_no_weights(data):
    y, risk, _, _, _ = data
    assert auc(y, risk, weights=np.ones(y.size)) == pytest.approx(auc(y, risk), abs=ATOL)
    assert auc(y, risk) == pytest.approx(_pairs_auc(y, risk), abs=ATOL)


@fast
@given(datasets())
def test_duplicated_row_equals_weight_two(data):
    y, risk, _, w, _ = data
    rows = np.repeat(np.arange(y.size), w.astype(int))
    assert auc(y, risk, weights=w) == pytest.approx(auc(y[rows], risk[rows]), abs=ATOL)
    doubled = np.ones(y.size)
    doubled[0] = 2.0
    with_copy = np.concatenate([[0], np.arange(y.size)])
    assert auc(y, risk, weights=doubled) == pytest.approx(
        auc(y[with_copy], risk[with_copy]), abs=ATOL
    )


@fast
@given(datasets())
def test_reversed_risk_gives_one_minus_auc(data):
    y, risk, _, w, _ = data
    flipped = 1.0 - risk
    assume(np.unique(flipped).size == np.unique(risk).size)  # rounding merged no values
    assert auc(y, flipped, weights=w) == pytest.approx(1 - auc(y, risk, weights=w), abs=ATOL)
    a, b = _ci_quietly(y, risk), _ci_quietly(y, flipped)
    assert b.se == pytest.approx(a.se, abs=ATOL)  # DeLong placements become 1 - V


@fast
@given(datasets())
def test_compare_with_itself_is_zero(data):
    y, risk, _, _, _ = data
    with pytest.warns(IntervalNotEstimableWarning):
        res = compare_auc(y, risk, risk)
    assert res.difference == 0.0
    assert res.se == 0.0
    assert math.isnan(res.p_value)


@fast
@given(datasets())
def test_compare_is_antisymmetric_and_consistent(data):
    y, risk, other, _, _ = data
    ab, ba = _compare_quietly(y, risk, other), _compare_quietly(y, other, risk)
    assert ba.difference == pytest.approx(-ab.difference, abs=ATOL)
    assert ba.se == pytest.approx(ab.se, abs=ATOL)
    assert ab.difference == pytest.approx(auc(y, risk) - auc(y, other), abs=ATOL)
    if ab.se > 0:
        assert 0 <= ab.p_value <= 1
        assert ab.low <= ab.difference <= ab.high


@fast
@given(datasets())
def test_auc_and_interval_in_unit_range(data):
    y, risk, _, w, _ = data
    assert 0 <= auc(y, risk, weights=w) <= 1
    for method in ("logit", "wald"):
        res = _ci_quietly(y, risk, method)
        assert res.value == pytest.approx(auc(y, risk), abs=ATOL)
        if res.se > 0:
            assert 0 <= res.low <= res.value <= res.high <= 1
        else:
            assert math.isnan(res.low)
            assert math.isnan(res.high)


@fast
@given(datasets())
def test_roc_points_trapezoid_area_is_auc(data):
    # Bamber 1975: the trapezoidal area under the empirical ROC curve is the Mann-Whitney AUC
    y, risk, _, _, _ = data
    pts = roc_points(y, risk)
    fpr, tpr = 1 - pts.specificity, pts.sensitivity
    assert np.all(np.diff(tpr) >= 0)
    assert np.all(np.diff(fpr) >= 0)
    assert (tpr[0], fpr[0], tpr[-1], fpr[-1]) == (0, 0, 1, 1)
    area = float(np.sum(np.diff(fpr) * (tpr[1:] + tpr[:-1]) / 2))
    assert area == pytest.approx(auc(y, risk), abs=ATOL)
    assert pts.thresholds.size == np.unique(risk).size + 1


@fast
@given(datasets())
def test_youden_is_largest_j_over_roc_points(data):
    y, risk, _, _, _ = data
    pts = roc_points(y, risk)
    j = pts.sensitivity + pts.specificity - 1
    res = youden(y, risk)
    assert res.j == pytest.approx(j.max(), abs=ATOL)
    assert res.threshold == pts.thresholds[j >= j.max() - ATOL].min()
