"""fit_logistic against statsmodels on shipped datasets, analytic cases, and its errors.

Sections: maximum likelihood, separation, Firth, singular designs, bad input.
Hypothesis properties are in ``test_properties_logistic.py``.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.optimize import minimize

from calcbuilder.stats import logistic
from calcbuilder.stats.errors import (
    ConvergenceError,
    SeparationError,
    SingularDesignError,
    StatsInputError,
)
from calcbuilder.stats.logistic import fit_logistic
from calcbuilder.stats.separation import detect_separation

ATOL = 1e-6  # methods.md 0.3: values from iterative fits


def _spector() -> tuple[np.ndarray, np.ndarray]:
    d = sm.datasets.spector.load_pandas().data
    return d[["GPA", "TUCE", "PSI"]].to_numpy(float), d["GRADE"].to_numpy(float)


def _anes96() -> tuple[np.ndarray, np.ndarray]:
    d = sm.datasets.anes96.load_pandas().data
    cols = ["logpopul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age", "educ", "income"]
    return d[cols].to_numpy(float), d["vote"].to_numpy(float)


def _fair() -> tuple[np.ndarray, np.ndarray]:
    d = sm.datasets.fair.load_pandas().data
    X = d.drop(columns="affairs").to_numpy(float)
    return X, (d["affairs"] > 0).to_numpy(float)


def _two_column_separated() -> tuple[np.ndarray, np.ndarray]:
    # separated by x0 + x1 > 0 while neither column separates on its own
    rng = np.random.default_rng(5)
    X = rng.uniform(-1, 1, size=(60, 2))
    X = X[np.abs(X.sum(axis=1)) > 0.1]
    return X, (X.sum(axis=1) > 0).astype(float)


def _anes96_small() -> tuple[np.ndarray, np.ndarray]:
    X, y = _anes96()
    return X[:200, :3], y[:200]


def _breast_cancer_10() -> tuple[np.ndarray, np.ndarray]:
    from sklearn.datasets import load_breast_cancer  # scikit-learn, shipped with the package

    data = load_breast_cancer()
    X = data.data[:, :10]
    return (X - X.mean(axis=0)) / X.std(axis=0), data.target.astype(float)


DATASETS = {"spector": _spector, "anes96": _anes96, "fair": _fair}


def _glm(X, y, **kw):
    # statsmodels GLM(Binomial) by IRLS, tightened so that it is not the looser side
    model = sm.GLM(y, sm.add_constant(X, has_constant="add"), family=sm.families.Binomial(), **kw)
    return model.fit(tol=1e-13, maxiter=200)


def _close(a, b, tol=ATOL):
    np.testing.assert_allclose(np.asarray(a), np.asarray(b), rtol=tol, atol=tol)


@pytest.mark.parametrize("name", list(DATASETS))
def test_matches_statsmodels_logit(name):
    X, y = DATASETS[name]()
    fit = fit_logistic(X, y)
    # statsmodels Logit(...).fit(method="newton") on the shipped dataset
    ref = sm.Logit(y, sm.add_constant(X)).fit(method="newton", tol=1e-13, maxiter=100, disp=0)
    _close(fit.coef, ref.params)
    _close(fit.cov, ref.cov_params())
    assert fit.loglik == pytest.approx(ref.llf, abs=ATOL)
    assert fit.converged
    assert 1 <= fit.iterations <= 15


@pytest.mark.parametrize("name", list(DATASETS))
def test_matches_statsmodels_glm_binomial(name):
    X, y = DATASETS[name]()
    fit = fit_logistic(X, y)
    ref = _glm(X, y)  # statsmodels GLM(family=Binomial()).fit() (IRLS)
    _close(fit.coef, ref.params)
    _close(fit.cov, ref.cov_params())
    assert fit.loglik == pytest.approx(ref.llf, abs=ATOL)


def test_spector_published_estimates():
    # Spector & Mazzeo (1980) data as printed in Greene, Econometric Analysis, logit
    # column: -13.021, 2.826, 0.095, 2.379; log-likelihood -12.890 (recalled from memory)
    X, y = _spector()
    fit = fit_logistic(X, y)
    _close(fit.coef, [-13.021, 2.826, 0.095, 2.379], tol=5e-4)
    assert fit.loglik == pytest.approx(-12.890, abs=5e-4)


def test_frequency_weights_match_glm_freq_weights():
    X, y = _anes96()
    w = np.random.default_rng(7).integers(0, 4, size=y.size).astype(float)  # includes zeros
    fit = fit_logistic(X, y, weights=w)
    ref = _glm(X, y, freq_weights=w)  # statsmodels GLM(..., freq_weights=w)
    _close(fit.coef, ref.params)
    _close(fit.cov, ref.cov_params())
    assert fit.loglik == pytest.approx(ref.llf, abs=ATOL)


def test_fractional_weights_match_glm_var_weights():
    # non-integer weights: the weighted score equations of statsmodels GLM(var_weights=w)
    X, y = _spector()
    w = np.random.default_rng(3).uniform(0.2, 3.0, size=y.size)
    fit = fit_logistic(X, y, weights=w)
    ref = _glm(X, y, var_weights=w)
    _close(fit.coef, ref.params)
    _close(fit.cov, ref.cov_params())


def test_offset_matches_glm_offset():
    X, y = _anes96()
    off = np.random.default_rng(11).normal(0.0, 0.7, size=y.size)
    fit = fit_logistic(X[:, :4], y, offset=off)
    ref = _glm(X[:, :4], y, offset=off)  # statsmodels GLM(..., offset=off)
    _close(fit.coef, ref.params)
    _close(fit.cov, ref.cov_params())
    assert fit.loglik == pytest.approx(ref.llf, abs=ATOL)


def test_zero_columns_with_offset_is_intercept_only():
    # calibration-in-the-large: logit P(y=1) = a + offset
    X, y = _spector()
    lp = fit_logistic(X, y).coef @ np.vstack([np.ones(y.size), X.T]) * 0.8
    fit = fit_logistic(np.empty((y.size, 0)), y, offset=lp)
    ref = sm.GLM(y, np.ones((y.size, 1)), family=sm.families.Binomial(), offset=lp).fit(tol=1e-13)
    assert fit.coef.shape == (1,)
    assert fit.cov.shape == (1, 1)
    _close(fit.coef, ref.params)
    _close(fit.cov, ref.cov_params())
    assert fit.loglik == pytest.approx(ref.llf, abs=ATOL)


def test_intercept_only_analytic():
    # [ANALYTIC] b0 = logit(ybar), var = 1 / (n ybar (1 - ybar)),
    # loglik = n [ybar log ybar + (1 - ybar) log(1 - ybar)]
    y = np.array([1, 0, 0, 1, 0, 0, 0, 1, 0, 0], dtype=float)
    fit = fit_logistic(np.empty((10, 0)), y)
    m, n = 0.3, 10
    assert fit.coef[0] == pytest.approx(np.log(m / (1 - m)), abs=1e-12)
    assert fit.cov[0, 0] == pytest.approx(1 / (n * m * (1 - m)), abs=1e-12)
    assert fit.loglik == pytest.approx(n * (m * np.log(m) + (1 - m) * np.log(1 - m)), abs=1e-12)


def test_binary_predictor_gives_log_odds_ratio():
    # [ANALYTIC] saturated 2x2 table a=4 b=6 (x=1), c=3 d=12 (x=0): slope = log(ad/bc),
    # var(slope) = 1/a + 1/b + 1/c + 1/d (Woolf)
    x = np.r_[np.ones(10), np.zeros(15)]
    y = np.r_[np.ones(4), np.zeros(6), np.ones(3), np.zeros(12)]
    fit = fit_logistic(x[:, None], y)
    assert fit.coef[1] == pytest.approx(np.log(4 * 12 / (6 * 3)), abs=1e-12)
    assert fit.cov[1, 1] == pytest.approx(1 / 4 + 1 / 6 + 1 / 3 + 1 / 12, abs=1e-12)


def test_rescaled_columns_rescale_coefficients():
    # [ANALYTIC] equivariance: X * c gives coef / c and cov / c^2, also for extreme c
    X, y = _anes96()
    base = fit_logistic(X, y)
    c = np.array([1e-4, 1e3, 1.0, 1.0, 1e5, 1.0, 1e-3, 1.0, 1.0])
    fit = fit_logistic(X * c, y)
    _close(fit.coef[1:] * c, base.coef[1:])
    _close(fit.cov[1:, 1:] * np.outer(c, c), base.cov[1:, 1:])


def test_ordinary_fits_never_run_the_separation_lp(monkeypatch):
    # cost guarantee: the linear programme runs only when Newton shows divergence
    def boom(*args, **kwargs):
        raise AssertionError("separation LP ran on an ordinary fit")

    monkeypatch.setattr(logistic, "separation_on_design", boom)
    for load in DATASETS.values():
        X, y = load()
        fit_logistic(X, y)


# ---------------------------------------------------------------- separation


def _assert_certificate(X, y, kind):
    # Albert & Anderson (1984) definition checked directly on the returned direction
    res = detect_separation(X, y)
    assert res.kind == kind
    Z = np.column_stack([np.ones(len(y)), np.asarray(X, float)])
    margin = (2 * np.asarray(y, float) - 1) * (Z @ res.direction)
    scale = np.abs(Z).max(axis=0) @ np.abs(res.direction)
    assert margin.min() >= -1e-9 * scale
    assert (margin > 1e-9 * scale).sum() == res.n_separated
    return res


def test_complete_separation_one_column():
    X, y = [[1.0], [2.0], [3.0], [4.0]], [0, 0, 1, 1]
    with pytest.raises(SeparationError, match=r"complete separation.*X column 0.*firth=True"):
        fit_logistic(X, y)
    _assert_certificate(X, y, "complete")


def test_quasi_complete_separation_zero_cell():
    # a category with events only: 5 of 15 rows predicted perfectly, the rest tie
    x = np.r_[np.ones(5), np.zeros(10)]
    y = np.r_[np.ones(5), np.ones(3), np.zeros(7)]
    with pytest.raises(SeparationError) as err:
        fit_logistic(x[:, None], y)
    msg = str(err.value)
    assert msg.startswith("quasi-complete separation")
    assert "5 of 15 rows" in msg
    assert "X column 0 separates" in msg
    assert "firth=True" in msg
    _assert_certificate(x[:, None], y, "quasi-complete")


def test_complete_separation_needs_two_columns():
    X, y = _two_column_separated()
    with pytest.raises(SeparationError, match=r"^complete separation.*X columns 0, 1") as err:
        fit_logistic(X, y)
    assert "on its own" not in str(err.value)
    _assert_certificate(X, y, "complete")


def test_breast_cancer_is_completely_separated():
    # scikit-learn load_breast_cancer with all 30 features: statsmodels Logit also fails
    # on it (perfect prediction); our direction is checked as a certificate
    from sklearn.datasets import load_breast_cancer

    data = load_breast_cancer()
    with pytest.raises(SeparationError, match=r"^complete separation.*all 569 rows"):
        fit_logistic(data.data, data.target)
    _assert_certificate(data.data, data.target, "complete")


def test_zero_weight_row_can_cause_separation():
    X, y = [[1.0], [2.0], [3.0], [4.0], [1.5]], [0, 0, 1, 1, 1]
    fit_logistic(X, y)  # the last row overlaps: the estimate exists
    with pytest.raises(SeparationError, match="complete separation"):
        fit_logistic(X, y, weights=[1, 1, 1, 1, 0])


@pytest.mark.parametrize("name", list(DATASETS))
def test_no_separation_in_shipped_datasets(name):
    # statsmodels converges to finite estimates on these, so the MLE exists
    X, y = DATASETS[name]()
    res = detect_separation(X, y)
    assert res.kind == "none"
    assert res.n_separated == 0
    assert "no separation" in res.message()


def test_nonconvergence_error_points_to_remedies(monkeypatch):
    monkeypatch.setattr(logistic, "MAX_ITER", 2)
    X, y = _fair()
    with pytest.raises(ConvergenceError, match=r"2 Newton steps.*firth=True or rescale"):
        fit_logistic(X, y)


# ---------------------------------------------------------------- Firth


def _independent_firth(X, y, w=None, start=None):
    """Direct maximisation of l(b) + 0.5 log det I(b) (Firth 1993, eq. for canonical links)
    with scipy.optimize.minimize(BFGS, 3-point numerical gradient); shares no code."""
    Z = np.column_stack([np.ones(len(y)), X])
    w = np.ones(len(y)) if w is None else np.asarray(w, float)

    def negative_penalised(b):
        eta = Z @ b
        ll = np.sum(w * (y * eta - np.logaddexp(0.0, eta)))
        p = 1.0 / (1.0 + np.exp(-eta))
        info = Z.T @ (Z * (w * p * (1 - p))[:, None])
        return -(ll + 0.5 * np.linalg.slogdet(info)[1])

    x0 = np.zeros(Z.shape[1]) if start is None else start
    res = minimize(negative_penalised, x0, method="BFGS", jac="3-point", options={"gtol": 1e-10})
    return res.x, -res.fun


def _penalised(fit):
    # documented: penalised loglik = loglik - 0.5 log det(cov)
    return fit.loglik - 0.5 * np.linalg.slogdet(fit.cov)[1]


@pytest.mark.parametrize(
    "load", [_spector, _breast_cancer_10, _anes96_small, _two_column_separated]
)
def test_firth_matches_independent_optimiser(load):
    X, y = load()
    fit = fit_logistic(X, y, firth=True)
    coef, best = _independent_firth(X, y)
    np.testing.assert_allclose(fit.coef, coef, atol=1e-5)
    assert _penalised(fit) >= best - 1e-9  # the optimiser finds nothing higher
    assert np.isfinite(fit.coef).all()
    assert fit.converged


def test_firth_with_weights_matches_independent_optimiser():
    X, y = _spector()
    w = np.random.default_rng(2).integers(0, 4, size=y.size).astype(float)
    fit = fit_logistic(X, y, weights=w, firth=True)
    coef, _ = _independent_firth(X, y, w)
    np.testing.assert_allclose(fit.coef, coef, atol=1e-5)


def test_firth_loglik_is_the_unpenalised_one():
    X, y = _spector()
    fit = fit_logistic(X, y, firth=True)
    eta = fit.coef[0] + X @ fit.coef[1:]
    # ordinary Bernoulli log-likelihood at the Firth estimate, computed directly
    assert fit.loglik == pytest.approx(float(np.sum(y * eta - np.log1p(np.exp(eta)))), abs=1e-10)
    assert fit.loglik < fit_logistic(X, y).loglik  # ML maximises the unpenalised one


def test_firth_zero_cell_analytic():
    # [ANALYTIC] binary predictor (saturated): log det I separates into the two groups, so
    # each group's risk is the Jeffreys mode (k + 1/2) / (n + 1), i.e. 1/2 added to every
    # cell: slope = log((5.5 / 0.5) / (3.5 / 7.5)), intercept = log(3.5 / 7.5)
    x = np.r_[np.ones(5), np.zeros(10)]
    y = np.r_[np.ones(5), np.ones(3), np.zeros(7)]  # x = 1: 5 events, 0 non-events
    fit = fit_logistic(x[:, None], y, firth=True)
    assert fit.coef[0] == pytest.approx(np.log(3.5 / 7.5), abs=1e-9)
    assert fit.coef[1] == pytest.approx(np.log(5.5 / 0.5) - np.log(3.5 / 7.5), abs=1e-9)


def test_firth_intercept_only_analytic():
    # [ANALYTIC] l + 0.5 log(n p (1 - p)) = (k + 1/2) log p + (n - k + 1/2) log(1 - p) + c,
    # maximised at p = (k + 1/2) / (n + 1)
    y = np.r_[np.ones(2), np.zeros(11)]
    fit = fit_logistic(np.empty((13, 0)), y, firth=True)
    p = 2.5 / 14
    assert fit.coef[0] == pytest.approx(np.log(p / (1 - p)), abs=1e-10)


def test_firth_finite_on_complete_separation_of_30_features():
    # scikit-learn load_breast_cancer: completely separated (see above), Firth still finite
    from sklearn.datasets import load_breast_cancer

    data = load_breast_cancer()
    fit = fit_logistic(data.data, data.target, firth=True)
    assert fit.converged
    assert np.isfinite(fit.coef).all()
    assert np.isfinite(fit.cov).all()


# ---------------------------------------------------------------- singular designs


@pytest.mark.parametrize(
    ("X", "pattern"),
    [
        (np.c_[[1.0, 2, 3, 4, 5, 6], [7.0] * 6], r"X column 1 must vary.*constant \(7"),
        (
            np.c_[[1.0, 2, 3, 4, 5, 6], [3, 1, 4, 1, 5, 9], [2.0, 4, 6, 8, 10, 12]],
            r"X column 2 .*linear combination.*X column 0 \(up to rounding\)",
        ),
        (
            np.c_[[1.0, 0, 1, 0, 1, 0], [0, 1, 0, 1, 0, 1], [3, 1, 4, 1, 5, 9]],
            r"X column 1 .*X column 0 and the intercept",
        ),
    ],
    ids=["constant", "duplicated", "dummy-trap"],
)
def test_singular_design_names_the_column(X, pattern):
    y = [0, 1, 0, 1, 1, 0]
    with pytest.raises(SingularDesignError, match=pattern):
        fit_logistic(X, y)


def test_singular_judged_on_rows_with_positive_weight():
    X = np.c_[[1.0, 2, 3, 4, 5, 6], [1.0, 1, 1, 1, 2, 3]]
    y = [0, 1, 0, 1, 1, 0]
    fit_logistic(X, y)
    with pytest.raises(SingularDesignError, match="X column 1 must vary"):
        fit_logistic(X, y, weights=[1, 1, 1, 1, 0, 0])


def test_more_coefficients_than_rows():
    with pytest.raises(SingularDesignError, match=r"3 coefficients .* only 2 row"):
        fit_logistic([[1.0, 2.0], [2.0, 1.0]], [0, 1])


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("kwargs", "pattern"),
    [
        ({"y": [0, 2, 1, 0]}, r"y must be coded 0/1.*got 2\.0 at row 1"),
        ({"y": [0, 0, 0, 0]}, r"y must contain both events and non-events.*0 event"),
        ({"X": [[1.0], [np.nan], [3.0], [4.0]]}, r"X must be finite; got nan at row 1"),
        ({"X": [[1.0], [2.0], [3.0]]}, r"X must have the same length as y \(4\); got 3"),
        ({"X": np.ones((4, 1, 1))}, r"X must be two-dimensional"),
        ({"X": [["a"], ["b"], ["c"], ["d"]]}, r"X must be numeric"),
        ({"offset": [0.0, np.inf, 0.0, 0.0]}, r"offset must be finite.*inf at row 1"),
        ({"offset": [0.0, 1.0]}, r"offset must have the same length as y \(4\); got 2"),
        ({"weights": [1.0, -1.0, 1.0, 1.0]}, r"weights must be finite and non-negative"),
        ({"firth": "yes"}, r"firth must be True or False; got 'yes'"),
    ],
)
def test_bad_input_is_one_clear_error(kwargs, pattern):
    args = {"X": [[0.0], [1.0], [2.0], [3.0]], "y": [0, 1, 0, 1], **kwargs}
    X, y = args.pop("X"), args.pop("y")
    with pytest.raises(StatsInputError, match=pattern):
        fit_logistic(X, y, **args)
