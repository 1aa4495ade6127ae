"""Tests of calcbuilder.stats.calibration against libraries, published and hand values.

Sources are named beside each check. ``methods.md`` is /work/shared/methods.md
([ANALYTIC] values derived by hand there with exact fractions). Datasets ship
inside PyPI packages (scikit-learn, statsmodels); nothing is downloaded.
"""

from __future__ import annotations

import math
from functools import cache

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.special import expit, logit
from scipy.stats import chi2, norm
from sklearn.datasets import load_breast_cancer
from sklearn.metrics import brier_score_loss, log_loss
from statsmodels.datasets import anes96, spector

from calcbuilder.stats import (
    StatsInputError,
    brier,
    calibration_intercept,
    calibration_slope,
    cox_snell_r2,
    hosmer_lemeshow,
    nagelkerke_r2,
    scaled_brier,
    spiegelhalter_z,
)

# methods.md §3.7, 10-patient toy set [ANALYTIC]
TOY_P = np.array([0.05, 0.10, 0.15, 0.20, 0.30, 0.40, 0.55, 0.70, 0.80, 0.90])
TOY_Y = np.array([0, 0, 0, 1, 0, 0, 1, 0, 1, 1])
FIT_TOL = 1e-6  # methods.md §0.3: values from iterative fits

# ----------------------------------------------------------------------------- data


@cache
def spector_apparent():
    """statsmodels spector: GRADE ~ GPA + TUCE + PSI, apparent predictions of Logit."""
    d = spector.load_pandas().data
    X = sm.add_constant(d[["GPA", "TUCE", "PSI"]].to_numpy(float))
    y = d["GRADE"].to_numpy(float)
    res = sm.Logit(y, X).fit(disp=0, method="newton", tol=1e-12, maxiter=100)
    return y, res.predict(), res


@cache
def anes_apparent():
    """statsmodels anes96: vote ~ 9 covariates, apparent predictions of Logit."""
    d = anes96.load_pandas().data
    cols = ["popul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age", "educ", "income"]
    X = sm.add_constant(d[cols].to_numpy(float))
    y = d["vote"].to_numpy(float)
    res = sm.Logit(y, X).fit(disp=0, method="newton", tol=1e-12, maxiter=100)
    return y, res.predict(), res


@cache
def cancer_external():
    """sklearn breast cancer: Logit fitted on even rows, predictions on odd rows.

    The odd rows play the external data, so the calibration is imperfect there.
    """
    data = load_breast_cancer()
    X = sm.add_constant(data.data[:, [0, 1, 4]])  # mean radius, texture, smoothness
    y = data.target.astype(float)
    res = sm.Logit(y[::2], X[::2]).fit(disp=0, method="newton", tol=1e-12, maxiter=100)
    return y[1::2], res.predict(X[1::2])


def integer_weights(n):
    """Deterministic frequency weights 1, 2, 3, 1, 2, 3, ..."""
    return (np.arange(n) % 3 + 1).astype(float)


# ----------------------------------------------------------------------------- Brier


def test_brier_toy_fraction():
    # methods.md §3.7 [ANALYTIC]: Brier = 667/4000
    assert brier(TOY_Y, TOY_P) == pytest.approx(667 / 4000, abs=1e-12)


@pytest.mark.parametrize("data", [cancer_external, anes_apparent])
def test_brier_matches_sklearn(data):
    y, p = data()[:2]
    w = integer_weights(y.size)
    # scikit-learn sklearn.metrics.brier_score_loss (with and without sample_weight)
    assert brier(y, p) == pytest.approx(brier_score_loss(y, p), abs=1e-12)
    assert brier(y, p, weights=w) == pytest.approx(
        brier_score_loss(y, p, sample_weight=w), abs=1e-12
    )


@pytest.mark.parametrize("data", [cancer_external, anes_apparent])
def test_scaled_brier_matches_sklearn_reference_model(data):
    y, p = data()[:2]
    w = integer_weights(y.size)
    for weights in (None, w):
        ybar = np.average(y, weights=weights)
        # scikit-learn brier_score_loss of the model and of the constant prediction ybar
        # (Steyerberg et al. Epidemiology 2010: Brier_max = ybar (1 - ybar))
        ref = brier_score_loss(y, np.full(y.size, ybar), sample_weight=weights)
        expected = 1 - brier_score_loss(y, p, sample_weight=weights) / ref
        assert scaled_brier(y, p, weights=weights) == pytest.approx(expected, abs=1e-12)


