"""Tests of calcbuilder.stats.discrimination against oracles, libraries and published values.

Sources are named beside each check. ``methods.md`` is /work/shared/methods.md
(hand-derived [ANALYTIC] values).
"""

import math
import warnings

import numpy as np
import pytest
from scipy.special import expit, logit
from scipy.stats import mannwhitneyu, norm
from sklearn.metrics import roc_auc_score, roc_curve
from statsmodels.datasets import spector
from statsmodels.stats.nonparametric import rank_compare_2indep

from calcbuilder.stats import (
    IntervalNotEstimableWarning,
    StatsInputError,
    auc,
    auc_ci,
    classify,
    compare_auc,
    roc_points,
    youden,
)
from calcbuilder.stats.discrimination import _delong_components, _delong_covariance

# ----------------------------------------------------------------------------- oracles


def pair_matrix(y, risk):
    """psi(event i, non-event j): 1 if higher, 1/2 if tied, 0 if lower (O(mn))."""
    y, risk = np.asarray(y), np.asarray(risk, dtype=float)
    x, z = risk[y == 1], risk[y == 0]
    return (x[:, None] > z[None, :]) + 0.5 * (x[:, None] == z[None, :])


def oracle_auc(y, risk, weights=None):
    y = np.asarray(y)
    w = np.ones(y.size) if weights is None else np.asarray(weights, dtype=float)
    psi = pair_matrix(y, risk)
    w1, w0 = w[y == 1], w[y == 0]
    return float(w1 @ psi @ w0 / (w1.sum() * w0.sum()))


def oracle_delong(y, scores):
    """DeLong 1988 placements and covariance (m-1, n-1 denominators) by brute force."""
    v10, v01 = [], []
    for s in scores:
        psi = pair_matrix(y, s)
        v10.append(psi.mean(axis=1))
        v01.append(psi.mean(axis=0))
    v10, v01 = np.array(v10), np.array(v01)
    m, n = v10.shape[1], v01.shape[1]
    cov = np.cov(v10, ddof=1).reshape(len(scores), -1) / m
    cov = cov + np.cov(v01, ddof=1).reshape(len(scores), -1) / n
    return v10, v01, cov


def tied_sample(rng, n, grid=8):
    y = (rng.random(n) < 0.4).astype(float)
    y[:2], y[2:4] = 1, 0
    return y, rng.integers(0, grid + 1, n) / grid


# ----------------------------------------------------------------------------- AUC


def test_doc_example_by_hand():
    # [ANALYTIC] events 0.4 and 0.2 vs non-events 0.1, 0.2: pairs 1 + 1 + 1 + 1/2 -> 3.5/4
    assert auc([0, 1, 0, 1], [0.1, 0.4, 0.2, 0.2]) == 0.875


def test_docstring_example_runs():
    import doctest

    from calcbuilder.stats import discrimination

    result = doctest.testmod(discrimination)
    assert result.attempted >= 1
    assert result.failed == 0


def test_auc_matches_sklearn_on_breast_cancer_features(cancer):
    y, X = cancer
    tied = 0
    for j in range(X.shape[1]):
        tied += X[:, j].size - np.unique(X[:, j]).size
        # sklearn.metrics.roc_auc_score, load_breast_cancer single features
        assert auc(y, X[:, j]) == pytest.approx(roc_auc_score(y, X[:, j]), abs=1e-12)
    assert tied > 500  # the features do carry many ties


def test_weighted_auc_matches_sklearn_sample_weight(cancer):
    y, X = cancer
    w = np.random.default_rng(7).integers(0, 4, y.size)  # includes zero weights
    for j in (0, 6, 7, 20, 27):
        # sklearn.metrics.roc_auc_score(sample_weight=...) with integer weights
        expected = roc_auc_score(y, X[:, j], sample_weight=w)
        assert auc(y, X[:, j], weights=w) == pytest.approx(expected, abs=1e-12)
        # a weight-k row equals k copies (frequency weights): oracle on expanded rows
        rows = np.repeat(np.arange(y.size), w)
        assert auc(y, X[:, j], weights=w) == pytest.approx(auc(y[rows], X[rows, j]), abs=1e-12)


