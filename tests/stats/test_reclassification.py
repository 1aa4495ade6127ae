"""NRI and IDI: methods.md §5.4 hand example, a slow oracle, scipy and statsmodels."""

from __future__ import annotations

import math
from statistics import NormalDist

import numpy as np
import pytest

from calcbuilder.stats import (
    IDIResult,
    NRIResult,
    StatsInputError,
    continuous_nri,
    idi,
    nri,
)

# methods.md §5.4 hand example [ANALYTIC]: 4 events then 6 non-events, old -> new
HAND_Y = [1, 1, 1, 1, 0, 0, 0, 0, 0, 0]
HAND_OLD = [0.3, 0.6, 0.4, 0.8, 0.2, 0.5, 0.1, 0.3, 0.6, 0.2]
HAND_NEW = [0.5, 0.7, 0.2, 0.8, 0.1, 0.3, 0.2, 0.3, 0.4, 0.1]
Z975 = NormalDist().inv_cdf(0.975)


# --- slow oracles written from the definitions (Pencina 2008 / 2011) -------------


def category(r, cuts):
    """[0, c1), [c1, c2), ..., [ck, 1]: count the cuts at or below r."""
    k = 0
    for c in cuts:
        if r >= c:
            k += 1
    return k


def slow_nri(y, old, new, move):
    """Loop over patients; ``move(o, n)`` returns +1 (up), -1 (down) or 0."""
    counts = {(1, 1): 0, (1, -1): 0, (0, 1): 0, (0, -1): 0}
    n = {0: 0, 1: 0}
    for yi, o, nw in zip(list(y), list(old), list(new), strict=True):
        n[int(yi)] += 1
        m = move(o, nw)
        if m:
            counts[(int(yi), m)] += 1
    pu_e, pd_e = counts[(1, 1)] / n[1], counts[(1, -1)] / n[1]
    pu_ne, pd_ne = counts[(0, 1)] / n[0], counts[(0, -1)] / n[0]
    total = (pu_e - pd_e) + (pd_ne - pu_ne)
    se = math.sqrt((pu_e + pd_e) / n[1] + (pu_ne + pd_ne) / n[0])
    return pu_e - pd_e, pd_ne - pu_ne, total, se


def slow_idi(y, old, new):
    ev = [nw - o for yi, o, nw in zip(y, old, new, strict=True) if yi == 1]
    ne = [nw - o for yi, o, nw in zip(y, old, new, strict=True) if yi == 0]

    def mean(v):
        return sum(v) / len(v)

    def var(v):
        m = mean(v)
        return sum((x - m) ** 2 for x in v) / (len(v) - 1)

    value = mean(ev) - mean(ne)
    se = math.sqrt(var(ev) / len(ev) + var(ne) / len(ne))
    return value, se


def sign_move(o, nw):
    return int(nw > o) - int(nw < o)


# --- methods.md §5.4 [ANALYTIC] ------------------------------------------------------


def test_hand_example_continuous_nri():
    # methods.md §5.4: NRI_e 1/4, NRI_ne 1/2, NRI 3/4, SE sqrt(47)/12, z 1.312784923481051
    r = continuous_nri(HAND_Y, HAND_OLD, HAND_NEW)
    assert isinstance(r, NRIResult)
    assert r.events == pytest.approx(1 / 4, abs=1e-12)
    assert r.nonevents == pytest.approx(1 / 2, abs=1e-12)
    assert r.total == pytest.approx(3 / 4, abs=1e-12)
    assert r.se == pytest.approx(math.sqrt(47) / 12, abs=1e-12)
    assert r.z == pytest.approx(1.312784923481051, abs=1e-12)
    # two-sided p: scipy.stats.norm.sf as the reference
    from scipy.stats import norm

    assert r.p_value == pytest.approx(2 * norm.sf(1.312784923481051), abs=1e-12)


def test_hand_example_categorical_nri():
    # methods.md §5.4, cuts .25 and .5: NRI_e 0, NRI_ne 1/3, SE sqrt(13/72), z 0.7844645405527361
    r = nri(HAND_Y, HAND_OLD, HAND_NEW, [0.25, 0.5])
    assert r.events == pytest.approx(0.0, abs=1e-12)
    assert r.nonevents == pytest.approx(1 / 3, abs=1e-12)
    assert r.total == pytest.approx(1 / 3, abs=1e-12)
    assert r.se == pytest.approx(math.sqrt(13 / 72), abs=1e-12)
    assert r.z == pytest.approx(0.7844645405527361, abs=1e-12)