# ----------------------------------------------------------------------------- R2


@pytest.mark.parametrize("data", [spector_apparent, anes_apparent])
def test_r2_match_statsmodels_logit_llf_llnull(data):
    y, p, res = data()
    n = y.size
    # statsmodels Logit llf / llnull; Cox-Snell = 1 - exp(2 (llnull - llf) / n),
    # Nagelkerke = Cox-Snell / (1 - exp(2 llnull / n))  (methods.md §3.2)
    cs = 1 - math.exp(2 * (res.llnull - res.llf) / n)
    assert cox_snell_r2(y, p) == pytest.approx(cs, abs=1e-9)
    assert nagelkerke_r2(y, p) == pytest.approx(cs / (1 - math.exp(2 * res.llnull / n)), abs=1e-9)


def test_r2_on_external_data_uses_its_own_mean_and_can_be_negative():
    y, p = cancer_external()
    w = integer_weights(y.size)
    for weights, bad in ((None, False), (w, False), (None, True)):
        risk = 1.0 - p if bad else p  # reversed risks: worse than predicting ybar
        # LL1: scikit-learn log_loss(normalize=False, sample_weight) = -LL1;
        # LL0: statsmodels GLM(Binomial, intercept only, freq_weights).llf
        ll1 = -log_loss(y, risk, normalize=False, sample_weight=weights)
        null = sm.GLM(
            y, np.ones((y.size, 1)), family=sm.families.Binomial(), freq_weights=weights
        ).fit()
        n = y.size if weights is None else w.sum()
        cs = 1 - math.exp(2 * (null.llf - ll1) / n)
        assert cox_snell_r2(y, risk, weights=weights) == pytest.approx(cs, abs=1e-9)
        nk = cs / (1 - math.exp(2 * null.llf / n))
        assert nagelkerke_r2(y, risk, weights=weights) == pytest.approx(nk, abs=1e-9)
        if bad:
            assert cox_snell_r2(y, risk) < 0
            assert nagelkerke_r2(y, risk) < 0


# ----------------------------------------------------------------------------- intercept, slope


def glm_offset_intercept(y, p, weights=None):
    # statsmodels GLM(Binomial) with offset = logit(p): the calibration-in-the-large model
    return sm.GLM(
        y,
        np.ones((y.size, 1)),
        family=sm.families.Binomial(),
        offset=logit(p),
        freq_weights=weights,
    ).fit(tol=1e-12)


def glm_slope(y, p, weights=None):
    # statsmodels GLM(Binomial) of y on [1, logit(p)]: the calibration slope model
    return sm.GLM(
        y, sm.add_constant(logit(p)), family=sm.families.Binomial(), freq_weights=weights
    ).fit(tol=1e-12)


@pytest.mark.parametrize("shift", [0.0, -1.5, 4.0, -8.0])
@pytest.mark.parametrize("weighted", [False, True])
def test_calibration_intercept_matches_statsmodels_glm_offset(shift, weighted):
    y, p = cancer_external()
    risk = expit(logit(p) + shift)  # shifted risks: intercept far from 0
    w = integer_weights(y.size) if weighted else None
    ref = glm_offset_intercept(y, risk, w)
    est = calibration_intercept(y, risk, weights=w)
    assert est.value == pytest.approx(ref.params[0], abs=FIT_TOL)
    assert est.se == pytest.approx(ref.bse[0], abs=FIT_TOL)
    low, high = ref.conf_int()[0]  # statsmodels GLM Wald interval (normal)
    assert (est.low, est.high) == pytest.approx((low, high), abs=FIT_TOL)


def test_calibration_intercept_extreme_miscalibration_converges():
    # Risks around 1% while about 63% have the event: a plain Newton step from 0
    # overshoots here; reference statsmodels GLM (IRLS) with offset.
    y, p = cancer_external()
    risk = expit(logit(p) - 12.0)
    ref = glm_offset_intercept(y, risk)
    assert calibration_intercept(y, risk).value == pytest.approx(ref.params[0], abs=FIT_TOL)


