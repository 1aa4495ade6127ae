"""Hypothesis properties of net benefit, decision curves, NRI and IDI.

Each property is an analytic identity of the definitions (Vickers & Elkin 2006;
Pencina et al. 2008, 2011), checked on generated data.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from calcbuilder.stats import (
    continuous_nri,
    decision_curve,
    idi,
    net_benefit,
    net_benefit_treat_all,
    nri,
)

ATOL = 1e-12
THRESHOLDS = np.arange(1, 100) / 100
# Risks drawn partly from the threshold grid itself, so ties at thresholds are common.
risk_value = st.one_of(
    st.sampled_from([0.0, 1.0, *THRESHOLDS.tolist()]),
    st.floats(0.0, 1.0, allow_nan=False),
)


@st.composite
def datasets(draw, min_size=2, both_classes=False, min_each=1):
    """(y, risk, other_risk, integer weights, permutation) of one common length."""
    n = draw(st.integers(max(min_size, 2 * min_each if both_classes else 0), 40))
    y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)))
    if both_classes:
        y[:min_each] = 1
        y[min_each : 2 * min_each] = 0
    risk = np.array(draw(st.lists(risk_value, min_size=n, max_size=n)))
    other = np.array(draw(st.lists(risk_value, min_size=n, max_size=n)))
    w = np.array(draw(st.lists(st.integers(0, 3), min_size=n, max_size=n)), dtype=float)
    w[0] = max(w[0], 1.0)
    perm = np.array(draw(st.permutations(range(n))))
    return y, risk, other, w, perm


thresholds = st.lists(st.sampled_from(THRESHOLDS.tolist()), min_size=1, max_size=8)
fast = settings(max_examples=50, deadline=None)


def _curve_arrays(dc):
    return np.concatenate([dc.model, dc.treat_all, dc.interventions_avoided])


# --- net benefit and decision curve ------------------------------------------------


@fast
@given(datasets(), thresholds)
def test_row_order_does_not_matter(data, t):
    y, risk, _, w, perm = data
    a = decision_curve(y, risk, t, weights=w)
    b = decision_curve(y[perm], risk[perm], t, weights=w[perm])
    np.testing.assert_allclose(_curve_arrays(a), _curve_arrays(b), rtol=1e-9, atol=ATOL)


@fast
@given(datasets(), thresholds)
def test_unit_weights_equal_no_weights(data, t):
    y, risk, *_ = data
    ones = np.ones(y.size)
    np.testing.assert_allclose(
        net_benefit(y, risk, t, weights=ones), net_benefit(y, risk, t), atol=ATOL
    )
    a, b = decision_curve(y, risk, t, weights=ones), decision_curve(y, risk, t)
    np.testing.assert_allclose(_curve_arrays(a), _curve_arrays(b), rtol=1e-9, atol=ATOL)


@fast
@given(datasets(), thresholds, st.data())
def test_duplicated_row_equals_weight_two(data, t, pick):
    y, risk, *_ = data
    i = pick.draw(st.integers(0, y.size - 1))
    w = np.ones(y.size)
    w[i] = 2.0
    yd, rd = np.append(y, y[i]), np.append(risk, risk[i])
    np.testing.assert_allclose(
        net_benefit(y, risk, t, weights=w), net_benefit(yd, rd, t), atol=ATOL
    )
    a, b = decision_curve(y, risk, t, weights=w), decision_curve(yd, rd, t)
    np.testing.assert_allclose(_curve_arrays(a), _curve_arrays(b), rtol=1e-9, atol=ATOL)


@fast
@given(datasets(), thresholds)
def test_treat_all_matches_closed_form(data, t):
    # Vickers & Elkin 2006: NB_all = prev - (1 - prev) t/(1-t)
    y, risk, _, w, _ = data
    ta = np.asarray(t)
    prev = w[y == 1].sum() / w.sum()
    expected = prev - (1 - prev) * ta / (1 - ta)
    np.testing.assert_allclose(net_benefit_treat_all(y, t, weights=w), expected, atol=ATOL)
    np.testing.assert_allclose(decision_curve(y, risk, t, weights=w).treat_all, expected, atol=ATOL)


@fast
@given(datasets(), thresholds)
def test_model_net_benefit_never_exceeds_prevalence(data, t):
    # NB = TP/n - FP/n * odds <= TP/n <= prev
    y, risk, _, w, _ = data
    prev = w[y == 1].sum() / w.sum()
    assert np.all(net_benefit(y, risk, t, weights=w) <= prev + ATOL)


@fast
@given(datasets())
def test_default_curve_interventions_avoided_identity(data):
    y, risk, _, w, _ = data
    dc = decision_curve(y, risk, weights=w)
    odds = dc.thresholds / (1 - dc.thresholds)
    np.testing.assert_allclose(
        dc.interventions_avoided * odds / 100, dc.model - dc.treat_all, atol=1e-10
    )


# --- reclassification ---------------------------------------------------------------


@fast
@given(datasets(both_classes=True, min_each=2))
def test_model_against_itself_is_zero(data):
    y, risk, *_ = data
    for r in (nri(y, risk, risk, [0.1, 0.2, 0.5]), continuous_nri(y, risk, risk)):
        assert (r.events, r.nonevents, r.total, r.se, r.z, r.p_value) == (0, 0, 0, 0, 0, 1)
    i = idi(y, risk, risk)
    assert (i.value, i.se, i.p_value) == (0, 0, 1)


@fast
@given(datasets(both_classes=True, min_each=2))
def test_reclassification_row_order_and_duplicates(data):
    y, old, new, _, perm = data
    cuts = [0.2, 0.5]
    w = np.ones(y.size)
    w[0] = 2.0
    yd, od, nd = np.append(y, y[0]), np.append(old, old[0]), np.append(new, new[0])
    for fn in (
        lambda *a, **k: nri(*a, cuts, **k),
        continuous_nri,
        idi,
    ):
        base = fn(y, old, new)
        shuffled = fn(y[perm], old[perm], new[perm])
        weighted, duplicated = fn(y, old, new, weights=w), fn(yd, od, nd)
        np.testing.assert_allclose(_fields(base), _fields(shuffled), rtol=1e-9, atol=ATOL)
        np.testing.assert_allclose(_fields(weighted), _fields(duplicated), rtol=1e-9, atol=ATOL)


def _fields(result):
    return np.array(list(vars(result).values()), dtype=float)
