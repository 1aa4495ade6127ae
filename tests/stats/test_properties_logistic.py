"""Hypothesis properties of fit_logistic (ML and Firth): row order, unit weights,
duplicated row = weight 2, zero weight = dropped row, and the fitted optimum."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from calcbuilder.stats.errors import SeparationError
from calcbuilder.stats.logistic import LogisticFit, fit_logistic

SETTINGS = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def datasets(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray, np.random.Generator]:
    """Small logistic data sets: 15-60 rows, 0-3 predictors on mixed scales."""
    n = draw(st.integers(15, 60))
    p = draw(st.integers(0, 3))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    scales = 10.0 ** rng.integers(-2, 3, size=p)
    X = rng.normal(size=(n, p)) * scales
    eta = rng.normal(0, 0.5) + (X / scales) @ rng.normal(0, 0.8, size=p)
    y = (rng.random(n) < 1 / (1 + np.exp(-eta))).astype(float)
    assume(2 <= y.sum() <= n - 2)
    return X, y, rng


def _fit(X, y, **kw) -> LogisticFit:
    try:
        return fit_logistic(X, y, **kw)
    except SeparationError:
        assume(False)  # small random samples can be separated; the property is about fits
        raise


def _same(a: LogisticFit, b: LogisticFit, tol: float = 1e-8) -> None:
    np.testing.assert_allclose(a.coef, b.coef, rtol=tol, atol=tol)
    np.testing.assert_allclose(a.cov, b.cov, rtol=tol, atol=tol * np.abs(a.cov).max())
    np.testing.assert_allclose(a.loglik, b.loglik, rtol=tol, atol=tol)


@SETTINGS
@given(datasets(), st.booleans())
def test_row_order_does_not_matter(data, firth):
    X, y, rng = data
    order = rng.permutation(y.size)
    _same(_fit(X, y, firth=firth), _fit(X[order], y[order], firth=firth))


@SETTINGS
@given(datasets(), st.booleans())
def test_unit_weights_equal_no_weights(data, firth):
    X, y, _ = data
    _same(_fit(X, y, firth=firth), _fit(X, y, weights=np.ones(y.size), firth=firth), 1e-12)


@SETTINGS
@given(datasets(), st.booleans())
def test_duplicated_row_equals_weight_two(data, firth):
    X, y, rng = data
    i = int(rng.integers(y.size))
    w = np.ones(y.size)
    w[i] = 2.0
    copied = _fit(np.r_[X, X[i : i + 1]], np.r_[y, y[i]], firth=firth)
    _same(copied, _fit(X, y, weights=w, firth=firth))


@SETTINGS
@given(datasets(), st.booleans())
def test_zero_weight_equals_dropped_row(data, firth):
    X, y, rng = data
    i = int(rng.integers(y.size))
    keep = np.arange(y.size) != i
    assume(2 <= y[keep].sum() <= keep.sum() - 2)
    w = keep.astype(float)
    _same(_fit(X[keep], y[keep], firth=firth), _fit(X, y, weights=w, firth=firth))


@SETTINGS
@given(datasets())
def test_ml_score_is_zero_and_loglik_is_maximal(data):
    # first-order condition Z'(y - p) = 0 and no nearby point has a higher log-likelihood
    X, y, rng = data
    fit = _fit(X, y)
    Z = np.column_stack([np.ones(y.size), X])

    def loglik(b: np.ndarray) -> float:
        eta = Z @ b
        return float(np.sum(y * eta - np.logaddexp(0.0, eta)))

    p = 1 / (1 + np.exp(-(Z @ fit.coef)))
    score_in_se_units = (Z.T @ (y - p)) * np.sqrt(np.diag(fit.cov))
    np.testing.assert_allclose(score_in_se_units, 0.0, atol=1e-7)
    assert fit.loglik == pytest.approx(loglik(fit.coef), abs=1e-9)
    for _ in range(5):
        nudge = rng.normal(size=fit.coef.size) * np.sqrt(np.diag(fit.cov)) * 0.01
        assert loglik(fit.coef + nudge) <= fit.loglik + 1e-12