def test_calibration_intercept_constant_risk_closed_form():
    # [ANALYTIC] all LP equal to c: the score equation gives a = logit(ybar) - c.
    y = np.array([1, 0, 0, 1, 0, 0, 0, 1.0])
    est = calibration_intercept(y, np.full(8, 0.2))
    assert est.value == pytest.approx(logit(3 / 8) - logit(0.2), abs=1e-12)
    # Fisher information n p (1 - p) at p = ybar = 3/8
    assert est.se == pytest.approx(1 / math.sqrt(8 * 3 / 8 * 5 / 8), abs=1e-12)


@pytest.mark.parametrize("weighted", [False, True])
def test_calibration_slope_matches_statsmodels_glm(weighted):
    y, p = cancer_external()
    w = integer_weights(y.size) if weighted else None
    ref = glm_slope(y, p, w)
    est = calibration_slope(y, p, weights=w)
    assert est.value == pytest.approx(ref.params[1], abs=FIT_TOL)
    assert est.se == pytest.approx(ref.bse[1], abs=FIT_TOL)
    low, high = ref.conf_int(alpha=0.10)[1]  # statsmodels GLM Wald interval, 90%
    est90 = calibration_slope(y, p, weights=w, level=0.90)
    assert (est90.low, est90.high) == pytest.approx((low, high), abs=FIT_TOL)


@pytest.mark.parametrize("data", [spector_apparent, anes_apparent])
def test_apparent_predictions_have_citl_0_and_slope_1(data):
    # methods.md §3.3 [ANALYTIC]: apparent predictions of an ML logistic fit with an
    # intercept give sum p = sum y, CITL a = 0 and slope b = 1.
    y, p, _ = data()
    assert p.sum() == pytest.approx(y.sum(), abs=1e-8)
    assert calibration_intercept(y, p).value == pytest.approx(0.0, abs=FIT_TOL)
    slope = calibration_slope(y, p)
    assert slope.value == pytest.approx(1.0, abs=FIT_TOL)
    assert slope.low < 1 < slope.high


def test_wald_interval_is_value_plus_minus_normal_quantile():
    # scipy.stats.norm.ppf for the Wald interval at level 0.8
    y, p = cancer_external()
    est = calibration_intercept(y, p, level=0.8)
    z = norm.ppf(0.9)
    assert (est.low, est.high) == pytest.approx((est.value - z * est.se, est.value + z * est.se))


# ----------------------------------------------------------------------------- HL


def hl_oracle(y, risk, g):
    """Slow oracle: sort (risk, y) pairs, np.array_split, sum the g Pearson terms."""
    pairs = sorted(zip(risk.tolist(), y.tolist(), strict=True))
    total = 0.0
    for chunk in np.array_split(np.array(pairs), g):
        obs, exp, m = chunk[:, 1].sum(), chunk[:, 0].sum(), len(chunk)
        total += (obs - exp) ** 2 / (exp * (1 - exp / m))
    return total


def test_hosmer_lemeshow_toy_values():
    # methods.md §3.7 [ANALYTIC]: g = 2 gives 3515/20636, g = 5 gives 30114178/9444435
    two = hosmer_lemeshow(TOY_Y, TOY_P, groups=2, external=True)
    assert two.statistic == pytest.approx(3515 / 20636, abs=1e-12)
    assert two.df == 2
    five = hosmer_lemeshow(TOY_Y, TOY_P, groups=5)
    assert five.statistic == pytest.approx(30114178 / 9444435, abs=1e-12)
    assert five.df == 3
    # p-value: scipy.stats.chi2.sf
    assert five.p_value == pytest.approx(chi2.sf(30114178 / 9444435, 3), abs=1e-12)


@pytest.mark.parametrize("groups", [3, 7, 10, 20])
def test_hosmer_lemeshow_matches_oracle_and_scipy(groups):
    y, p = cancer_external()
    res = hosmer_lemeshow(y, p, groups=groups)
    assert res.statistic == pytest.approx(hl_oracle(y, p, groups), rel=1e-10)
    assert res.df == groups - 2
    assert res.p_value == pytest.approx(chi2.sf(res.statistic, groups - 2), rel=1e-10)
    ext = hosmer_lemeshow(y, p, groups=groups, external=True)
    assert ext.statistic == res.statistic
    assert ext.df == groups
    assert ext.p_value == pytest.approx(chi2.sf(res.statistic, groups), rel=1e-10)