def test_auc_and_delong_match_pair_counting_oracle_on_tied_data():
    rng = np.random.default_rng(2024)
    for n in (5, 17, 60, 200):
        y, r1 = tied_sample(rng, n)
        r2 = np.round(np.clip(r1 + rng.normal(0, 0.2, n), 0, 1), 1)
        r3 = rng.random(n)
        w = rng.random(n) * 3
        # slow O(mn) pair counting written in this test
        assert auc(y, r1) == pytest.approx(oracle_auc(y, r1), abs=1e-12)
        assert auc(y, r2, weights=w) == pytest.approx(oracle_auc(y, r2, w), abs=1e-12)
        v10, v01, cov = oracle_delong(y, [r1, r2, r3])
        comp = _delong_components(y, np.vstack([r1, r2, r3]))
        np.testing.assert_allclose(comp.v10, v10, atol=1e-12)
        np.testing.assert_allclose(comp.v01, v01, atol=1e-12)
        np.testing.assert_allclose(_delong_covariance(comp), cov, atol=1e-12)
        assert auc_ci(y, r1).se == pytest.approx(math.sqrt(cov[0, 0]), abs=1e-12)
        res = compare_auc(y, r1, r2)
        assert res.se == pytest.approx(math.sqrt(cov[0, 0] + cov[1, 1] - 2 * cov[0, 1]), abs=1e-12)


def test_auc_is_mann_whitney_u_over_mn():
    rng = np.random.default_rng(3)
    y, r = tied_sample(rng, 150, grid=5)
    u = mannwhitneyu(r[y == 1], r[y == 0]).statistic  # scipy.stats.mannwhitneyu, midranks
    assert auc(y, r) == pytest.approx(u / ((y == 1).sum() * (y == 0).sum()), abs=1e-12)


# ----------------------------------------------------------------------------- published


# Hanley & McNeil 1982 (Radiology 143:29-36) CT ratings, 1 = definitely normal ...
# 5 = definitely abnormal. Table recalled from memory: normal 33/6/6/11/2 (58),
# abnormal 3/2/2/11/33 (51). Printed area 0.893.
HM_NORMAL = (33, 6, 6, 11, 2)
HM_ABNORMAL = (3, 2, 2, 11, 33)


def hm_data():
    ratings = np.arange(1, 6) / 5  # a monotone map of the ratings onto [0, 1]
    risk = np.concatenate([np.repeat(ratings, HM_NORMAL), np.repeat(ratings, HM_ABNORMAL)])
    y = np.concatenate([np.zeros(sum(HM_NORMAL)), np.ones(sum(HM_ABNORMAL))])
    return y, risk


def test_hanley_mcneil_1982_ct_ratings():
    y, risk = hm_data()
    # Hanley & McNeil 1982, printed area 0.893 (table recalled from memory)
    assert abs(auc(y, risk) - 0.893) <= 0.0005
    # [ANALYTIC] U = 3(33/2) + 2(33 + 6/2) + 2(39 + 6/2) + 11(45 + 11/2) + 33(56 + 2/2) = 2642
    assert auc(y, risk) == pytest.approx(2642 / (58 * 51), abs=1e-12)


def test_hanley_mcneil_roc_keeps_collinear_point_that_sklearn_drops():
    y, risk = hm_data()
    pts = roc_points(y, risk)
    np.testing.assert_array_equal(pts.thresholds, [np.inf, 1.0, 0.8, 0.6, 0.4, 0.2])
    # [ANALYTIC] at rating >= 3: TPR = 46/51, FPR = 19/58
    assert pts.sensitivity[3] == pytest.approx(46 / 51, abs=1e-12)
    assert 1 - pts.specificity[3] == pytest.approx(19 / 58, abs=1e-12)
    # methods.md §2.1: sklearn roc_curve's default drop_intermediate=True omits rating >= 3
    assert 0.6 not in roc_curve(y, risk)[2]


