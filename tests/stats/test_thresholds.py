"""Operating points: ROC points, classification at a threshold, Youden's J.

Sources named beside each check: scikit-learn ``roc_curve(drop_intermediate=False)``
and ``confusion_matrix`` on the shipped breast-cancer data; methods.md §3.7 toy set
(hand counts).
"""

import math

import numpy as np
import pytest
from sklearn.metrics import confusion_matrix, roc_curve

from calcbuilder.stats import auc, classify, roc_points, youden

# ----------------------------------------------------------------------------- ROC, classify


def test_roc_points_match_sklearn_roc_curve(cancer):
    y, X = cancer
    for j in range(X.shape[1]):
        # sklearn.metrics.roc_curve(drop_intermediate=False): every distinct score kept
        fpr, tpr, thr = roc_curve(y, X[:, j], drop_intermediate=False)
        pts = roc_points(y, X[:, j])
        np.testing.assert_array_equal(pts.thresholds, thr)
        np.testing.assert_allclose(pts.sensitivity, tpr, atol=1e-12)
        np.testing.assert_allclose(1 - pts.specificity, fpr, atol=1e-12)
    assert not pts.thresholds.flags.writeable


# methods.md §3.7 [ANALYTIC] 10-patient toy set
TOY_P = [0.05, 0.10, 0.15, 0.20, 0.30, 0.40, 0.55, 0.70, 0.80, 0.90]
TOY_Y = [0, 0, 0, 1, 0, 0, 1, 0, 1, 1]


def test_toy_auc():
    assert auc(TOY_Y, TOY_P) == pytest.approx(20 / 24, abs=1e-12)  # methods.md §3.7


@pytest.mark.parametrize(
    ("threshold", "counts", "rates"),
    [
        # risk >= 0.5 -> 0.55(1) 0.70(0) 0.80(1) 0.90(1) positive; hand counts
        (0.5, (3, 1, 5, 1), (3 / 4, 5 / 6, 3 / 4, 5 / 6)),
        # a risk equal to the threshold (0.20, an event) is positive
        (0.2, (4, 3, 3, 0), (1.0, 1 / 2, 4 / 7, 1.0)),
        (0.95, (0, 0, 6, 4), (0.0, 1.0, math.nan, 6 / 10)),  # nobody positive: PPV NaN
        (0.0, (4, 6, 0, 0), (1.0, 0.0, 4 / 10, math.nan)),  # nobody negative: NPV NaN
    ],
)
def test_classify_toy(threshold, counts, rates):
    res = classify(TOY_Y, TOY_P, threshold)
    assert (res.tp, res.fp, res.tn, res.fn) == counts
    got = (res.sensitivity, res.specificity, res.ppv, res.npv)
    assert got == pytest.approx(rates, abs=1e-12, nan_ok=True)


def test_youden_toy():
    # [ANALYTIC] J by threshold: .90 1/4, .80 1/2, .70 1/3, .55 7/12, .40 5/12, .30 1/4,
    # .20 1/2, .15 1/3, .10 1/6, .05 0 -> maximum 7/12 at 0.55
    res = youden(TOY_Y, TOY_P)
    assert res.threshold == 0.55
    assert res.j == pytest.approx(7 / 12, abs=1e-12)


def test_youden_tie_takes_lowest_threshold():
    # [ANALYTIC] events .9 .7 .05, non-events .8 .5 .4: J(.9) = 1/3 + 1 - 1,
    # J(.7) = 2/3 + 2/3 - 1; both 1/3 (float sums differ by an ulp), lowest is 0.7
    res = youden([1, 0, 1, 0, 0, 1], [0.9, 0.8, 0.7, 0.5, 0.4, 0.05])
    assert res.threshold == 0.7
    assert res.j == pytest.approx(1 / 3, abs=1e-12)


def test_classify_and_youden_match_sklearn(cancer):
    y, X = cancer
    for j in (0, 3, 7, 21, 26):
        r = X[:, j]
        for t in (0.1, 0.25, float(np.median(r)), 0.5):
            # sklearn.metrics.confusion_matrix on risk >= t
            tn, fp, fn, tp = confusion_matrix(y, (r >= t).astype(int)).ravel()
            res = classify(y, r, t)
            assert (res.tp, res.fp, res.tn, res.fn) == (tp, fp, tn, fn)
        fpr, tpr, thr = roc_curve(y, r, drop_intermediate=False)  # sklearn.metrics.roc_curve
        jj = tpr - fpr
        res = youden(y, r)
        assert res.j == pytest.approx(jj.max(), abs=1e-12)
        assert res.threshold == thr[jj >= jj.max() - 1e-12].min()