def test_hosmer_lemeshow_ties_are_ordered_by_outcome():
    # Rounded risks give ties across group boundaries; the oracle sorts (risk, y)
    # pairs, i.e. non-events first within a tie, which is the documented rule.
    y, p = cancer_external()
    r = np.clip(np.round(p, 1), 0.05, 0.95)
    assert hosmer_lemeshow(y, r, groups=10).statistic == pytest.approx(
        hl_oracle(y, r, 10), rel=1e-10
    )
    rev = np.arange(y.size)[::-1]
    assert hosmer_lemeshow(y[rev], r[rev]).statistic == hosmer_lemeshow(y, r).statistic


# ----------------------------------------------------------------------------- Spiegelhalter


def test_spiegelhalter_toy_value():
    # methods.md §3.7 [ANALYTIC]: z = 0.085 / sqrt(0.410625) = 0.13264663348894778
    res = spiegelhalter_z(TOY_Y, TOY_P)
    assert res.statistic == pytest.approx(0.13264663348894778, abs=1e-12)
    # two-sided p-value: scipy.stats.norm.sf
    assert res.p_value == pytest.approx(2 * norm.sf(0.13264663348894778), abs=1e-12)


def test_spiegelhalter_matches_fsum_oracle_and_scipy_tail():
    y, p = cancer_external()
    risk = expit(logit(p) + 2.0)  # far off: tiny p-value, checks the tail accuracy
    num = math.fsum((yi - pi) * (1 - 2 * pi) for yi, pi in zip(y, risk, strict=True))
    var = math.fsum((1 - 2 * pi) ** 2 * pi * (1 - pi) for pi in risk)
    res = spiegelhalter_z(y, risk)
    assert res.statistic == pytest.approx(num / math.sqrt(var), rel=1e-12)
    # scipy.stats.norm.sf for the two-sided p-value, accurate far in the tail
    assert res.p_value == pytest.approx(2 * norm.sf(abs(res.statistic)), rel=1e-9)


# ----------------------------------------------------------------------------- weights


@pytest.mark.parametrize(
    "fn",
    [brier, scaled_brier, cox_snell_r2, nagelkerke_r2, calibration_intercept, calibration_slope],
)
def test_duplicated_row_equals_weight_two(fn):
    y, p = cancer_external()
    w = np.ones(y.size)
    w[:25] = 2.0
    dup = np.r_[np.arange(y.size), np.arange(25)]
    a, b = fn(y, p, weights=w), fn(y[dup], p[dup])
    if isinstance(a, float):
        assert a == pytest.approx(b, abs=1e-12)
    else:
        assert (a.value, a.se, a.low, a.high) == pytest.approx(
            (b.value, b.se, b.low, b.high), abs=1e-9
        )


def test_zero_weight_row_is_ignored():
    y, p = cancer_external()
    w = np.ones(y.size)
    w[0] = 0.0
    for fn in (brier, cox_snell_r2, calibration_intercept, calibration_slope):
        a, b = fn(y, p, weights=w), fn(y[1:], p[1:])
        assert (a if isinstance(a, float) else a.value) == pytest.approx(
            b if isinstance(b, float) else b.value, abs=1e-9
        )


# ----------------------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    "fn", [cox_snell_r2, nagelkerke_r2, calibration_intercept, calibration_slope]
)
def test_log_measures_refuse_risk_0_or_1_and_count_rows(fn):
    risk = TOY_P.copy()
    risk[[2, 5]] = [0.0, 1.0]
    with pytest.raises(StatsInputError, match=r"strictly inside \(0, 1\).*2 row\(s\)"):
        fn(TOY_Y, risk)


@pytest.mark.parametrize("fn", [brier, spiegelhalter_z])
def test_other_measures_accept_risk_0_and_1(fn):
    risk = TOY_P.copy()
    risk[[0, 9]] = [0.0, 1.0]
    fn(TOY_Y, risk)
    hosmer_lemeshow(TOY_Y, risk, groups=3)


@pytest.mark.parametrize(
    "fn", [scaled_brier, cox_snell_r2, nagelkerke_r2, calibration_intercept, calibration_slope]
)
def test_single_outcome_class_is_refused_where_both_are_needed(fn):
    with pytest.raises(StatsInputError, match=r"both events and non-events.*0 event\(s\)"):
        fn(np.zeros(10), TOY_P)