def test_methods_tiny_delong_variance():
    # methods.md §1.2 B [ANALYTIC]: y = (1,1,0,0), scores (3,1,2,0) (here /4): AUC 3/4, Var 1/8
    res = auc_ci([1, 1, 0, 0], [0.75, 0.25, 0.5, 0.0], method="wald")
    assert res.value == 0.75
    assert res.se**2 == pytest.approx(1 / 8, abs=1e-12)
    z = norm.ppf(0.975)  # scipy.stats.norm
    assert res.low == pytest.approx(0.75 - z * math.sqrt(1 / 8), abs=1e-12)
    assert res.high == 1.0  # 0.75 + 1.96 * 0.354 > 1: the Wald interval is clipped to [0, 1]


def test_methods_hand_delong_test():
    # methods.md §1.4 C [ANALYTIC]
    y = [1, 1, 1, 0, 0, 0]
    s1 = [0.9, 0.7, 0.4, 0.5, 0.3, 0.2]
    s2 = [0.8, 0.3, 0.6, 0.7, 0.2, 0.1]
    comp = _delong_components(np.array(y, float), np.array([s1, s2]))
    np.testing.assert_allclose(comp.auc, [8 / 9, 7 / 9], atol=1e-12)
    np.testing.assert_allclose(comp.v10, [[1, 1, 2 / 3], [1, 2 / 3, 2 / 3]], atol=1e-12)
    np.testing.assert_allclose(comp.v01, [[2 / 3, 1, 1], [1 / 3, 1, 1]], atol=1e-12)
    np.testing.assert_allclose(
        _delong_covariance(comp), [[2 / 81, 5 / 162], [5 / 162, 5 / 81]], atol=1e-12
    )
    res = compare_auc(y, s1, s2)
    assert res.difference == pytest.approx(1 / 9, abs=1e-12)
    assert res.se == pytest.approx(math.sqrt(2) / 9, abs=1e-12)
    assert res.z == pytest.approx(0.7071067811865476, abs=1e-12)
    assert res.p_value == pytest.approx(0.4795001221869535, abs=1e-12)
    assert (res.auc_a, res.auc_b) == pytest.approx((8 / 9, 7 / 9), abs=1e-12)
    z = norm.ppf(0.975)  # scipy.stats.norm: Wald interval on the difference
    assert (res.low, res.high) == pytest.approx((1 / 9 - z * res.se, 1 / 9 + z * res.se), abs=1e-12)


# ----------------------------------------------------------------------------- statsmodels


def statsmodels_cases(cancer):
    y, X = cancer
    for j in (0, 4, 6, 7, 9, 11, 14, 19, 29):  # AUCs 0.5 to 0.96; 6, 7 have tied zeros
        yield y, X[:, j]
    d = spector.load_pandas().data  # statsmodels spector: GRADE vs GPA / 4, 32 rows
    yield d["GRADE"].to_numpy(float), d["GPA"].to_numpy(float) / 4


def test_delong_variance_equals_statsmodels_var_prob(cancer):
    """statsmodels rank_compare_2indep(x_events, x_nonevents) uses Brunner-Munzel placements.

    Its S1 = sum((R_i - R^(1)_i - mean)^2)/(m-1), with R pooled and R^(1) within-event
    midranks; R_i - R^(1)_i = n V10_i, so var1 = S1/n^2 = S10 and likewise var2 = S01;
    var_prob = var1/m + var2/n is exactly the DeLong variance with m-1, n-1 denominators,
    prob1 is the AUC, and conf_int() with use_t=False is our Wald interval.
    """
    for y, r in statsmodels_cases(cancer):
        sm = rank_compare_2indep(r[y == 1], r[y == 0], use_t=False)
        res = auc_ci(y, r, level=0.9, method="wald")
        assert res.value == pytest.approx(sm.prob1, abs=1e-12)
        assert res.se**2 == pytest.approx(sm.var_prob, rel=1e-10)
        assert res.se == pytest.approx(math.sqrt(sm.var / sm.nobs), rel=1e-10)
        assert (res.low, res.high) == pytest.approx(sm.conf_int(alpha=0.1), abs=1e-12)
        # logit interval (methods.md §1.6) built with scipy.special from statsmodels' numbers
        half = norm.ppf(0.975) * math.sqrt(sm.var_prob) / (sm.prob1 * (1 - sm.prob1))
        lo = auc_ci(y, r)
        assert (lo.low, lo.high) == pytest.approx(
            expit(logit(sm.prob1) + np.array([-half, half])), abs=1e-10
        )