def test_hand_example_idi():
    # methods.md §5.4: IDI 13/120, SE 0.0978235372721946, z 1.1074362710059764
    r = idi(HAND_Y, HAND_OLD, HAND_NEW)
    assert isinstance(r, IDIResult)
    assert r.value == pytest.approx(13 / 120, abs=1e-12)
    assert r.se == pytest.approx(0.0978235372721946, abs=1e-12)
    assert r.low == pytest.approx(13 / 120 - Z975 * 0.0978235372721946, abs=1e-12)
    assert r.high == pytest.approx(13 / 120 + Z975 * 0.0978235372721946, abs=1e-12)
    assert r.p_value == pytest.approx(math.erfc(1.1074362710059764 / math.sqrt(2)), abs=1e-12)


def test_risk_equal_to_a_cut_is_in_the_upper_category():
    # [ANALYTIC] 0.2 -> 0.25 crosses the cut 0.25 upwards (upper category includes the cut);
    # 0.5 -> 0.4999 moves down.
    r = nri([1, 1, 0, 0], [0.2, 0.3, 0.5, 0.1], [0.25, 0.3, 0.4999, 0.1], [0.25, 0.5])
    assert r.events == pytest.approx(0.5)
    assert r.nonevents == pytest.approx(0.5)


# --- slow oracle on random data --------------------------------------------------------


def _random_pair(seed, n=400):
    rng = np.random.default_rng(seed)
    old = rng.integers(1, 100, n) / 100
    new = np.clip(old + rng.integers(-15, 16, n) / 100, 0, 1)  # many exact ties old == new
    y = (rng.random(n) < (old + new) / 2).astype(int)
    return y, old, new


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_categorical_nri_matches_slow_oracle(seed):
    y, old, new = _random_pair(seed)
    cuts = [0.1, 0.2, 0.5]  # risks on the 0.01 grid tie with the cuts
    r = nri(y, old, new, cuts)
    e, ne, total, se = slow_nri(
        y, old, new, lambda o, nw: sign_move(category(o, cuts), category(nw, cuts))
    )
    assert (r.events, r.nonevents, r.total, r.se) == pytest.approx((e, ne, total, se), abs=1e-12)
    assert r.z == pytest.approx(total / se, abs=1e-12)


@pytest.mark.parametrize("seed", [4, 5])
def test_continuous_nri_and_idi_match_slow_oracle(seed):
    y, old, new = _random_pair(seed)
    r = continuous_nri(y, old, new)
    e, ne, total, se = slow_nri(y, old, new, sign_move)
    assert (r.events, r.nonevents, r.total, r.se) == pytest.approx((e, ne, total, se), abs=1e-12)
    i = idi(y, old, new)
    value, se_idi = slow_idi(y, old, new)
    assert (i.value, i.se) == pytest.approx((value, se_idi), abs=1e-12)


# --- outside references on a shipped dataset -------------------------------------


