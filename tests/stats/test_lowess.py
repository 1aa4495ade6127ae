"""Tests of calcbuilder.stats.lowess: the smoother, the calibration curve and its errors.

Outside reference: ``statsmodels.nonparametric.smoothers_lowess.lowess`` with
``it=0`` and the same ``delta`` (statsmodels states its expected values come from
R's ``lowess``), on datasets shipped inside scikit-learn and statsmodels.
"""

from __future__ import annotations

from functools import cache

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.special import expit, logit
from sklearn.datasets import load_breast_cancer, load_diabetes
from statsmodels.datasets import anes96, fair, spector
from statsmodels.nonparametric.smoothers_lowess import lowess as sm_lowess

from calcbuilder.stats import StatsInputError, calibration_curve, calibration_errors
from calcbuilder.stats.lowess import lowess

TOL = 1e-10

# ----------------------------------------------------------------------------- data


@cache
def cancer_external():
    """sklearn breast cancer: Logit on even rows, predicted risks on odd rows (no ties)."""
    data = load_breast_cancer()
    X = sm.add_constant(data.data[:, [0, 1, 4]])
    y = data.target.astype(float)
    res = sm.Logit(y[::2], X[::2]).fit(disp=0, method="newton", tol=1e-12)
    return res.predict(X[1::2]), y[1::2]


@cache
def fair_apparent():
    """statsmodels fair: affairs > 0 ~ 5 discrete covariates; 1018 distinct risks, 6366 rows."""
    d = fair.load_pandas().data
    cols = ["rate_marriage", "age", "yrs_married", "children", "religious"]
    X = sm.add_constant(d[cols].to_numpy(float))
    y = (d["affairs"] > 0).to_numpy(float)
    return sm.Logit(y, X).fit(disp=0, method="newton", tol=1e-12).predict(), y


@cache
def anes_apparent():
    """statsmodels anes96: vote ~ 9 covariates, apparent predicted risks."""
    d = anes96.load_pandas().data
    cols = ["popul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age", "educ", "income"]
    X = sm.add_constant(d[cols].to_numpy(float))
    y = d["vote"].to_numpy(float)
    return sm.Logit(y, X).fit(disp=0, method="newton", tol=1e-12).predict(), y


@cache
def diabetes_bmi():
    """sklearn diabetes: disease progression (continuous) on BMI (many tied values)."""
    data = load_diabetes()
    return data.data[:, 2].copy(), data.target.astype(float)


@cache
def scored_cancer():
    """Breast-cancer risks on a grid of quarter steps of the logit, as from a points
    score: 97 distinct risks over 284 rows, up to 9 rows tied."""
    p, y = cancer_external()
    return np.round(expit(np.round(4 * logit(p)) / 4), 6), y


@cache
def anes_age():
    """statsmodels anes96: vote on age in whole years (many ties, and windows whose two
    ends lie equally far from the fitted point)."""
    d = anes96.load_pandas().data
    return d["age"].to_numpy(float), d["vote"].to_numpy(float)


@cache
def diabetes_bmi_tiny():
    """BMI scaled by 1e-6: local variances fall below statsmodels' 1e-12 floor."""
    x, y = diabetes_bmi()
    return x * 1e-6, y


DATASETS = [
    cancer_external,
    fair_apparent,
    anes_apparent,
    diabetes_bmi,
    scored_cancer,
    anes_age,
    diabetes_bmi_tiny,
]


def reference(x, y, frac, delta):
    # statsmodels.nonparametric.lowess(y, x, frac, it=0, delta), fitted values in input order
    return sm_lowess(y, x, frac=frac, it=0, delta=delta, return_sorted=False)


def assert_no_degenerate_window(x, frac):
    """Precondition: no tie group fills a whole window (statsmodels then differs by design)."""
    k = int(frac * x.size + 1e-10)
    assert np.unique(x, return_counts=True)[1].max() < k


# ----------------------------------------------------------------------------- lowess


@pytest.mark.parametrize("data", DATASETS)
@pytest.mark.parametrize("frac", [2 / 3, 0.3, 0.1])
@pytest.mark.parametrize("delta_share", [0.0, 0.01, 0.05])
def test_lowess_matches_statsmodels(data, frac, delta_share):
    x, y = data()
    delta = delta_share * np.ptp(x)
    assert_no_degenerate_window(x, frac)
    got = lowess(x, y, frac=frac, delta=delta)
    np.testing.assert_allclose(got, reference(x, y, frac, delta), rtol=0, atol=TOL)