def test_compare_against_tied_constant_reduces_to_single_auc(cancer):
    # [ANALYTIC] a constant score has AUC 1/2 and every placement 1/2, so its DeLong
    # variance and covariance are 0: the paired SE is the single-AUC SE (statsmodels var_prob)
    y, X = cancer
    r = X[:, 1]
    sm = rank_compare_2indep(r[y == 1], r[y == 0], use_t=False)
    res = compare_auc(y, r, np.full(y.size, 0.3))
    assert res.difference == pytest.approx(sm.prob1 - 0.5, abs=1e-12)
    assert res.se**2 == pytest.approx(sm.var_prob, rel=1e-10)
    assert res.p_value == pytest.approx(2 * norm.sf(abs(res.z)), rel=1e-9)  # scipy.stats.norm


def test_compare_with_reversed_score(cancer):
    # [ANALYTIC] risk_b = 1 - risk_a: V10_b = 1 - V10_a, so Var(diff) = 4 Var(AUC_a)
    y, X = cancer
    r = X[:, 2]
    res = compare_auc(y, r, 1 - r)
    single = auc_ci(y, r)
    assert res.difference == pytest.approx(2 * single.value - 1, abs=1e-12)
    assert res.se == pytest.approx(2 * single.se, rel=1e-10)


# ----------------------------------------------------------------------------- degenerate SE


def test_perfect_separation_interval_not_estimable():
    # [ANALYTIC] AUC = 1: every placement is 1, DeLong SE = 0, logit undefined
    with pytest.warns(IntervalNotEstimableWarning, match="exactly 0"):
        res = auc_ci([0, 0, 1, 1], [0.1, 0.2, 0.8, 0.9])
    assert (res.value, res.se) == (1.0, 0.0)
    assert math.isnan(res.low)
    assert math.isnan(res.high)
    with pytest.warns(IntervalNotEstimableWarning):
        res = auc_ci([1, 1, 0, 0], [0.1, 0.2, 0.8, 0.9], method="wald")
    assert res.value == 0.0
    assert math.isnan(res.low)


def test_identical_scores_comparison_not_estimable():
    y, r = [1, 0, 1, 0, 1], [0.2, 0.3, 0.9, 0.1, 0.3]
    with pytest.warns(IntervalNotEstimableWarning):
        res = compare_auc(y, r, r)
    assert (res.difference, res.se) == (0.0, 0.0)
    assert all(math.isnan(v) for v in (res.low, res.high, res.z, res.p_value))


def test_interval_contains_value_and_is_inside_unit_interval(cancer):
    y, X = cancer
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for j in range(0, 30, 3):
            for method in ("logit", "wald"):
                res = auc_ci(y, X[:, j], level=0.99, method=method)
                assert 0 <= res.low < res.value < res.high <= 1


# ----------------------------------------------------------------------------- bad input

GOOD_Y = [0, 1, 0, 1, 1, 0]
GOOD_R = [0.1, 0.7, 0.3, 0.6, 0.4, 0.2]


