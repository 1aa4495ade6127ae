"""Batched logistic fits and batched AUC / Brier / calibration slope.

Each batched result is checked row by row against outside references on data
shipped inside PyPI packages (statsmodels GLM/Logit, scikit-learn metrics),
against this package's scalar functions, and against slow oracles written here.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.datasets import load_breast_cancer
from sklearn.metrics import brier_score_loss, roc_auc_score

from calcbuilder.stats import _batch_core
from calcbuilder.stats.batch import (
    BatchLogisticFit,
    auc_batch,
    brier_batch,
    calibration_slope_batch,
    fit_logistic_batch,
)
from calcbuilder.stats.calibration import brier, calibration_slope
from calcbuilder.stats.discrimination import auc
from calcbuilder.stats.errors import ConvergenceError, StatsInputError
from calcbuilder.stats.logistic import fit_logistic

FIT_TOL = 1e-8  # two converged maximum-likelihood fits of the same data
EXACT = 1e-12  # closed forms: only floating-point summation order differs


def _anes96() -> tuple[np.ndarray, np.ndarray]:
    d = sm.datasets.anes96.load_pandas().data
    cols = ["logpopul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age", "educ", "income"]
    return d[cols].to_numpy(float), d["vote"].to_numpy(float)


def _counts(n: int, B: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.stack([np.bincount(rng.integers(0, n, n), minlength=n) for _ in range(B)]).astype(
        float
    )


def _risks_from_fits(X: np.ndarray, coef: np.ndarray) -> np.ndarray:
    return 1.0 / (1.0 + np.exp(-(sm.add_constant(X) @ coef.T).T))


@pytest.fixture(scope="module")
def anes() -> tuple[np.ndarray, np.ndarray, np.ndarray, BatchLogisticFit]:
    X, y = _anes96()
    W = _counts(y.size, 12, seed=7)
    return X, y, W, fit_logistic_batch(X, y, W)


@pytest.fixture(scope="module")
def cancer() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    data = load_breast_cancer()
    X, y = data.data, data.target.astype(float)
    # two weak single-feature scores turned into risks; one rounded so it has many ties
    lp = (X[:, 1] - X[:, 1].mean()) / X[:, 1].std()
    R = np.vstack([1 / (1 + np.exp(lp)), np.round(1 / (1 + np.exp(0.5 * lp)), 2)])
    return y, R, _counts(y.size, 6, seed=11)


# --- the batched fitter ----------------------------------------------------------------


def test_fit_equals_fit_logistic_per_weight_row(anes):
    X, y, W, fit = anes
    assert fit.converged.all()
    for b in range(W.shape[0]):
        one = fit_logistic(X, y, weights=W[b])  # calcbuilder's scalar Newton fit
        np.testing.assert_allclose(fit.coef[b], one.coef, rtol=0, atol=FIT_TOL)


def test_fit_equals_statsmodels_glm_freq_weights(anes):
    X, y, W, fit = anes
    for b in range(W.shape[0]):
        # outside reference: statsmodels GLM(Binomial, freq_weights), IRLS tightened
        ref = sm.GLM(y, sm.add_constant(X), family=sm.families.Binomial(), freq_weights=W[b])
        np.testing.assert_allclose(fit.coef[b], ref.fit(tol=1e-13).params, rtol=0, atol=FIT_TOL)


def test_fit_spector_matches_statsmodels_logit_published_in_methods():
    d = sm.datasets.spector.load_pandas().data
    X, y = d[["GPA", "TUCE", "PSI"]].to_numpy(float), d["GRADE"].to_numpy(float)
    fit = fit_logistic_batch(X, y, np.ones((1, y.size)))
    # methods.md 9.1 [LIB]: statsmodels Logit on spector
    expected = [-13.021346856, 2.826112595, 0.095157661, 2.378687655]
    np.testing.assert_allclose(fit.coef[0], expected, rtol=0, atol=1e-6)


def test_weight_two_equals_a_duplicated_row(anes):
    X, y, _, _ = anes
    w = np.ones(y.size)
    w[:40] = 2.0
    doubled = fit_logistic_batch(X, y, w)
    copied = fit_logistic_batch(np.vstack([X, X[:40]]), np.r_[y, y[:40]], np.ones(y.size + 40))
    np.testing.assert_allclose(doubled.coef, copied.coef, rtol=0, atol=FIT_TOL)


def test_result_does_not_depend_on_chunking(anes, monkeypatch):
    X, y, W, fit = anes
    monkeypatch.setattr(_batch_core, "FIT_BYTES", 3 * 8 * y.size)  # 3 rows per chunk
    again = fit_logistic_batch(X, y, W)
    np.testing.assert_allclose(again.coef, fit.coef, rtol=0, atol=1e-12)


def test_damped_newton_reaches_the_maximum_from_a_far_start(anes):
    X, y, W, fit = anes
    far = fit_logistic_batch(X, y, W[:3], start=np.r_[5.0, np.full(X.shape[1], 0.5)])
    assert far.converged.all()
    np.testing.assert_allclose(far.coef, fit.coef[:3], rtol=0, atol=FIT_TOL)


def test_failed_rows_are_flagged_and_do_not_disturb_the_others(anes):
    X, y, W, _ = anes
    one_class = np.where(y == 1, 1.0, 0.0)  # only events keep weight
    dummy = np.zeros(y.size)
    dummy[np.r_[np.flatnonzero(y == 1)[:30], np.flatnonzero(y == 0)[:30]]] = 1.0
    X2 = np.column_stack([X, dummy])
    no_dummy = 1.0 - dummy  # under these weights the dummy column is all 0
    rows = np.vstack([one_class, W[0], no_dummy])
    res = fit_logistic_batch(X2, y, rows)
    assert res.converged.tolist() == [False, True, False]
    assert "one outcome class" in res.reasons[0]
    assert "rank-deficient" in res.reasons[2]
    assert np.isnan(res.coef[[0, 2]]).all()
    np.testing.assert_allclose(
        res.coef[1], fit_logistic(X2, y, weights=W[0]).coef, rtol=0, atol=FIT_TOL
    )


def test_separation_is_reported_as_no_convergence():
    x = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 5.0])
    y = np.array([0.0, 0.0, 0.0, 1.0, 1.0, 1.0])  # x > 2.5 separates perfectly
    res = fit_logistic_batch(x, y, np.vstack([np.ones(6), [1, 1, 1, 1, 1, 0.0]]), max_iter=30)
    assert not res.converged.any()
    assert all("no convergence in 30 Newton steps" in r for r in res.reasons)
    assert res.iterations.tolist() == [30, 30]


# --- batched measures -----------------------------------------------------------------


def _pair_auc(y, risk, w):
    """Slow oracle: weighted share of (event, non-event) pairs ordered right, ties 1/2."""
    num = den = 0.0
    for i in np.flatnonzero(y == 1):
        for j in np.flatnonzero(y == 0):
            num += w[i] * w[j] * (1.0 if risk[i] > risk[j] else 0.5 if risk[i] == risk[j] else 0.0)
            den += w[i] * w[j]
    return num / den


def test_auc_batch_equals_sklearn_with_sample_weight(cancer):
    y, R, W = cancer
    for r in R:  # one risk vector shared by all weight rows (one sort)
        got = auc_batch(y, r, W)
        # outside reference: sklearn.metrics.roc_auc_score(sample_weight=)
        ref = [roc_auc_score(y, r, sample_weight=w) for w in W]
        np.testing.assert_allclose(got, ref, rtol=0, atol=EXACT)


def test_auc_batch_risk_matrix_equals_scalar_auc(anes):
    X, y, W, fit = anes
    R = _risks_from_fits(X, fit.coef)
    got = auc_batch(y, R, W)
    ref = [auc(y, R[b], weights=W[b]) for b in range(W.shape[0])]  # calcbuilder scalar AUC
    np.testing.assert_allclose(got, ref, rtol=0, atol=EXACT)
    unit = auc_batch(y, R)  # no weights: every row of R with unit weights
    np.testing.assert_allclose(unit, [roc_auc_score(y, r) for r in R], rtol=0, atol=EXACT)


def test_brier_batch_equals_sklearn_and_scalar(cancer):
    y, R, W = cancer
    got = brier_batch(y, R[1], W)
    # outside reference: sklearn.metrics.brier_score_loss(sample_weight=)
    ref = [brier_score_loss(y, R[1], sample_weight=w) for w in W]
    np.testing.assert_allclose(got, ref, rtol=0, atol=EXACT)
    scalar = [brier(y, R[1], weights=w) for w in W]  # calcbuilder scalar Brier
    np.testing.assert_allclose(got, scalar, rtol=0, atol=EXACT)


def test_calibration_slope_batch_equals_statsmodels_and_scalar(anes):
    X, y, W, fit = anes
    R = _risks_from_fits(X, fit.coef)[::-1].copy()  # each model scored under other weights
    got = calibration_slope_batch(y, R, W)
    for b in range(W.shape[0]):
        lp = np.log(R[b] / (1 - R[b]))
        # outside reference: statsmodels GLM(Binomial, freq_weights) of y on logit(risk)
        ref = sm.GLM(y, sm.add_constant(lp), family=sm.families.Binomial(), freq_weights=W[b])
        assert abs(got[b] - ref.fit(tol=1e-13).params[1]) < FIT_TOL
        # calcbuilder scalar calibration_slope: another converged Newton fit of the same model
        assert abs(got[b] - calibration_slope(y, R[b], weights=W[b]).value) < EXACT


def test_apparent_calibration_slope_is_one(anes):
    X, y, W, fit = anes
    # methods.md 3.3 [ANALYTIC]: on its own (weighted) development data an ML logistic
    # model with an intercept has calibration slope exactly 1
    slopes = calibration_slope_batch(y, _risks_from_fits(X, fit.coef), W)
    np.testing.assert_allclose(slopes, 1.0, rtol=0, atol=1e-9)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(
        st.tuples(st.integers(0, 1), st.integers(0, 6), st.integers(0, 3), st.integers(0, 3)),
        min_size=2,
        max_size=25,
    )
)
def test_auc_and_brier_batch_equal_slow_oracles(rows):
    y = np.array([r[0] for r in rows], float)
    risk = np.array([r[1] for r in rows], float) / 6  # few levels: many ties
    W = np.array([[r[2] for r in rows], [r[3] for r in rows]], float)
    for w in W:
        if w.sum() == 0 or w[y == 1].sum() == 0 or w[y == 0].sum() == 0:
            return
    np.testing.assert_allclose(
        auc_batch(y, risk, W), [_pair_auc(y, risk, w) for w in W], rtol=0, atol=EXACT
    )
    oracle = [np.sum(w * (risk - y) ** 2) / w.sum() for w in W]
    np.testing.assert_allclose(brier_batch(y, risk, W), oracle, rtol=0, atol=EXACT)
    # AUC(1 - risk) = 1 - AUC(risk); unit weights equal no weights
    np.testing.assert_allclose(auc_batch(y, 1 - risk, W), 1 - auc_batch(y, risk, W), atol=EXACT)
    np.testing.assert_allclose(auc_batch(y, risk, np.ones(y.size)), auc_batch(y, risk), atol=0)


def test_row_order_does_not_matter(anes):
    X, y, W, fit = anes
    R = _risks_from_fits(X, fit.coef[:3])
    perm = np.random.default_rng(3).permutation(y.size)
    for f in (auc_batch, brier_batch, calibration_slope_batch):
        a, b = f(y, R, W[:3]), f(y[perm], R[:, perm], W[:3, perm])
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-10)


# --- bad input: one clear message naming the argument --------------------------------


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: fit_logistic_batch([[1.0], [2.0]], [0, 1], [[1, 1, 1]]), "weights[0] must have"),
        (lambda: fit_logistic_batch([[1.0], [2.0]], [0, 1], [[1, -1]]), "weights[0] must be fin"),
        (lambda: fit_logistic_batch([[1.0], [np.nan]], [0, 1], [1, 1]), "X must be finite"),
        (lambda: fit_logistic_batch([[1.0, 2.0]], [0, 1], [1, 1]), "X must have the same len"),
        (lambda: fit_logistic_batch([[1.0], [2.0]], [0, 2], [1, 1]), "y must be coded 0/1"),
        (lambda: fit_logistic_batch([[1.0], [2.0]], [0, 1], [[1, 1], [1]]), "ragged"),
        (lambda: fit_logistic_batch([[1.0], [2.0]], [0, 1], [1, 1], start=[0.0]), "start must"),
        (lambda: fit_logistic_batch([[1.0], [2.0]], [0, 1], [1, 1], max_iter=0), "max_iter"),
        (lambda: auc_batch([0, 1], [[0.2, 0.3], [0.1, 1.5]]), "risk[1] must lie in [0, 1]"),
        (lambda: auc_batch([0, 1], [0.2, 0.3], [[1, 1], [0, 1]]), "row 1 of 2"),
        (lambda: auc_batch([0, 1], [[0.2, 0.3]] * 3, [[1, 1]] * 2), "one row per row of risk"),
        (lambda: brier_batch([0, 1], [0.2], [1, 1]), "risk must have the same length"),
        (lambda: calibration_slope_batch([0, 1, 1], [0.2, 0.5, 1.0]), "strictly inside (0, 1)"),
    ],
)
def test_bad_input_names_the_argument(call, message):
    with pytest.raises(StatsInputError) as info:
        call()
    assert message in str(info.value)


def test_calibration_slope_batch_raises_for_a_row_without_a_slope():
    y = np.array([0.0, 0.0, 1.0, 1.0])
    risk = np.array([0.1, 0.2, 0.8, 0.9])  # separates y: the slope is infinite
    with pytest.raises(ConvergenceError, match=r"row 0 of 1 has no calibration slope"):
        calibration_slope_batch(y, risk)


def test_docstring_examples_run():
    import doctest

    from calcbuilder.stats import batch, resampling

    for module in (batch, resampling):
        assert doctest.testmod(module, raise_on_error=False).failed == 0, module.__name__