def test_single_outcome_class_is_accepted_by_direct_comparisons():
    y = np.zeros(10)
    # [ANALYTIC] no events: Brier = mean p^2
    assert brier(y, TOY_P) == pytest.approx(np.mean(TOY_P**2), abs=1e-15)
    assert hosmer_lemeshow(y, TOY_P, groups=5).statistic > 0
    res = spiegelhalter_z(y, TOY_P)
    # [ANALYTIC] methods.md §3.6 formula with y = 0, summed exactly with math.fsum
    num = math.fsum(-p * (1 - 2 * p) for p in TOY_P)
    var = math.fsum((1 - 2 * p) ** 2 * p * (1 - p) for p in TOY_P)
    assert res.statistic == pytest.approx(num / math.sqrt(var), rel=1e-12)


@pytest.mark.parametrize(
    ("kwargs", "fragment"),
    [
        ({"groups": 2}, r"groups must be at least 3 \(development data\).*got 2"),
        ({"groups": 11}, r"at most the number of rows \(10\); got 11"),
        ({"groups": 0, "external": True}, r"at least 1 \(external data\).*got 0"),
        ({"groups": 4.0}, r"groups must be a whole number; got 4.0"),
        ({"groups": True}, r"groups must be a whole number; got True"),
    ],
)
def test_hosmer_lemeshow_refuses_bad_groups(kwargs, fragment):
    with pytest.raises(StatsInputError, match=fragment):
        hosmer_lemeshow(TOY_Y, TOY_P, **kwargs)


def test_hosmer_lemeshow_refuses_a_group_without_variance():
    risk = np.r_[np.zeros(5), TOY_P[5:]]
    with pytest.raises(StatsInputError, match=r"group 1 of 3 has every risk equal to 0"):
        hosmer_lemeshow(TOY_Y, risk, groups=3)


def test_spiegelhalter_refuses_zero_variance():
    with pytest.raises(StatsInputError, match=r"other than 0, 0.5 and 1"):
        spiegelhalter_z(TOY_Y, np.r_[np.zeros(3), np.full(4, 0.5), np.ones(3)])


def test_calibration_slope_refuses_constant_risk():
    with pytest.raises(StatsInputError, match=r"at least two distinct values.*equal to 0.3"):
        calibration_slope(TOY_Y, np.full(10, 0.3))


def test_calibration_slope_reports_separation_in_its_own_terms():
    y = np.array([0, 0, 0, 0, 1, 1, 1, 1.0])
    risk = np.array([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8])  # LP separates y
    with pytest.raises(StatsInputError, match=r"calibration slope \(logistic fit of y on logit"):
        calibration_slope(y, risk)


@pytest.mark.parametrize("level", [0, 1, 1.5, -0.1, "0.95"])
def test_level_must_lie_inside_0_1(level):
    with pytest.raises(StatsInputError, match=r"level must lie strictly inside \(0, 1\)"):
        calibration_intercept(TOY_Y, TOY_P, level=level)


@pytest.mark.parametrize(
    ("y", "risk", "fragment"),
    [
        (TOY_Y, np.r_[TOY_P[:9], 1.2], r"risk must lie in \[0, 1\]; got 1.2 at row 9"),
        (TOY_Y, np.r_[TOY_P[:9], np.nan], r"risk must be finite.*row 9"),
        (TOY_Y + 1, TOY_P, r"y must be coded 0/1"),
        (TOY_Y, TOY_P[:9], r"risk must have the same length as y \(10\); got 9"),
    ],
)
def test_bad_y_or_risk_named(y, risk, fragment):
    for fn in (brier, scaled_brier, spiegelhalter_z, hosmer_lemeshow, calibration_slope):
        with pytest.raises(StatsInputError, match=fragment):
            fn(y, risk)


def test_bad_weights_named():
    with pytest.raises(StatsInputError, match=r"weights must be finite and non-negative; got -1"):
        brier(TOY_Y, TOY_P, weights=np.r_[np.ones(9), -1.0])
    with pytest.raises(StatsInputError, match=r"weights must have the same length as y"):
        calibration_intercept(TOY_Y, TOY_P, weights=np.ones(3))