BAD_INPUT = [
    (lambda: auc(GOOD_Y, GOOD_R[:5]), "risk must have the same length as y (6); got 5"),
    (lambda: auc([0, 2, 0, 1, 1, 0], GOOD_R), "y must be coded 0/1 (1 = event); got 2.0 at row 1"),
    (
        lambda: auc(GOOD_Y, [0.1, math.nan, 0.3, 0.6, 0.4, 0.2]),
        "risk must be finite (no NaN or inf); got nan at row 1",
    ),
    (
        lambda: auc_ci(GOOD_Y, [0.1, 0.7, math.inf, 0.6, 0.4, 0.2]),
        "risk must be finite (no NaN or inf); got inf at row 2",
    ),
    (
        lambda: roc_points(GOOD_Y, [0.1, 0.7, 1.3, 0.6, 0.4, 0.2]),
        "risk must lie in [0, 1]; got 1.3 at row 2",
    ),
    (
        lambda: auc(GOOD_Y, GOOD_R, weights=[1, 1, -1, 1, 1, 1]),
        "weights must be finite and non-negative; got -1.0 at row 2",
    ),
    (
        lambda: auc(GOOD_Y, GOOD_R, weights=[1, 1, 1]),
        "weights must have the same length as y (6); got 3",
    ),
    (
        lambda: auc([1, 1, 1], [0.1, 0.2, 0.3]),
        "y must contain both events and non-events for the AUC; got 3 event(s) and 0 non-event(s)",
    ),
    (
        lambda: auc(GOOD_Y, GOOD_R, weights=[1, 0, 1, 0, 0, 1]),
        "for the AUC; got 0 event(s) and 3 non-event(s)",
    ),
    (
        lambda: auc_ci([0, 0, 0], [0.1, 0.2, 0.3]),
        "both events and non-events for the AUC; got 0 event(s)",
    ),
    (
        lambda: compare_auc([1, 1], [0.1, 0.2], [0.3, 0.4]),
        "both events and non-events for comparing AUCs",
    ),
    (lambda: roc_points([0, 0], [0.1, 0.2]), "both events and non-events for the ROC curve"),
    (
        lambda: classify([1, 1], [0.1, 0.2], 0.5),
        "both events and non-events for sensitivity and specificity",
    ),
    (lambda: youden([0, 0], [0.1, 0.2]), "both events and non-events for Youden's J"),
    (lambda: auc_ci(GOOD_Y, GOOD_R, level=1.5), "level must lie strictly inside (0, 1); got 1.5"),
    (
        lambda: compare_auc(GOOD_Y, GOOD_R, GOOD_R, level=0),
        "level must lie strictly inside (0, 1); got 0",
    ),
    (
        lambda: auc_ci(GOOD_Y, GOOD_R, method="probit"),
        "method must be 'logit' or 'wald'; got 'probit'",
    ),
    (
        lambda: auc_ci([1, 0, 0, 0], [0.9, 0.1, 0.2, 0.3]),
        "at least 2 events and 2 non-events for the DeLong standard error "
        "(it divides by m - 1 and n - 1); got 1 event(s) and 3 non-event(s)",
    ),
    (
        lambda: compare_auc([1, 1, 0], [0.9, 0.8, 0.1], [0.9, 0.8, 0.1]),
        "at least 2 events and 2 non-events",
    ),
    (
        lambda: compare_auc(GOOD_Y, GOOD_R, [0.1, 0.7, -0.3, 0.6, 0.4, 0.2]),
        "risk_b must lie in [0, 1]; got -0.3 at row 2",
    ),
    (
        lambda: compare_auc(GOOD_Y, GOOD_R[:4], GOOD_R),
        "risk_a must have the same length as y (6); got 4",
    ),
    (lambda: classify(GOOD_Y, GOOD_R, 1.5), "threshold must be a finite number in [0, 1]; got 1.5"),
    (
        lambda: classify(GOOD_Y, GOOD_R, math.nan),
        "threshold must be a finite number in [0, 1]; got nan",
    ),
    (
        lambda: classify(GOOD_Y, GOOD_R, "0.5"),
        "threshold must be a single number in [0, 1]; got '0.5'",
    ),
    (
        lambda: classify(GOOD_Y, GOOD_R, [0.5]),
        "threshold must be a single number in [0, 1]; got [0.5]",
    ),
    (lambda: auc([], []), "y must not be empty; got 0 rows"),
]


@pytest.mark.parametrize(("call", "fragment"), BAD_INPUT)
def test_bad_input_names_argument_rule_and_value(call, fragment):
    with pytest.raises(StatsInputError) as info:
        call()
    assert fragment in str(info.value)