@pytest.fixture(scope="module")
def nested_models():
    """Two nested logistic models on sklearn.datasets.load_breast_cancer."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression

    data = load_breast_cancer()
    y = 1 - data.target  # event = malignant
    X = data.data
    old = LogisticRegression(C=1e6, max_iter=2000).fit(X[:, [1]], y).predict_proba(X[:, [1]])
    Xn = X[:, [1, 0]]  # add mean radius
    new = LogisticRegression(C=1e6, max_iter=2000).fit(Xn, y).predict_proba(Xn)
    return y, old[:, 1], new[:, 1]


def test_idi_z_equals_welch_t_statistic(nested_models):
    # IDI / SE is Welch's two-sample statistic on the risk differences of events vs
    # non-events: reference scipy.stats.ttest_ind(equal_var=False); SE parts via scipy.stats.sem.
    from scipy.stats import sem, ttest_ind

    y, old, new = nested_models
    d = new - old
    r = idi(y, old, new)
    welch = ttest_ind(d[y == 1], d[y == 0], equal_var=False)
    assert r.value / r.se == pytest.approx(welch.statistic, rel=1e-10)
    assert r.se == pytest.approx(math.hypot(sem(d[y == 1]), sem(d[y == 0])), rel=1e-10)
    # IDI = difference of discrimination slopes (Pencina 2008), means by numpy
    slope_new = new[y == 1].mean() - new[y == 0].mean()
    slope_old = old[y == 1].mean() - old[y == 0].mean()
    assert r.value == pytest.approx(slope_new - slope_old, abs=1e-12)


@pytest.mark.parametrize("cuts", [None, [0.1, 0.2, 0.5]])
def test_nri_components_match_statsmodels_mcnemar(nested_models, cuts):
    # Per class, (NRI component)^2 / (its variance (up+down)/n^2) is McNemar's chi-square
    # without continuity correction on the up/down counts: reference
    # statsmodels.stats.contingency_tables.mcnemar(exact=False, correction=False).
    from statsmodels.stats.contingency_tables import mcnemar

    y, old, new = nested_models
    if cuts is None:
        r, up, down = continuous_nri(y, old, new), new > old, new < old
    else:
        co, cn = np.searchsorted(cuts, old, "right"), np.searchsorted(cuts, new, "right")
        r, up, down = nri(y, old, new, cuts), cn > co, cn < co
    var = 0.0
    for cls, comp in ((1, r.events), (0, r.nonevents)):
        b, c = int((up & (y == cls)).sum()), int((down & (y == cls)).sum())
        chi2 = mcnemar([[0, b], [c, 0]], exact=False, correction=False).statistic
        assert b != c  # the check needs a nonzero component
        var += comp**2 / chi2
    assert r.se == pytest.approx(math.sqrt(var), rel=1e-10)


# --- degenerate but valid ------------------------------------------------------------


def test_identical_models_give_zero():
    r = nri(HAND_Y, HAND_OLD, HAND_OLD, [0.25, 0.5])
    assert (r.total, r.se, r.z, r.p_value) == (0.0, 0.0, 0.0, 1.0)
    i = idi(HAND_Y, HAND_OLD, HAND_OLD)
    assert (i.value, i.se, i.low, i.high, i.p_value) == (0.0, 0.0, 0.0, 0.0, 1.0)


# --- bad input ------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("cuts", "fragment"),
    [
        ([0.5, 0.25], r"cuts must be strictly increasing; got 0\.5 then 0\.25"),
        ([0.25, 0.25], r"cuts must be strictly increasing"),
        ([0.0, 0.5], r"cuts must lie strictly inside \(0, 1\); got 0\.0 at position 0"),
        ([0.5, 1.0], r"cuts must lie strictly inside \(0, 1\); got 1\.0 at position 1"),
        ([float("nan")], r"cuts must lie strictly inside \(0, 1\); got nan"),
        ([], r"cuts must not be empty"),
    ],
)
def test_bad_cuts(cuts, fragment):
    with pytest.raises(StatsInputError, match=fragment):
        nri(HAND_Y, HAND_OLD, HAND_NEW, cuts)


@pytest.mark.parametrize("fn", [continuous_nri, idi, lambda y, o, n: nri(y, o, n, [0.5])])
def test_bad_data(fn):
    with pytest.raises(StatsInputError, match=r"risk_new must have the same length as y \(10\)"):
        fn(HAND_Y, HAND_OLD, HAND_NEW[:-1])
    with pytest.raises(StatsInputError, match=r"risk_old must lie in \[0, 1\]; got 1\.2 at row 0"):
        fn(HAND_Y, [1.2, *HAND_OLD[1:]], HAND_NEW)
    with pytest.raises(StatsInputError, match=r"y must contain both events and non-events"):
        fn([1] * 10, HAND_OLD, HAND_NEW)
    with pytest.raises(StatsInputError, match=r"got 0 event\(s\) and 10 non-event\(s\)"):
        fn([0] * 10, HAND_OLD, HAND_NEW)


def test_idi_needs_two_of_each_class():
    with pytest.raises(StatsInputError, match=r"more than 1 of the events.*got 1"):
        idi([1, 0, 0], [0.2, 0.3, 0.4], [0.3, 0.2, 0.1])
