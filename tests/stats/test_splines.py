"""Restricted cubic splines: a slow oracle, analytic cases, patsy's natural cubic
spline space on shipped data, and Harrell's default knots."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from patsy import build_design_matrices, dmatrix

from calcbuilder.stats.errors import StatsInputError
from calcbuilder.stats.logistic import fit_logistic
from calcbuilder.stats.splines import DEFAULT_KNOT_QUANTILES, rcs_basis, rcs_knots


def _slow_basis(x, knots):
    """methods.md 10.1 formula, one row and one knot at a time (no vectorisation)."""
    t = [float(v) for v in knots]
    k = len(t)
    out = []
    for xi in x:
        row = [float(xi)]
        for j in range(k - 2):

            def plus3(u):
                return max(u, 0.0) ** 3

            value = (
                plus3(xi - t[j])
                - plus3(xi - t[k - 2]) * (t[k - 1] - t[j]) / (t[k - 1] - t[k - 2])
                + plus3(xi - t[k - 1]) * (t[k - 2] - t[j]) / (t[k - 1] - t[k - 2])
            )
            row.append(value / (t[k - 1] - t[0]) ** 2)
        out.append(row)
    return np.array(out)


KNOT_SETS = [
    [0.0, 1.0, 2.0],
    [24.0, 38.0, 51.95, 77.0],
    [-3.0, -1.0, 0.5, 0.7, 4.0],
    [1.0, 2.0, 4.0, 8.0, 16.0, 32.0],
    [0.1, 0.2, 0.35, 0.5, 0.65, 0.8, 0.9],
    list(np.linspace(10.0, 100.0, 10)),
]


@pytest.mark.parametrize("knots", KNOT_SETS)
def test_basis_matches_slow_formula(knots):
    t = np.asarray(knots)
    span = t[-1] - t[0]
    rng = np.random.default_rng(len(knots))
    x = np.r_[rng.uniform(t[0] - span, t[-1] + span, 200), t]  # inside, outside, at knots
    got = rcs_basis(x, t)
    want = _slow_basis(x, t)
    assert got.shape == (x.size, t.size - 1)
    np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-12 * np.abs(want).max())


def test_hand_values():
    # [ANALYTIC] knots 0, 1, 2: (x^3 - 2 (x-1)^3 + (x-2)^3) / 4 for x >= 2
    # x = 3: (27 - 16 + 1) / 4 = 3; x = 10: (1000 - 1458 + 512) / 4 = 13.5;
    # x = 0.5 (only the first cube): 0.125 / 4; x = -1: 0
    got = rcs_basis([3.0, 10.0, 0.5, -1.0], [0.0, 1.0, 2.0])
    np.testing.assert_allclose(got[:, 1], [3.0, 13.5, 0.03125, 0.0], atol=1e-14)
    np.testing.assert_array_equal(got[:, 0], [3.0, 10.0, 0.5, -1.0])


@pytest.mark.parametrize("knots", KNOT_SETS)
def test_linear_outside_and_smooth_at_knots(knots):
    # [ANALYTIC] Stone & Koo (1985): linear beyond the boundary knots, and a cubic spline
    # (value, first and second derivative continuous) at every knot
    t = np.asarray(knots)
    span = t[-1] - t[0]
    for a, b in [(t[-1], t[-1] + 3 * span), (t[0] - 3 * span, t[0])]:
        x = np.linspace(a, b, 7)
        cols = rcs_basis(x, t)
        np.testing.assert_allclose(
            np.diff(cols, 2, axis=0), 0.0, atol=1e-9 * (1 + np.abs(cols).max())
        )
    h = 1e-4 * span
    for tk in t:
        v = rcs_basis(np.array([tk - 2 * h, tk - h, tk, tk + h, tk + 2 * h]), t)[:, 1:]
        left_slope, right_slope = (v[2] - v[0]) / (2 * h), (v[4] - v[2]) / (2 * h)
        left_curv = (v[2] - 2 * v[1] + v[0]) / h**2
        right_curv = (v[4] - 2 * v[3] + v[2]) / h**2
        np.testing.assert_allclose(
            left_slope, right_slope, atol=1e-3 * (1 + np.abs(left_slope).max())
        )
        np.testing.assert_allclose(left_curv, right_curv, atol=1e-2 * (1 + np.abs(left_curv).max()))


def test_far_outside_the_knots_is_exactly_linear():
    # the exact tail avoids cancellation of large cubes: compare with the slow formula in
    # exact rational arithmetic (fractions.Fraction)
    from fractions import Fraction

    t = [Fraction(v) for v in (0, 1, 2)]
    x = Fraction(10**6)
    exact = ((x - t[0]) ** 3 - (x - t[1]) ** 3 * 2 + (x - t[2]) ** 3) / 4
    assert rcs_basis([1e6], [0.0, 1.0, 2.0])[0, 1] == pytest.approx(float(exact), rel=1e-13)


def _patsy_cr(x, knots):
    # patsy cr(x, knots=t[1:-1], lower_bound=t[0], upper_bound=t[-1]): natural cubic
    # regression spline, the same function space as [1, RCS] (methods.md 10.4)
    env = {"x": x, "kn": knots[1:-1], "lo": knots[0], "hi": knots[-1]}
    design = dmatrix("0 + cr(x, knots=kn, lower_bound=lo, upper_bound=hi)", env)

    def at(new):
        return np.asarray(build_design_matrices([design.design_info], {**env, "x": new})[0])

    return np.asarray(design), at


def test_same_logistic_fit_as_patsy_cr_on_anes96():
    data = sm.datasets.anes96.load_pandas().data  # statsmodels, shipped dataset
    x, y = data["age"].to_numpy(float), data["vote"].to_numpy(float)
    t = rcs_knots(x, 4)
    fit = fit_logistic(rcs_basis(x, t), y)
    cr, cr_at = _patsy_cr(x, t)
    ref = sm.GLM(y, cr, family=sm.families.Binomial()).fit(tol=1e-13)  # statsmodels GLM
    new = np.array([5.0, 18.0, 19.5, 45.0, 80.0, 91.0, 120.0])  # includes x outside t_1..t_k
    ours = fit.coef[0] + rcs_basis(new, t) @ fit.coef[1:]
    np.testing.assert_allclose(ours, cr_at(new) @ ref.params, atol=1e-6)
    assert fit.loglik == pytest.approx(ref.llf, abs=1e-6)


def test_same_least_squares_space_as_patsy_cr_on_breast_cancer():
    from sklearn.datasets import load_breast_cancer  # scikit-learn, shipped dataset

    data = load_breast_cancer(as_frame=True).frame
    x, target = data["mean texture"].to_numpy(), data["mean area"].to_numpy()
    t = rcs_knots(x, 5)
    ours = np.column_stack([np.ones(x.size), rcs_basis(x, t)])
    cr, cr_at = _patsy_cr(x, t)
    b_ours = np.linalg.lstsq(ours, target, rcond=None)[0]
    b_cr = np.linalg.lstsq(cr, target, rcond=None)[0]
    np.testing.assert_allclose(ours @ b_ours, cr @ b_cr, rtol=1e-9)
    new = np.linspace(t[0] - 20, t[-1] + 20, 25)  # new points, also outside the knots
    np.testing.assert_allclose(
        np.column_stack([np.ones(new.size), rcs_basis(new, t)]) @ b_ours,
        cr_at(new) @ b_cr,
        rtol=1e-9,
    )


def test_default_knot_quantiles_are_harrells_table():
    # Harrell, Regression Modeling Strategies 2nd ed. (2015) section 2.4.6 table, as
    # reproduced in methods.md 10.2 (printed to 4 decimals)
    table = {
        3: [0.10, 0.50, 0.90],
        4: [0.05, 0.35, 0.65, 0.95],
        5: [0.05, 0.275, 0.50, 0.725, 0.95],
        6: [0.05, 0.23, 0.41, 0.59, 0.77, 0.95],
        7: [0.025, 0.1833, 0.3417, 0.50, 0.6583, 0.8167, 0.975],
    }
    for k, qs in table.items():
        np.testing.assert_allclose(DEFAULT_KNOT_QUANTILES[k], qs, atol=5e-5)


@pytest.mark.parametrize("k", [3, 4, 5, 6, 7])
def test_default_knots_are_numpy_type7_quantiles(k):
    data = sm.datasets.fair.load_pandas().data  # statsmodels, shipped (n = 6366 >= 100)
    x = data["yrs_married"].to_numpy(float) + data["age"].to_numpy(float) / 7
    want = np.quantile(x, DEFAULT_KNOT_QUANTILES[k], method="linear")  # numpy = R type 7
    np.testing.assert_allclose(rcs_knots(x, k), want, rtol=1e-14)


def test_small_samples_use_5th_smallest_and_largest():
    # methods.md 10.2 (Hmisc): n < 100 -> outer knots are the 5th smallest / largest value
    x = np.random.default_rng(4).gamma(2.0, 3.0, size=60)
    s = np.sort(x)
    got = rcs_knots(x, 4)
    assert got[0] == s[4]
    assert got[-1] == s[-5]
    np.testing.assert_allclose(got[1:-1], np.quantile(x, [0.35, 0.65]), rtol=1e-14)
    assert rcs_knots(np.r_[x, x[:40]], 4)[0] == pytest.approx(np.quantile(np.r_[x, x[:40]], 0.05))


@pytest.mark.parametrize(
    ("args", "pattern"),
    [
        ((np.arange(200.0), 8), r"n_knots must be from 3 to 7 .*got 8"),
        ((np.arange(200.0), 2), r"n_knots must be from 3 to 7 .*got 2"),
        ((np.arange(200.0), 4.0), r"n_knots must be an integer from 3 to 7; got 4\.0"),
        ((np.arange(200.0), True), r"n_knots must be an integer"),
        ((np.arange(9.0), 3), r"x must have at least 10 values .*got 9"),
        (
            (np.r_[np.zeros(100), np.ones(100)], 3),
            r"n_knots = 3 distinct .*; got 2",
        ),
        ((np.r_[np.zeros(120), np.arange(80.0)], 4), r"default knots .* strictly increasing.*tied"),
        ((np.r_[np.arange(150.0), np.nan], 4), r"x must be finite .*nan at row 150"),
    ],
)
def test_knot_errors(args, pattern):
    with pytest.raises(StatsInputError, match=pattern):
        rcs_knots(*args)


@pytest.mark.parametrize(
    ("x", "knots", "pattern"),
    [
        ([1.0], [0.0, 1.0], r"knots must number at least 3; got 2"),
        ([1.0], [0.0, 2.0, 1.0], r"knots must be strictly increasing; got 2 then 1"),
        ([1.0], [0.0, 1.0, 1.0], r"knots must be strictly increasing; got 1 then 1"),
        ([1.0], [0.0, 1.0, np.inf], r"knots must be finite .*inf"),
        ([1.0, np.nan], [0.0, 1.0, 2.0], r"x must be finite .*nan at row 1"),
        ([[1.0, 2.0]], [0.0, 1.0, 2.0], r"x must be one-dimensional"),
        (["a"], [0.0, 1.0, 2.0], r"x must be numeric"),
    ],
)
def test_basis_errors(x, knots, pattern):
    with pytest.raises(StatsInputError, match=pattern):
        rcs_basis(x, knots)


def test_scalar_x_gives_one_row():
    np.testing.assert_array_equal(rcs_basis(3.0, [0.0, 1.0, 2.0]), [[3.0, 3.0]])
