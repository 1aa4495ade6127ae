"""Net benefit and decision curves: exact fractions, a brute-force oracle and scikit-learn."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

from calcbuilder.stats import (
    DecisionCurve,
    StatsInputError,
    decision_curve,
    net_benefit,
    net_benefit_treat_all,
)

# methods.md §3.7 / §4.4 toy set [ANALYTIC]
TOY_P = [0.05, 0.10, 0.15, 0.20, 0.30, 0.40, 0.55, 0.70, 0.80, 0.90]
TOY_Y = [0, 0, 0, 1, 0, 0, 1, 0, 1, 1]
# Literal thresholds, so that a risk of 0.10 ties exactly with the threshold 0.1.
TOY_T = [0.1, 0.2, 0.3, 0.5]


def oracle(y, risk, thresholds, weights=None):
    """Slow, obviously correct: one boolean mask per threshold, treat if risk >= t."""
    y, risk = np.asarray(y, float), np.asarray(risk, float)
    w = np.ones_like(y) if weights is None else np.asarray(weights, float)
    n = w.sum()
    out = []
    for t in thresholds:
        treat = risk >= t
        tp = w[treat & (y == 1)].sum()
        fp = w[treat & (y == 0)].sum()
        out.append(tp / n - fp / n * t / (1 - t))
    return np.array(out)


# --- methods.md §4.4 exact fractions [ANALYTIC] -----------------------------------


def test_toy_net_benefit_exact_fractions():
    # methods.md §4.4, rule p >= pt: 31/90, 13/40, 6/35, 1/5
    expected = [Fraction(31, 90), Fraction(13, 40), Fraction(6, 35), Fraction(1, 5)]
    got = net_benefit(TOY_Y, TOY_P, TOY_T)
    np.testing.assert_allclose(got, [float(e) for e in expected], rtol=0, atol=1e-12)


def test_toy_tie_rule_is_at_or_above():
    # methods.md §4.4: with the p > pt rule NB at 1/5 would be 9/40, not 13/40.
    got = net_benefit(TOY_Y, TOY_P, 0.2)
    assert abs(got[0] - 13 / 40) < 1e-12
    assert abs(got[0] - 9 / 40) > 0.09


def test_toy_decision_curve_exact_fractions():
    # methods.md §4.4: treat-all 1/3, 1/4, 1/7, -1/5; avoided per 100: 10, 30, 20/3, 40
    dc = decision_curve(TOY_Y, TOY_P, TOY_T)
    assert isinstance(dc, DecisionCurve)
    np.testing.assert_array_equal(dc.thresholds, TOY_T)
    np.testing.assert_allclose(dc.model, [31 / 90, 13 / 40, 6 / 35, 1 / 5], rtol=0, atol=1e-12)
    np.testing.assert_allclose(dc.treat_all, [1 / 3, 1 / 4, 1 / 7, -1 / 5], rtol=0, atol=1e-12)
    np.testing.assert_array_equal(dc.treat_none, np.zeros(4))
    np.testing.assert_allclose(dc.interventions_avoided, [10, 30, 20 / 3, 40], rtol=0, atol=1e-10)


def test_default_thresholds_are_the_decimal_literals():
    dc = decision_curve(TOY_Y, TOY_P)
    assert dc.thresholds.shape == (99,)
    assert dc.thresholds[6] == 0.07  # literal, not 7 * 0.01 = 0.07000000000000001
    assert all(dc.thresholds[k - 1] == float(f"0.{k:02d}") for k in range(1, 100))
    # the default grid also reproduces §4.4 where it contains the §4.4 thresholds
    idx = [9, 19, 29, 49]
    np.testing.assert_allclose(dc.model[idx], [31 / 90, 13 / 40, 6 / 35, 1 / 5], atol=1e-12)


# --- brute-force oracle on random data with ties at thresholds ---------------------


@pytest.mark.parametrize("weighted", [False, True])
def test_matches_mask_loop_oracle_with_ties(weighted):
    # Oracle: the per-threshold mask loop above (obviously correct by construction).
    rng = np.random.default_rng(20240611)
    n = 3000
    risk = rng.integers(0, 101, n) / 100  # k/100: exactly equal to default thresholds
    y = (rng.random(n) < risk).astype(int)
    w = rng.integers(0, 4, n).astype(float) if weighted else None
    thresholds = np.arange(1, 100) / 100
    assert np.isin(risk, thresholds).mean() > 0.9  # ties really occur
    dc = decision_curve(y, risk, weights=w)
    expected = oracle(y, risk, thresholds, w)
    np.testing.assert_allclose(dc.model, expected, rtol=0, atol=1e-12)
    np.testing.assert_allclose(net_benefit(y, risk, thresholds, weights=w), expected, atol=1e-12)


def test_unsorted_and_repeated_thresholds_keep_their_order():
    rng = np.random.default_rng(7)
    risk = rng.random(500)
    y = (rng.random(500) < risk).astype(int)
    t = np.array([0.7, 0.05, 0.3, 0.3, 0.99, 0.01])
    dc = decision_curve(y, risk, t)
    np.testing.assert_array_equal(dc.thresholds, t)
    np.testing.assert_allclose(dc.model, oracle(y, risk, t), atol=1e-12)


# --- treat-all closed form and extreme models [ANALYTIC] --------------------------


def test_treat_all_closed_form():
    # methods.md §4.1: NB_treat_all = prev - (1 - prev) t/(1-t)
    rng = np.random.default_rng(3)
    y = rng.integers(0, 2, 400)
    w = rng.random(400) * 3
    t = np.arange(1, 100) / 100
    prev = w[y == 1].sum() / w.sum()
    expected = prev - (1 - prev) * t / (1 - t)
    np.testing.assert_allclose(net_benefit_treat_all(y, t, weights=w), expected, atol=1e-12)
    risk = rng.random(400)
    np.testing.assert_allclose(decision_curve(y, risk, weights=w).treat_all, expected, atol=1e-12)


def test_model_treating_everyone_equals_treat_all_and_nobody_equals_zero():
    # [ANALYTIC] risk 1 for all -> everyone treated at every t < 1; risk 0 -> nobody.
    y = [0, 1, 1, 0, 0, 1, 0]
    t = [0.01, 0.4, 0.99]
    np.testing.assert_allclose(
        net_benefit(y, np.ones(7), t), net_benefit_treat_all(y, t), atol=1e-15
    )
    np.testing.assert_array_equal(net_benefit(y, np.zeros(7), t), np.zeros(3))


def test_single_class_is_allowed_and_follows_the_formula():
    # Net benefit needs no events to be defined (documented): all non-events,
    # NB = -FP/n * t/(1-t) [ANALYTIC].
    dc = decision_curve([0, 0, 0, 0], [0.1, 0.2, 0.6, 0.9], [0.5])
    assert dc.model[0] == pytest.approx(-0.5)
    assert dc.treat_all[0] == pytest.approx(-1.0)
    assert dc.interventions_avoided[0] == pytest.approx(50.0)


# --- outside reference: scikit-learn confusion_matrix on a shipped dataset -------


@pytest.mark.parametrize("weighted", [False, True])
def test_against_sklearn_confusion_matrix_breast_cancer(weighted):
    # Reference: sklearn.metrics.confusion_matrix (with sample_weight) on
    # sklearn.datasets.load_breast_cancer, risks from a fitted LogisticRegression.
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.metrics import confusion_matrix

    data = load_breast_cancer()
    X = data.data[:, [0, 1]]  # mean radius, mean texture: risks spread over (0, 1)
    y = 1 - data.target  # event = malignant
    fit = LogisticRegression(C=1e6, max_iter=1000).fit(X, y)
    risk = np.round(fit.predict_proba(X)[:, 1], 2)  # ties at the default thresholds
    w = np.random.default_rng(11).integers(1, 4, y.size).astype(float) if weighted else None
    dc = decision_curve(y, risk, weights=w)
    n = y.size if w is None else w.sum()
    for t, nb in zip(dc.thresholds, dc.model, strict=True):
        _tn, fp, _fn, tp = confusion_matrix(
            y, (risk >= t).astype(int), labels=[0, 1], sample_weight=w
        ).ravel()
        assert nb == pytest.approx(tp / n - fp / n * t / (1 - t), abs=1e-12)
    # treat-all from the sklearn counts of events and non-events
    _tn, fp, _fn, tp = confusion_matrix(y, np.ones_like(y), labels=[0, 1], sample_weight=w).ravel()
    t = dc.thresholds
    np.testing.assert_allclose(dc.treat_all, tp / n - fp / n * t / (1 - t), atol=1e-12)


# --- bad input ----------------------------------------------------------------------


@pytest.mark.parametrize("bad", [0.0, 1.0, -0.2, 1.5, float("nan")])
def test_thresholds_outside_open_unit_interval(bad):
    with pytest.raises(StatsInputError, match=r"thresholds must lie strictly inside \(0, 1\)"):
        decision_curve(TOY_Y, TOY_P, [0.2, bad])
    with pytest.raises(StatsInputError, match="thresholds"):
        net_benefit(TOY_Y, TOY_P, bad)
    with pytest.raises(StatsInputError, match="thresholds"):
        net_benefit_treat_all(TOY_Y, [bad])


def test_lengths_differ():
    with pytest.raises(StatsInputError, match=r"risk must have the same length as y \(10\); got 9"):
        decision_curve(TOY_Y, TOY_P[:-1])
    with pytest.raises(StatsInputError, match=r"weights must have the same length as y"):
        net_benefit(TOY_Y, TOY_P, 0.2, weights=[1.0] * 3)


def test_bad_outcome_risk_and_weights():
    with pytest.raises(StatsInputError, match=r"y must be coded 0/1.*2\.0\)? at row 1"):
        net_benefit([0, 2], [0.1, 0.2], 0.5)
    with pytest.raises(StatsInputError, match=r"risk must lie in \[0, 1\]; got 1\.3 at row 1"):
        decision_curve([0, 1], [0.1, 1.3])
    with pytest.raises(StatsInputError, match=r"risk must be finite"):
        decision_curve([0, 1], [0.1, float("nan")])
    with pytest.raises(StatsInputError, match=r"weights must be finite and non-negative; got -1"):
        decision_curve([0, 1], [0.1, 0.3], weights=[1, -1])
    with pytest.raises(StatsInputError, match=r"weights must have a positive total"):
        net_benefit_treat_all([0, 1], [0.1], weights=[0, 0])
    with pytest.raises(StatsInputError, match=r"y must not be empty"):
        decision_curve([], [])