@pytest.mark.parametrize("n", [2, 3, 4, 5, 6, 9, 13])
@pytest.mark.parametrize("frac", [2 / 3, 1.0, 0.05])
def test_lowess_small_samples_match_statsmodels(n, frac):
    # statsmodels spector: GPA (two tied values in the first 13 rows) and GRADE
    d = spector.load_pandas().data.iloc[:n]
    x, y = d["GPA"].to_numpy(float), d["GRADE"].to_numpy(float)
    delta = 0.01 * np.ptp(x)
    np.testing.assert_allclose(
        lowess(x, y, frac=frac), reference(x, y, frac, delta), rtol=0, atol=TOL
    )


def test_lowess_default_delta_is_one_percent_of_range():
    x, y = diabetes_bmi()
    np.testing.assert_array_equal(lowess(x, y), lowess(x, y, delta=0.01 * np.ptp(x)))


@pytest.mark.parametrize("delta_share", [0.0, 0.01, 0.2])
def test_lowess_reproduces_a_straight_line(delta_share):
    # [ANALYTIC] a local linear fit of exactly linear data is the line itself, and
    # linear interpolation between points of a line stays on it.
    x = diabetes_bmi()[0]
    y = 2.0 - 3.0 * x
    got = lowess(x, y, frac=0.3, delta=delta_share * np.ptp(x))
    np.testing.assert_allclose(got, y, rtol=0, atol=1e-12)


def test_lowess_constant_x_gives_the_mean():
    # [ANALYTIC] all x equal: radius 0, every row weight 1 (R lowess.c rule), so the mean.
    y = np.array([1.0, 0, 0, 1, 1, 0, 1])
    np.testing.assert_allclose(lowess(np.full(7, 0.3), y), np.full(7, 4 / 7), atol=1e-15)


def test_lowess_tie_group_wider_than_window_gives_its_mean():
    # R lowess.c (read in source): when the k nearest rows all equal v (radius 0)
    # every row tied at v gets weight 1, so the fit is their mean. statsmodels
    # instead returns y of one tied row; this module follows R there.
    x = np.r_[np.zeros(8), np.arange(1.0, 8.0)]
    y = np.r_[1, 0, 0, 0, 1, 0, 0, 0, np.ones(7)]
    got = lowess(x, y, frac=0.4, delta=0.0)  # k = 6 < 8 tied rows
    np.testing.assert_allclose(got[:8], 2 / 8, atol=1e-15)


def test_lowess_returns_input_order_and_tied_rows_agree():
    x, y = scored_cancer()
    perm = np.random.default_rng(5).permutation(x.size)
    base = lowess(x, y)
    np.testing.assert_allclose(lowess(x[perm], y[perm]), base[perm], rtol=0, atol=1e-14)
    for v in np.unique(x)[:20]:
        assert np.ptp(base[x == v]) == 0


# ----------------------------------------------------------------------------- curve


@pytest.mark.parametrize("data", [cancer_external, fair_apparent, anes_apparent, scored_cancer])
def test_calibration_curve_matches_statsmodels_at_distinct_risks(data):
    p, y = data()
    curve = calibration_curve(y, p)
    delta = 0.01 * (p.max() - p.min())
    # statsmodels lowess(y, p, frac=2/3, it=0, delta=0.01*range) = R lowess(p, y, iter=0)
    ref = sm_lowess(y, p, frac=2 / 3, it=0, delta=delta, return_sorted=True)
    xs, first = np.unique(ref[:, 0], return_index=True)
    np.testing.assert_array_equal(curve.risk, xs)
    np.testing.assert_allclose(curve.observed, ref[first, 1], rtol=0, atol=TOL)
    assert curve.delta == delta
    assert curve.frac == 2 / 3
    assert not curve.risk.flags.writeable
    assert not curve.observed.flags.writeable


def test_calibration_curve_other_span():
    p, y = fair_apparent()
    curve = calibration_curve(y, p, frac=0.25)
    ref = reference(p, y, 0.25, 0.01 * np.ptp(p))
    np.testing.assert_allclose(curve.observed[np.searchsorted(curve.risk, p)], ref, atol=TOL)


def test_calibration_curve_single_class_and_constant_risk():
    # [ANALYTIC] y all 0: every local fit of zeros is 0
    p = cancer_external()[0]
    np.testing.assert_allclose(calibration_curve(np.zeros(p.size), p).observed, 0.0, atol=1e-15)
    # [ANALYTIC] one risk value: one point at the event proportion
    curve = calibration_curve([1, 0, 0, 0], [0.4] * 4)
    assert curve.risk.tolist() == [0.4]
    assert curve.observed.tolist() == pytest.approx([0.25], abs=1e-15)


# ----------------------------------------------------------------------------- errors


@pytest.mark.parametrize("data", [cancer_external, fair_apparent, anes_apparent, scored_cancer])
def test_calibration_errors_match_independent_statsmodels_computation(data):
    p, y = data()
    # Austin & Steyerberg 2019 definitions over every row, with the curve from
    # statsmodels lowess (it=0, delta=0.01*range) and numpy's type-7 quantile
    fitted = reference(p, y, 2 / 3, 0.01 * np.ptp(p))
    d = np.abs(fitted - p)
    got = calibration_errors(y, p)
    assert got.ici == pytest.approx(d.mean(), abs=TOL)
    assert got.e50 == pytest.approx(np.median(d), abs=TOL)
    assert got.e90 == pytest.approx(np.percentile(d, 90), abs=TOL)
    assert got.emax == pytest.approx(d.max(), abs=TOL)


def test_calibration_errors_constant_risk():
    # [ANALYTIC] one risk r = 0.4 with event proportion 0.25: every |d| = 0.15
    got = calibration_errors([1, 0, 0, 0, 1, 0, 0, 0], [0.4] * 8)
    assert (got.ici, got.e50, got.e90, got.emax) == pytest.approx((0.15,) * 4, abs=1e-15)


def test_calibration_errors_count_tied_rows_once_each():
    # 1 row at one risk and 3 tied rows at another: ICI weights the tied value 3 times
    p, y = np.array([0.2, 0.6, 0.6, 0.6]), np.array([0.0, 1, 0, 1])
    curve = calibration_curve(y, p)
    d = np.abs(curve.observed - curve.risk)
    assert calibration_errors(y, p).ici == pytest.approx((d[0] + 3 * d[1]) / 4, abs=1e-15)


# ----------------------------------------------------------------------------- bad input


@pytest.mark.parametrize("frac", [0, -0.5, 1.5, float("nan"), True, "0.5"])
def test_bad_frac_named(frac):
    with pytest.raises(StatsInputError, match=r"frac must be a number with 0 < frac <= 1; got"):
        calibration_curve([0, 1, 1], [0.2, 0.5, 0.7], frac=frac)
    with pytest.raises(StatsInputError, match=r"frac must be"):
        lowess([1.0, 2.0], [3.0, 4.0], frac=frac)


@pytest.mark.parametrize("delta", [-0.1, float("inf"), float("nan"), "1"])
def test_bad_delta_named(delta):
    with pytest.raises(StatsInputError, match=r"delta must be a finite number >= 0; got"):
        lowess([1.0, 2.0], [3.0, 4.0], delta=delta)


def test_bad_lowess_data_named():
    with pytest.raises(
        StatsInputError, match=r"x must be finite \(no NaN or inf\); got nan at row 1"
    ):
        lowess([1.0, np.nan], [3.0, 4.0])
    with pytest.raises(StatsInputError, match=r"y must be finite.*got inf at row 0"):
        lowess([1.0, 2.0], [np.inf, 4.0])
    with pytest.raises(StatsInputError, match=r"x must have the same length as y \(2\); got 3"):
        lowess([1.0, 2.0, 3.0], [3.0, 4.0])
    with pytest.raises(StatsInputError, match=r"y must not be empty; got 0 rows"):
        lowess([], [])


def test_bad_curve_inputs_named():
    with pytest.raises(StatsInputError, match=r"risk must lie in \[0, 1\]; got -0.1 at row 0"):
        calibration_curve([0, 1], [-0.1, 0.5])
    with pytest.raises(StatsInputError, match=r"y must be coded 0/1"):
        calibration_errors([0, 2], [0.1, 0.5])
    with pytest.raises(StatsInputError, match=r"risk must have the same length as y"):
        calibration_errors([0, 1, 1], [0.1, 0.5])
